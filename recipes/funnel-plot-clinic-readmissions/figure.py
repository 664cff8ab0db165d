"""A funnel plot of clinics' 30-day readmission proportions against control limits.

Following Spiegelhalter (2005, Statistics in Medicine 24:1185-1202): each clinic's proportion
is plotted against its number of admissions (the precision axis), around the network-wide
target, with exact binomial 95% and 99.8% limits that narrow as clinics grow. A clinic outside
the 99.8% funnel is unlikely to differ by chance alone. Because real clinics vary more than
binomial sampling allows, the over-dispersion factor is estimated from Winsorised z-scores and
the random-effects 99.8% limits are drawn as well. Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

DATA = Path("data") / "readmissions.csv"
WIDTH_MM = 120
LIMITS = (0.95, 0.998)  # two-sided coverage: "warning" and "alarm" limits (Spiegelhalter 2005)


def binomial_limit(n: np.ndarray | int, target: float, prob: float) -> np.ndarray:
    """Exact binomial ``prob`` quantile of a proportion, interpolated between integers.

    The binomial quantile jumps in steps of 1/n, which draws a saw-toothed funnel; Spiegelhalter
    (2005, appendix A.1.1) interpolates: with r the smallest count whose CDF reaches ``prob``,
    alpha = (F(r) - prob) / (F(r) - F(r - 1)) and the limit is (r - alpha) / n.
    """
    n = np.asarray(n, float)
    r = stats.binom.ppf(prob, n, target)
    upper_cdf = stats.binom.cdf(r, n, target)
    lower_cdf = stats.binom.cdf(r - 1, n, target)
    step = np.where(upper_cdf > lower_cdf, upper_cdf - lower_cdf, 1.0)
    alpha = (upper_cdf - prob) / step
    return (r - alpha) / n


def funnel(n: np.ndarray, target: float, coverage: float) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper limits with the given two-sided coverage at sizes ``n``."""
    tail = (1 - coverage) / 2
    return binomial_limit(n, target, tail), binomial_limit(n, target, 1 - tail)


@dataclass(frozen=True)
class Dispersion:
    """Over-dispersion summaries of Spiegelhalter (2005), section 3.2."""

    phi: float          # multiplicative factor: mean of squared Winsorised z-scores
    tau2: float         # additive between-clinic variance (0 when phi is not above 1)
    p_value: float      # chi-squared test of N * phi on N - 1 degrees of freedom


def winsorise(values: np.ndarray, fraction: float = 0.1) -> np.ndarray:
    """Replace the ``fraction`` most extreme values at each end by the nearest kept value."""
    values = np.asarray(values, float)
    k = int(np.floor(fraction * values.size))
    if k == 0:
        return values.copy()
    ordered = np.sort(values)
    return np.clip(values, ordered[k], ordered[-k - 1])


def dispersion(events: np.ndarray, n: np.ndarray, target: float) -> Dispersion:
    """Estimate over-dispersion from 10% Winsorised z-scores, then tau^2 by moments."""
    events, n = np.asarray(events, float), np.asarray(n, float)
    se2 = target * (1 - target) / n
    z = (events / n - target) / np.sqrt(se2)
    count = z.size
    phi = float(np.mean(winsorise(z) ** 2))
    w = 1 / se2
    excess = count * phi - (count - 1)
    tau2 = max(0.0, float(excess / (w.sum() - (w ** 2).sum() / w.sum())))
    return Dispersion(phi, tau2, float(stats.chi2.sf(count * phi, count - 1)))


def random_effects_limits(n: np.ndarray, target: float, tau2: float, coverage: float
                          ) -> tuple[np.ndarray, np.ndarray]:
    """Normal limits target ± z * sqrt(p(1-p)/n + tau^2): the additive over-dispersed funnel."""
    z = stats.norm.ppf(0.5 + coverage / 2)
    half = z * np.sqrt(target * (1 - target) / np.asarray(n, float) + tau2)
    return target - half, target + half


def classify(events: np.ndarray, n: np.ndarray, target: float) -> list[str]:
    """'high' / 'low' when outside the 99.8% exact limits at the clinic's own size."""
    low, high = funnel(np.asarray(n), target, LIMITS[1])
    share = np.asarray(events) / np.asarray(n)
    return ["high" if p > h else "low" if p < lo else "within"
            for p, lo, h in zip(share, low, high)]


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def draw(frame: pd.DataFrame) -> Figure:
    """Proportion against admissions, target line, exact funnels, over-dispersed funnel."""
    plt.rcParams.update({"font.size": 7})
    events, n = frame["readmissions_30d"].to_numpy(), frame["admissions"].to_numpy()
    target = events.sum() / n.sum()
    grid = np.arange(60, int(n.max() * 1.08))
    width = WIDTH_MM / 25.4
    fig, ax = plt.subplots(figsize=(width, width * 0.72), layout="constrained")
    for coverage, style in zip(LIMITS, ("--", "-")):
        low, high = funnel(grid, target, coverage)
        label = f"{coverage:.1%} exact binomial limits".replace(".0%", "%")
        ax.plot(grid, 100 * low, style, color="#444444", lw=0.9, label=label)
        ax.plot(grid, 100 * high, style, color="#444444", lw=0.9)
    spread = dispersion(events, n, target)
    if spread.tau2 > 0:
        low, high = random_effects_limits(grid, target, spread.tau2, LIMITS[1])
        ax.plot(grid, 100 * low, ":", color="#009E73", lw=1.4,
                label="99.8% limits allowing for over-dispersion")
        ax.plot(grid, 100 * high, ":", color="#009E73", lw=1.4)
    ax.axhline(100 * target, color="#000000", lw=0.8)
    verdict = classify(events, n, target)
    colours = {"high": "#D55E00", "low": "#0072B2", "within": "#7F7F7F"}
    ax.scatter(n, 100 * events / n, s=18, c=[colours[v] for v in verdict],
               edgecolors="white", linewidths=0.5, zorder=3)
    for row, v in zip(frame.itertuples(), verdict):
        if v != "within":
            ax.annotate(row.clinic, (row.admissions, 100 * row.readmissions_30d / row.admissions),
                        xytext=(5, 0), textcoords="offset points", va="center",
                        color=colours[v], fontsize=7)
    ax.text(0.3 * grid[-1], 100 * target, f" network {100 * target:.1f}%", ha="left",
            va="bottom", fontsize=7)
    ax.set_xlabel("Admissions in 2023 (clinic size)")
    ax.set_ylabel("Readmitted within 30 days (%)")
    ax.set_xlim(0, grid[-1])
    ax.set_ylim(0, None)
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(loc="upper right", frameon=False, fontsize=7,
              title=f"Over-dispersion \u03c6 = {spread.phi:.2f} (p = {spread.p_value:.2f})",
              title_fontsize=7)
    ax.set_title("30-day readmissions in 30 clinics against the network rate (invented data)",
                 loc="left", fontsize=7.5)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
