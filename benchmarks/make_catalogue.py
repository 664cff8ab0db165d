"""Generate a synthetic catalogue of N recipes of realistic kinds for the speed benchmark.

Kinds (in rotation): small multiples with a per-panel least-squares fit and its confidence band
(statsmodels), a clustered heat map (scipy.cluster), a scatter plot of 5k-50k points with binned
means (scipy.stats), a forest plot with a heterogeneity test (scipy.stats), a histogram grid with
fitted gamma densities (scipy.stats). The scripts import what an analyst's scripts import, so
starting the stack costs the naive way what it costs in a real catalogue. Data files range from about
1 KB to 2 MB. Everything is invented and seeded, so two runs write identical catalogues, and no
column looks like an identifier (the data screen passes).
"""
from __future__ import annotations

import argparse
import shutil
from pathlib import Path

import numpy as np

TOML = '''title = "{title}"
summary = "Synthetic {kind} number {i} for the speed benchmark."
alt = "A synthetic {kind} drawn from invented, seeded data for timing figfolio."
tags = ["benchmark", "{kind}"]
methods = ["{method}"]
authors = ["Benchmark generator"]
width_mm = 180
data_origin = "synthetic"
'''

SMALL_MULTIPLES = '''import numpy as np
import pandas as pd
import matplotlib.pyplot as plt
import statsmodels.api as sm

data = pd.read_csv("data/series.csv")
groups = sorted(data["group"].unique())
fig, axes = plt.subplots(4, 6, figsize=(7.1, 5), sharex=True, sharey=True, layout="constrained")
for ax, g in zip(axes.flat, groups):
    d = data[data["group"] == g]
    fit = sm.OLS(d["rate"], sm.add_constant(d["week"])).fit()
    band = fit.get_prediction(sm.add_constant(d["week"])).summary_frame(alpha=0.05)
    ax.plot(d["week"], d["rate"], color="0.4", linewidth=0.8)
    ax.fill_between(d["week"], band["mean_ci_lower"], band["mean_ci_upper"], color="#56B4E9",
                    alpha=0.4, linewidth=0)
    ax.plot(d["week"], band["mean"], color="#0072B2")
    ax.set_title(f"{g} (slope {fit.params['week']:+.2f})", fontsize=7)
fig.supxlabel("Week")
fig.supylabel("Rate per 1,000")
plt.show()
'''

HEATMAP = '''import numpy as np
import pandas as pd
import matplotlib.pyplot as plt
from scipy.cluster.hierarchy import linkage, leaves_list

m = pd.read_csv("data/matrix.csv", index_col=0)
order_r = leaves_list(linkage(m.values, "average"))
order_c = leaves_list(linkage(m.values.T, "average"))
fig, ax = plt.subplots(figsize=(7.1, 6), layout="constrained")
im = ax.imshow(m.values[order_r][:, order_c], cmap="viridis", aspect="auto")
ax.set_xlabel("Marker")
ax.set_ylabel("Sample")
fig.colorbar(im, ax=ax, label="Level")
plt.show()
'''

SCATTER = '''import numpy as np
import pandas as pd
import matplotlib.pyplot as plt
from scipy import stats

d = pd.read_csv("data/points.csv")
means, edges, _ = stats.binned_statistic(d["x"], d["y"], "mean", bins=20)
counts, _, _ = stats.binned_statistic(d["x"], d["y"], "count", bins=20)
spread, _, _ = stats.binned_statistic(d["x"], d["y"], "std", bins=20)
mids = (edges[:-1] + edges[1:]) / 2
r, p = stats.pearsonr(d["x"], d["y"])
fig, ax = plt.subplots(figsize=(7.1, 5), layout="constrained")
ax.scatter(d["x"], d["y"], s=2, alpha=0.2, color="#D55E00", linewidths=0)
ax.errorbar(mids, means, yerr=1.96 * spread / np.sqrt(np.maximum(counts, 1)), color="black",
            marker="o", markersize=3, linewidth=1)
ax.set_title(f"Binned means with 95% intervals (r = {r:.2f})", fontsize=9)
ax.set_xlabel("Exposure")
ax.set_ylabel("Response")
plt.show()
'''

FOREST = '''import numpy as np
import pandas as pd
import matplotlib.pyplot as plt
from scipy import stats

d = pd.read_csv("data/studies.csv")
z = stats.norm.ppf(0.975)
w = 1 / d["se"] ** 2
pooled = float(np.sum(w * d["estimate"]) / np.sum(w))
q = float(np.sum(w * (d["estimate"] - pooled) ** 2))
p_het = stats.chi2.sf(q, len(d) - 1)
fig, ax = plt.subplots(figsize=(7.1, 0.25 * len(d) + 1), layout="constrained")
y = np.arange(len(d))[::-1]
ax.errorbar(d["estimate"], y, xerr=z * d["se"], fmt="none", ecolor="0.3")
ax.scatter(d["estimate"], y, s=200 * w / w.max(), marker="s", color="#0072B2")
ax.axvline(pooled, color="#D55E00", linestyle="--")
ax.set_yticks(y, d["study"], fontsize=7)
ax.set_xlabel("Log odds ratio")
ax.set_title(f"Pooled {pooled:.2f}; heterogeneity Q = {q:.1f}, p = {p_het:.2f}", fontsize=9)
plt.show()
'''

HISTOGRAMS = '''import numpy as np
import pandas as pd
import matplotlib.pyplot as plt
from scipy import stats

d = pd.read_csv("data/values.csv")
fig, axes = plt.subplots(2, 3, figsize=(7.1, 4), layout="constrained")
for ax, col in zip(axes.flat, d.columns):
    ax.hist(d[col], bins=30, density=True, color="#009E73")
    shape, loc, scale = stats.gamma.fit(d[col], floc=0)
    grid = np.linspace(0, d[col].max(), 200)
    ax.plot(grid, stats.gamma.pdf(grid, shape, loc, scale), color="black", linewidth=1)
    ax.set_xlabel(col)
    ax.set_ylabel("Density")
plt.show()
'''

TINY = '''import pandas as pd
import matplotlib.pyplot as plt

d = pd.read_csv("data/values.csv")
fig, ax = plt.subplots(figsize=(3, 2))
ax.plot(d["a"].to_numpy()[:30], color="#009E73")
ax.set_xlabel("Index")
ax.set_ylabel("Value")
plt.show()
'''

KINDS = [("small multiples", "ordinary least squares", SMALL_MULTIPLES),
         ("heat map", "hierarchical clustering", HEATMAP),
         ("scatter", "scatter plot", SCATTER),
         ("forest plot", "inverse-variance pooling", FOREST),
         ("histogram", "maximum likelihood", HISTOGRAMS)]


def write_data(kind: str, folder: Path, rng: np.random.Generator, size: float) -> None:
    """Write the recipe's data; ``size`` in [0, 1] scales the file from ~1 KB to ~2 MB."""
    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    if kind == "small multiples":
        weeks = int(8 + size * 300)
        rows = ["group,week,rate"]
        for g in range(24):
            base, slope = rng.uniform(5, 30), rng.normal(0, 0.05)
            for w in range(weeks):
                rows.append(f"G{g + 1:02d},{w},{base + slope * w + rng.normal(0, 2):.3f}")
        (data / "series.csv").write_text("\n".join(rows) + "\n")
    elif kind == "heat map":
        n = int(10 + size * 300)
        m = rng.normal(size=(n, 40)) + np.repeat(rng.normal(size=(4, 40)), n // 4 + 1, 0)[:n]
        header = "sample," + ",".join(f"m{j}" for j in range(40))
        lines = [header] + [f"s{i}," + ",".join(f"{v:.3f}" for v in row) for i, row in enumerate(m)]
        (data / "matrix.csv").write_text("\n".join(lines) + "\n")
    elif kind == "scatter":
        n = int(5000 + size * 45000)
        x = rng.normal(size=n)
        y = 0.6 * x + rng.normal(size=n)
        lines = ["x,y"] + [f"{a:.4f},{b:.4f}" for a, b in zip(x, y)]
        (data / "points.csv").write_text("\n".join(lines) + "\n")
    elif kind == "forest plot":
        k = int(5 + size * 25)
        est, se = rng.normal(-0.2, 0.3, k), rng.uniform(0.1, 0.5, k)
        lines = ["study,estimate,se"] + [f"Study {i + 1},{e:.4f},{s:.4f}"
                                         for i, (e, s) in enumerate(zip(est, se))]
        (data / "studies.csv").write_text("\n".join(lines) + "\n")
    else:
        n = int(30 + size * 50000)  # up to ~2 MB
        cols = [rng.gamma(2 + j, 1, n) for j in range(6)]
        lines = ["a,b,c,d,e,f"] + [",".join(f"{c[i]:.3f}" for c in cols) for i in range(n)]
        (data / "values.csv").write_text("\n".join(lines) + "\n")


def make_catalogue(root: Path, n: int, seed: int = 20261202, tiny: bool = False,
                   formats: tuple[str, ...] | None = None) -> Path:
    """Create ``root`` with ``n`` recipes. ``tiny``: one small line chart on ~1 KB of data,
    for the scale run, where the cost of figfolio itself (not the figures) is measured."""
    if root.exists():
        shutil.rmtree(root)
    (root / "recipes").mkdir(parents=True)
    settings = 'title = "Benchmark catalogue"\n'
    if formats:
        settings += "formats = [" + ", ".join(f'"{f}"' for f in formats) + "]\n"
    (root / "figfolio.toml").write_text(settings)
    rng = np.random.default_rng(seed)
    for i in range(n):
        kind, method, script = ("tiny line", "line plot", TINY) if tiny \
            else KINDS[i % len(KINDS)]
        slug = f"bench-{i:04d}"
        folder = root / "recipes" / slug
        folder.mkdir()
        (folder / "recipe.toml").write_text(TOML.format(title=f"Benchmark {kind} {i}", kind=kind,
                                                        i=i, method=method))
        (folder / "figure.py").write_text(script)
        size = 0.0 if tiny else float(rng.uniform(0, 1) ** 2)
        write_data("histogram" if tiny else kind, folder, rng, size)
    return root


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("root", type=Path)
    parser.add_argument("-n", type=int, default=60)
    parser.add_argument("--tiny", action="store_true")
    args = parser.parse_args()
    make_catalogue(args.root, args.n, tiny=args.tiny)
    print(f"wrote {args.n} recipes to {args.root}")


if __name__ == "__main__":
    main()
