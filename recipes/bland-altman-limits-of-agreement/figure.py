"""A Bland-Altman plot: differences against means, bias, limits of agreement and their CIs.

96 invented participants had systolic blood pressure read by an observer and by an automated
cuff. Plotting the difference against the mean (Bland & Altman 1986) shows how far apart the
methods can be for one person — the question a clinician asks — which a correlation cannot.
The bias (mean difference) and the 95% limits of agreement are drawn with their 95%
confidence intervals as shaded bands, because limits from ~100 people are themselves uncertain.
Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

DATA = Path("data") / "bp_pairs.csv"
WIDTH_MM = 120


@dataclass(frozen=True)
class Agreement:
    """Bias and limits of agreement, each with a confidence interval."""

    n: int
    bias: float
    sd: float
    lower: float
    upper: float
    bias_ci: tuple[float, float]
    lower_ci: tuple[float, float]
    upper_ci: tuple[float, float]


def limits_of_agreement(reference: np.ndarray, other: np.ndarray, multiplier: float = 1.96,
                        level: float = 0.95) -> Agreement:
    """Differences other - reference; bias +/- multiplier * SD; approximate CIs.

    CIs follow Bland & Altman (1986): SE(bias) = s/sqrt(n), SE(limit) ~ sqrt(3 s^2 / n), with
    a t quantile on n - 1 df. (1.96 is the 95% normal multiplier; the 1986 paper rounded to 2.)
    """
    diff = np.asarray(other, float) - np.asarray(reference, float)
    n = diff.size
    bias, sd = float(diff.mean()), float(diff.std(ddof=1))
    t = float(stats.t.ppf(0.5 + level / 2, n - 1))
    se_bias, se_limit = sd / np.sqrt(n), float(np.sqrt(3 * sd * sd / n))
    lower, upper = bias - multiplier * sd, bias + multiplier * sd
    return Agreement(n, bias, sd, lower, upper, (bias - t * se_bias, bias + t * se_bias),
                     (lower - t * se_limit, lower + t * se_limit),
                     (upper - t * se_limit, upper + t * se_limit))


def proportional_bias(reference: np.ndarray, other: np.ndarray) -> tuple[float, float]:
    """Slope of difference on mean and its p-value: a trend means the bias depends on level."""
    reference, other = np.asarray(reference, float), np.asarray(other, float)
    fit = stats.linregress((reference + other) / 2, other - reference)
    return float(fit.slope), float(fit.pvalue)


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def draw(frame: pd.DataFrame) -> Figure:
    """Points, three horizontal lines with CI bands, labels at the right margin."""
    plt.rcParams.update({"font.size": 7})
    ref = frame["observer_mmhg"].to_numpy(float)
    new = frame["automated_mmhg"].to_numpy(float)
    result = limits_of_agreement(ref, new)
    mean, diff = (ref + new) / 2, new - ref
    width = WIDTH_MM / 25.4
    fig, ax = plt.subplots(figsize=(width, width * 0.68), layout="constrained")
    ax.axhline(0, color="#999999", lw=0.6)
    lines = [(result.upper, result.upper_ci, "upper limit", "--"),
             (result.bias, result.bias_ci, "bias", "-"),
             (result.lower, result.lower_ci, "lower limit", "--")]
    for value, (lo, hi), label, style in lines:
        ax.axhspan(lo, hi, color="#0072B2", alpha=0.15, lw=0)
        ax.axhline(value, color="#0072B2", lw=1.0, ls=style)
        ax.annotate(f"{label} {value:+.1f}\n({lo:+.1f} to {hi:+.1f})".replace("-", "\u2212"),
                    xy=(1.0, value), xycoords=("axes fraction", "data"), xytext=(4, 0),
                    textcoords="offset points", va="center", fontsize=7, color="#0072B2")
    ax.scatter(mean, diff, s=12, color="black", alpha=0.75, linewidths=0, zorder=3)
    slope, p = proportional_bias(ref, new)
    ax.text(0.02, 0.97, f"n = {result.n}; SD of differences {result.sd:.1f} mmHg\n"
            f"trend of difference on mean: slope {slope:.3f} (p = {p:.2f})",
            transform=ax.transAxes, va="top", fontsize=7)
    span = max(abs(diff).max(), abs(result.lower_ci[0]), abs(result.upper_ci[1]))
    ax.set_ylim(-span * 1.15, span * 1.45)
    ax.set_xlabel("Mean of the two readings, systolic BP (mmHg)")
    ax.set_ylabel("Automated minus observer (mmHg)")
    ax.spines[["top", "right"]].set_visible(False)
    ax.set_title("Automated cuff vs observer (invented data): bias and 95% limits of "
                 "agreement,\nshaded bands: their 95% confidence intervals", loc="left",
                 fontsize=7.5)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
