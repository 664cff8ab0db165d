"""Agreement of two measurement methods: scatter with the identity line and Lin's CCC.

1,500 invented HbA1c samples measured by the laboratory method and by a point-of-care device.
Agreement means lying ON the identity line y = x, not merely near some straight line — which is
why Pearson's r is the wrong summary and Lin's (1989) concordance correlation coefficient is the
right one: it is r times a bias-correction factor that penalises shifts in location and scale.
Both methods report whole numbers, so ~60% of points coincide; transparent markers (alpha
blending) let dense regions darken instead of hiding repeated pairs. Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

DATA = Path("data") / "hba1c_pairs.csv"
WIDTH_MM = 85


@dataclass(frozen=True)
class Concordance:
    """Lin's coefficient with its parts and its interval."""

    ccc: float
    pearson: float
    bias_factor: float      # C_b = ccc / r: 1 when means and SDs agree
    low: float
    high: float
    n: int


def lin_ccc(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """(ccc, r, C_b) with moments divided by n, as in Lin (1989).

    ccc = 2 s_xy / (s_x^2 + s_y^2 + (mean_x - mean_y)^2).
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    sx2, sy2 = x.var(), y.var()
    sxy = np.mean((x - x.mean()) * (y - y.mean()))
    ccc = 2 * sxy / (sx2 + sy2 + (x.mean() - y.mean()) ** 2)
    r = sxy / np.sqrt(sx2 * sy2)
    return float(ccc), float(r), float(ccc / r)


def ccc_z_variance(ccc: float, r: float, u: float, n: int) -> float:
    """Asymptotic variance of z = atanh(ccc), Lin (1989) as corrected in Lin (2000).

    u = (mean_x - mean_y) / sqrt(s_x s_y) is the location shift in SD units.
    """
    c2 = ccc * ccc
    return ((1 - r * r) * c2 / ((1 - c2) * r * r)
            + 2 * ccc ** 3 * (1 - ccc) * u * u / (r * (1 - c2) ** 2)
            - ccc ** 4 * u ** 4 / (2 * r * r * (1 - c2) ** 2)) / (n - 2)


def concordance(x: np.ndarray, y: np.ndarray, level: float = 0.95) -> Concordance:
    """CCC with a Fisher-z interval: the z scale makes the sampling distribution near normal."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    ccc, r, cb = lin_ccc(x, y)
    u = (x.mean() - y.mean()) / np.sqrt(x.std() * y.std())
    se = np.sqrt(ccc_z_variance(ccc, r, u, x.size))
    z = stats.norm.ppf(0.5 + level / 2)
    return Concordance(ccc, r, cb, float(np.tanh(np.arctanh(ccc) - z * se)),
                       float(np.tanh(np.arctanh(ccc) + z * se)), x.size)


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def draw(frame: pd.DataFrame, alpha: float = 0.12) -> Figure:
    """Square plot, equal axes, identity line, translucent points, the statistics in a corner."""
    plt.rcParams.update({"font.size": 7})
    x = frame["reference_mmol_mol"].to_numpy()
    y = frame["point_of_care_mmol_mol"].to_numpy()
    result = concordance(x, y)
    width = WIDTH_MM / 25.4
    fig, ax = plt.subplots(figsize=(width, width), layout="constrained")
    lims = (min(x.min(), y.min()) - 3, max(x.max(), y.max()) + 3)
    ax.plot(lims, lims, color="#D55E00", lw=1.0, zorder=3, label="identity line y = x")
    ax.scatter(x, y, s=9, color="#000000", alpha=alpha, linewidths=0, zorder=2,
               label=f"sample (opacity {alpha:g})")
    ax.set_xlim(lims)
    ax.set_ylim(lims)
    ax.set_aspect("equal")
    ax.set_xlabel("Laboratory method, HbA1c (mmol/mol)")
    ax.set_ylabel("Point-of-care device, HbA1c (mmol/mol)")
    ax.spines[["top", "right"]].set_visible(False)
    text = (f"Lin's CCC = {result.ccc:.3f}\n95% CI {result.low:.3f} to {result.high:.3f}\n"
            f"Pearson r = {result.pearson:.3f}\nbias factor C$_b$ = {result.bias_factor:.3f}\n"
            f"n = {result.n:,}")
    ax.text(0.97, 0.03, text, transform=ax.transAxes, ha="right", va="bottom", fontsize=7,
            linespacing=1.35)
    ax.legend(loc="upper left", frameon=False, fontsize=7, handlelength=1.5)
    ax.set_title("Two HbA1c methods on 1,500 samples (invented)", loc="left", fontsize=7.5)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
