"""Small multiples of a weekly rate per district, ordered by fitted trend.

Each of the 24 Velmora districts gets one panel on shared axes. Panels are ordered by the
ordinary-least-squares slope of the weekly rate (steepest rise first), not alphabetically,
because the reader's question is "where is it rising?". Each panel shows the weekly rate, the
fitted line and its 95% confidence band for the mean. Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

DATA = Path("data") / "weekly_visits.csv"
WIDTH_MM = 180
# Okabe–Ito colours: distinguishable under the common colour-vision deficiencies.
RISING, FALLING, FLAT, POINTS = "#D55E00", "#0072B2", "#555555", "#9A9A9A"


@dataclass(frozen=True)
class TrendFit:
    """A straight-line fit y = intercept + slope * x with what the band needs."""

    intercept: float
    slope: float
    slope_se: float
    slope_low: float
    slope_high: float
    sigma2: float      # residual variance, n - 2 degrees of freedom
    n: int
    x_mean: float
    sxx: float         # sum of squared deviations of x


def fit_trend(x: np.ndarray, y: np.ndarray, level: float = 0.95) -> TrendFit:
    """Ordinary least squares with a t-based interval for the slope.

    Written out rather than delegated so the reader sees exactly what the band uses.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    n = x.size
    if n < 3:
        raise ValueError("a trend needs at least three points")
    x_mean = x.mean()
    sxx = float(np.sum((x - x_mean) ** 2))
    slope = float(np.sum((x - x_mean) * (y - y.mean())) / sxx)
    intercept = float(y.mean() - slope * x_mean)
    resid = y - (intercept + slope * x)
    sigma2 = float(resid @ resid / (n - 2))
    se = float(np.sqrt(sigma2 / sxx))
    t = stats.t.ppf(0.5 + level / 2, n - 2)
    return TrendFit(intercept, slope, se, slope - t * se, slope + t * se, sigma2, n, x_mean, sxx)


def confidence_band(fit: TrendFit, x_new: np.ndarray, level: float = 0.95
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Fitted mean and its pointwise interval: SE = sigma * sqrt(1/n + (x - mean)^2 / Sxx)."""
    x_new = np.asarray(x_new, float)
    mean = fit.intercept + fit.slope * x_new
    se = np.sqrt(fit.sigma2 * (1 / fit.n + (x_new - fit.x_mean) ** 2 / fit.sxx))
    t = stats.t.ppf(0.5 + level / 2, fit.n - 2)
    return mean, mean - t * se, mean + t * se


def panel_order(fits: dict[str, TrendFit]) -> list[str]:
    """Steepest rise first; ties broken by name so the order is deterministic."""
    return sorted(fits, key=lambda name: (-fits[name].slope, name))


def trend_colour(fit: TrendFit) -> str:
    """Colour only when the slope interval excludes zero: colour carries the verdict."""
    if fit.slope_low > 0:
        return RISING
    if fit.slope_high < 0:
        return FALLING
    return FLAT


def load(path: Path = DATA) -> pd.DataFrame:
    """Weekly counts and rates per district (relative path: run from the recipe folder)."""
    frame = pd.read_csv(path)
    return frame.sort_values(["district", "week"]).reset_index(drop=True)


def fit_all(frame: pd.DataFrame) -> dict[str, TrendFit]:
    return {d: fit_trend(g["week"].to_numpy(), g["rate_per_10k"].to_numpy())
            for d, g in frame.groupby("district")}


def draw(frame: pd.DataFrame, ncols: int = 6) -> Figure:
    """A grid of panels on shared axes, ordered by slope."""
    plt.rcParams.update({"font.size": 7, "axes.titlesize": 7.5})
    fits = fit_all(frame)
    order = panel_order(fits)
    nrows = int(np.ceil(len(order) / ncols))
    width = WIDTH_MM / 25.4
    fig, axes = plt.subplots(nrows, ncols, sharex=True, sharey=True,
                             figsize=(width, width * 0.72), layout="constrained")
    grid = np.linspace(1, frame["week"].max(), 60)
    for ax, district in zip(axes.flat, order):
        part = frame[frame["district"] == district]
        fit = fits[district]
        colour = trend_colour(fit)
        mean, low, high = confidence_band(fit, grid)
        ax.plot(part["week"], part["rate_per_10k"], color=POINTS, lw=0.6)
        ax.fill_between(grid, low, high, color=colour, alpha=0.25, lw=0)
        ax.plot(grid, mean, color=colour, lw=1.4)
        ax.set_title(district, loc="left", pad=2)
        label = f"{fit.slope:+.2f}".replace("-", "\u2212")  # a true minus sign
        ax.text(0.98, 0.97, label, transform=ax.transAxes, ha="right", va="top",
                color=colour, fontsize=7)
        ax.grid(axis="y", color="#E5E5E5", lw=0.5)
        ax.spines[["top", "right"]].set_visible(False)
        ax.tick_params(length=2, pad=1.5)
    for ax in axes.flat[len(order):]:
        ax.set_visible(False)
    axes[0, 0].set_xticks([1, 13, 26, 39, 52])
    low, high = frame["rate_per_10k"].min(), frame["rate_per_10k"].max()
    axes[0, 0].set_ylim(max(0.0, low - 0.05 * (high - low)), high + 0.22 * (high - low))
    fig.supxlabel("ISO week of 2023", fontsize=7.5)
    fig.supylabel("Visits per 10,000 residents per week", fontsize=7.5)
    fig.suptitle("Weekly clinic visit rate by district, ordered by fitted trend (steepest rise "
                 "first); number: slope in visits per 10,000 per week.\nLine and band: least-squares fit and its 95% confidence interval; "
                 "orange rising, blue falling, grey no clear trend (interval includes 0).",
                 fontsize=7, ha="left", x=0.01, linespacing=1.3)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
