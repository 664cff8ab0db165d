"""A forest plot of a meta-analysis of nine invented trials (odds ratios, log scale).

Each trial's odds ratio and 95% interval is a square whose AREA is proportional to its
random-effects weight, so the eye is drawn to the trials that count, not to the wide intervals
of small ones. Below, the fixed-effect (inverse variance) and random-effects (DerSimonian-Laird)
pooled estimates as diamonds, a prediction interval for a new trial, and the heterogeneity
statistics (Q, I^2, tau^2). Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Polygon
from scipy import stats

DATA = Path("data") / "trials.csv"
WIDTH_MM = 180
Z95 = stats.norm.ppf(0.975)


def log_odds_ratio(a, n1, c, n2) -> tuple[np.ndarray, np.ndarray]:
    """Log odds ratio (treated vs control) and its Woolf variance 1/a + 1/b + 1/c + 1/d.

    A trial with a zero cell gets 0.5 added to all four cells (Haldane-Anscombe), the usual
    convention; others are left untouched.
    """
    a, n1, c, n2 = (np.asarray(x, float) for x in (a, n1, c, n2))
    b, d = n1 - a, n2 - c
    zero = (a == 0) | (b == 0) | (c == 0) | (d == 0)
    a, b, c, d = (np.where(zero, x + 0.5, x) for x in (a, b, c, d))
    return np.log(a * d / (b * c)), 1 / a + 1 / b + 1 / c + 1 / d


@dataclass(frozen=True)
class Pooled:
    """A pooled estimate on the log scale with what the plot and the text need."""

    estimate: float
    se: float
    weights: np.ndarray     # normalised to sum to 1
    tau2: float = 0.0

    def interval(self, z: float = Z95) -> tuple[float, float]:
        return self.estimate - z * self.se, self.estimate + z * self.se


@dataclass(frozen=True)
class Heterogeneity:
    q: float
    df: int
    p_value: float
    i2: float               # Higgins & Thompson (2002): (Q - df) / Q, floored at 0


def fixed_effect(y: np.ndarray, v: np.ndarray) -> Pooled:
    """Inverse-variance weighted mean: weights 1/v_i, SE 1/sqrt(sum w)."""
    w = 1 / np.asarray(v, float)
    return Pooled(float(np.sum(w * y) / w.sum()), float(1 / np.sqrt(w.sum())), w / w.sum())


def heterogeneity(y: np.ndarray, v: np.ndarray) -> Heterogeneity:
    """Cochran's Q about the fixed-effect mean, its chi-squared p-value and I^2."""
    w = 1 / np.asarray(v, float)
    q = float(np.sum(w * (y - fixed_effect(y, v).estimate) ** 2))
    df = len(y) - 1
    return Heterogeneity(q, df, float(stats.chi2.sf(q, df)), max(0.0, (q - df) / q) if q > 0
                         else 0.0)


def dersimonian_laird(y: np.ndarray, v: np.ndarray) -> Pooled:
    """Random effects with the DerSimonian & Laird (1986) moment estimate of tau^2.

    tau^2 = max(0, (Q - df) / (sum w - sum w^2 / sum w)); weights 1 / (v_i + tau^2).
    """
    y, v = np.asarray(y, float), np.asarray(v, float)
    w = 1 / v
    het = heterogeneity(y, v)
    tau2 = max(0.0, (het.q - het.df) / (w.sum() - np.sum(w ** 2) / w.sum()))
    w_star = 1 / (v + tau2)
    return Pooled(float(np.sum(w_star * y) / w_star.sum()), float(1 / np.sqrt(w_star.sum())),
                  w_star / w_star.sum(), float(tau2))


def prediction_interval(pooled: Pooled, k: int, level: float = 0.95) -> tuple[float, float]:
    """Where a new trial's true effect is expected (Higgins, Thompson & Spiegelhalter 2009):
    mu +/- t(k-2) * sqrt(tau^2 + SE^2)."""
    t = stats.t.ppf(0.5 + level / 2, k - 2)
    half = t * np.sqrt(pooled.tau2 + pooled.se ** 2)
    return pooled.estimate - half, pooled.estimate + half


def format_p(p: float) -> str:
    """'p = 0.04', or 'p < 0.001' rather than a misleading 'p = 0.00'."""
    return "p < 0.001" if p < 0.001 else f"p = {p:.3f}" if p < 0.01 else f"p = {p:.2f}"


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def _diamond(ax, y: float, low: float, mid: float, high: float, colour: str) -> None:
    ax.add_patch(Polygon([(low, y), (mid, y + 0.32), (high, y), (mid, y - 0.32)],
                         closed=True, facecolor=colour, edgecolor=colour))


def _row_text(ax, y: float, cells: list[tuple[float, str, str]], **kw) -> None:
    for x, text, align in cells:
        ax.text(x, y, text, ha=align, va="center", fontsize=7, **kw)


def draw(frame: pd.DataFrame) -> Figure:
    """Three aligned panels: trial table, forest on a log axis, estimates and weights."""
    plt.rcParams.update({"font.size": 7})
    y, v = log_odds_ratio(frame["treated_events"], frame["treated_total"],
                          frame["control_events"], frame["control_total"])
    fixed, random = fixed_effect(y, v), dersimonian_laird(y, v)
    het = heterogeneity(y, v)
    k = len(frame)
    rows = np.arange(k)
    width = WIDTH_MM / 25.4
    fig, (left, mid, right) = plt.subplots(1, 3, sharey=True, width_ratios=[1.6, 1.3, 1.1],
                                           figsize=(width, width * 0.5), layout="constrained")
    header = -1.3
    _row_text(left, header, [(0, "Trial", "left"), (0.7, "Treated", "right"),
                             (0.97, "Control", "right")], fontweight="bold")
    for i, row in enumerate(frame.itertuples()):
        _row_text(left, i, [(0, row.trial, "left"),
                            (0.7, f"{row.treated_events}/{row.treated_total}", "right"),
                            (0.97, f"{row.control_events}/{row.control_total}", "right")])
    low, high = y - Z95 * np.sqrt(v), y + Z95 * np.sqrt(v)
    mid.hlines(rows, np.exp(low), np.exp(high), color="black", lw=0.9)
    mid.scatter(np.exp(y), rows, marker="s", s=random.weights * 600, color="#404040",
                zorder=3, linewidths=0)
    summary = {"Fixed effect (inverse variance)": (fixed, k + 0.6, "#56B4E9"),
               "Random effects (DerSimonian\u2013Laird)": (random, k + 1.6, "#D55E00")}
    for label, (pooled, yy, colour) in summary.items():
        lo, hi = pooled.interval()
        _diamond(mid, yy, np.exp(lo), np.exp(pooled.estimate), np.exp(hi), colour)
        _row_text(left, yy, [(0, label, "left")], fontweight="bold")
        _row_text(right, yy, [(0.05, f"{np.exp(pooled.estimate):.2f} ({np.exp(lo):.2f}"
                                     f"\u2013{np.exp(hi):.2f})", "left")], fontweight="bold")
    p_low, p_high = prediction_interval(random, k)
    mid.hlines(k + 2.4, np.exp(p_low), np.exp(p_high), color="#D55E00", lw=1.2)
    _row_text(left, k + 2.4, [(0, "Prediction interval (new trial)", "left")])
    _row_text(right, k + 2.4, [(0.05, f"{np.exp(p_low):.2f}\u2013{np.exp(p_high):.2f}",
                                "left")])
    _row_text(left, k + 3.5, [(0, f"Heterogeneity: Q = {het.q:.2f} on {het.df} df "
                                  f"({format_p(het.p_value)}), I\u00b2 = {100 * het.i2:.0f}%, "
                                  f"\u03c4\u00b2 = {random.tau2:.3f}", "left")])
    _row_text(right, header, [(0.05, "OR (95% CI)", "left"),
                              (1.0, "Weight\u2020", "right")], fontweight="bold")
    for i in rows:
        _row_text(right, i, [(0.05, f"{np.exp(y[i]):.2f} ({np.exp(low[i]):.2f}"
                                    f"\u2013{np.exp(high[i]):.2f})", "left"),
                             (1.0, f"{100 * random.weights[i]:.1f}%", "right")])
    mid.axvline(1, color="black", lw=0.7)
    mid.axvline(np.exp(random.estimate), color="#D55E00", lw=0.6, ls=(0, (3, 2)))
    mid.set_xscale("log")
    lowest = min(np.exp(low).min(), np.exp(p_low))
    highest = max(np.exp(high).max(), np.exp(p_high))
    mid.set_xlim(lowest / 1.15, highest * 1.15)
    ticks = [t for t in (0.1, 0.25, 0.5, 1, 2, 4, 8) if lowest / 1.15 <= t <= highest * 1.15]
    mid.set_xticks(ticks, [f"{t:g}" for t in ticks])
    mid.minorticks_off()
    mid.set_xlabel("Odds ratio (log scale)\n\u2190 favours treatment    favours control \u2192")
    mid.set_ylim(k + 4.1, -2.0)
    for ax in (left, right):
        ax.set_xlim(0, 1)
        ax.set_axis_off()
    mid.spines[["top", "right", "left"]].set_visible(False)
    mid.tick_params(axis="y", left=False, labelleft=False)
    fig.suptitle("Invented trials of one intervention: odds of the adverse outcome; square area "
                 "proportional to the random-effects weight (\u2020)", fontsize=7.5, x=0.01, ha="left")
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
