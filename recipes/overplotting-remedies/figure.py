"""Overplotting remedies for 200,000 points: opaque markers, alpha blending, hexagonal binning
and a 2-D kernel density estimate, side by side on shared axes.

The 200,000 invented readings are simulated here from a fixed seed instead of shipping a large
file. Not for clinical decisions. Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
from matplotlib.colors import LogNorm
from matplotlib.figure import Figure
from scipy import signal

SEED = 20240416
N_POINTS = 200_000
EXTENT = (15.0, 95.0, 70.0, 220.0)  # age min, max; systolic pressure min, max
HDR_FRACTIONS = (0.5, 0.8, 0.95)


def simulate(n: int = N_POINTS, seed: int = SEED) -> tuple[np.ndarray, np.ndarray]:
    """Age and systolic blood pressure: a broad rising cloud plus a tight 6% subgroup.

    The subgroup (about 45 years, about 160 mmHg) is the thing overplotting hides.
    """
    rng = np.random.default_rng(seed)
    n_sub = int(0.06 * n)
    age = rng.uniform(18, 92, n - n_sub)
    sbp = 105 + 0.55 * age + rng.normal(0, 14, n - n_sub)
    sub_age = rng.normal(45, 4, n_sub)
    sub_sbp = rng.normal(160, 5, n_sub)
    return np.r_[age, sub_age], np.r_[sbp, sub_sbp]


def scott_factor(n: int, dims: int = 2) -> float:
    """Scott's rule bandwidth factor n^(-1/(d+4)); the kernel covariance is factor^2 x data cov."""
    return float(n ** (-1.0 / (dims + 4)))


def linear_binning(x: np.ndarray, y: np.ndarray, gx: np.ndarray, gy: np.ndarray) -> np.ndarray:
    """Share each point among its four surrounding grid nodes in proportion to closeness.

    Why: binning 200,000 points onto a grid first makes the density estimate cost O(grid log grid)
    instead of O(points x grid), with an error far below what the eye can see.
    """
    dx, dy = gx[1] - gx[0], gy[1] - gy[0]
    fx, fy = (x - gx[0]) / dx, (y - gy[0]) / dy
    keep = (fx >= 0) & (fx <= len(gx) - 1) & (fy >= 0) & (fy <= len(gy) - 1)
    fx, fy = fx[keep], fy[keep]
    ix = np.minimum(np.floor(fx).astype(int), len(gx) - 2)
    iy = np.minimum(np.floor(fy).astype(int), len(gy) - 2)
    wx, wy = fx - ix, fy - iy
    grid = np.zeros((len(gy), len(gx)))
    for ox, oy, w in ((0, 0, (1 - wx) * (1 - wy)), (1, 0, wx * (1 - wy)),
                      (0, 1, (1 - wx) * wy), (1, 1, wx * wy)):
        np.add.at(grid, (iy + oy, ix + ox), w)
    return grid


def binned_kde(x: np.ndarray, y: np.ndarray, gx: np.ndarray, gy: np.ndarray,
               factor: float | None = None) -> np.ndarray:
    """Gaussian kernel density on the grid (rows = y), kernel covariance factor^2 x cov(x, y).

    Same estimator as a direct sum of Gaussian kernels at every point, computed by convolving the
    binned counts with the kernel evaluated on the grid spacing (fast Fourier transform).
    """
    n = len(x)
    factor = scott_factor(n) if factor is None else factor
    cov = np.cov(np.vstack([x, y])) * factor ** 2
    inv = np.linalg.inv(cov)
    dx, dy = gx[1] - gx[0], gy[1] - gy[0]
    reach_x = int(np.ceil(4 * np.sqrt(cov[0, 0]) / dx))
    reach_y = int(np.ceil(4 * np.sqrt(cov[1, 1]) / dy))
    ox, oy = np.meshgrid(np.arange(-reach_x, reach_x + 1) * dx, np.arange(-reach_y, reach_y + 1) * dy)
    quad = inv[0, 0] * ox ** 2 + 2 * inv[0, 1] * ox * oy + inv[1, 1] * oy ** 2
    kernel = np.exp(-0.5 * quad) / (2 * np.pi * np.sqrt(np.linalg.det(cov)))
    counts = linear_binning(x, y, gx, gy)
    return np.maximum(signal.fftconvolve(counts, kernel, mode="same"), 0.0) / n


def hdr_levels(density: np.ndarray, fractions=HDR_FRACTIONS) -> np.ndarray:
    """Density thresholds whose upper regions hold the given fractions of the probability.

    The 50% highest-density region is the smallest area holding half the points: its contour
    says "half the people are inside here", which a raw density value cannot.
    """
    values = np.sort(density.ravel())[::-1]
    mass = np.cumsum(values) / values.sum()
    return np.array([values[min(np.searchsorted(mass, f), len(values) - 1)] for f in fractions])


def load() -> tuple[np.ndarray, np.ndarray]:
    """The data are simulated from a fixed seed (no file: 200,000 rows would be 5 MB)."""
    return simulate()


def _style(ax, title: str) -> None:
    ax.set_title(title, fontsize=8, loc="left")
    ax.tick_params(labelsize=7.5)
    ax.spines[["top", "right"]].set_visible(False)


def draw(age: np.ndarray, sbp: np.ndarray) -> Figure:
    """Four panels with the same axes, so the only difference between them is the technique."""
    fig, axes = plt.subplots(2, 2, figsize=(180 / 25.4, 150 / 25.4), sharex=True, sharey=True,
                             layout="constrained")
    (a, b), (c, d) = axes
    a.scatter(age, sbp, s=3, color="#0072B2", lw=0, rasterized=True)
    _style(a, "a  Opaque markers: the core is one solid blob")
    b.scatter(age, sbp, s=1, color="#0072B2", alpha=0.03, lw=0, rasterized=True)
    _style(b, "b  Alpha blending (3% opacity): a subgroup appears")
    hexes = c.hexbin(age, sbp, gridsize=(60, 40), extent=EXTENT, mincnt=1, cmap="viridis",
                     norm=LogNorm(), lw=0, rasterized=True)
    hbar = fig.colorbar(hexes, ax=c, shrink=0.9)
    hbar.set_label("points per hexagon (log scale)", fontsize=7.5)
    hbar.ax.tick_params(labelsize=7.5)
    _style(c, "c  Hexagonal binning, counts on a log scale")
    gx = np.linspace(EXTENT[0], EXTENT[1], 321)
    gy = np.linspace(EXTENT[2], EXTENT[3], 301)
    dens = binned_kde(age, sbp, gx, gy)
    levels = hdr_levels(dens)
    filled = d.contourf(gx, gy, dens, levels=np.r_[levels[::-1], dens.max()],
                        colors=["#C6DBEF", "#6BAED6", "#08519C"])
    d.contour(gx, gy, dens, levels=levels[::-1], colors="black", linewidths=0.5)
    cbar = fig.colorbar(filled, ax=d, shrink=0.9)
    cbar.set_label("highest-density region", fontsize=7.5)
    cbar.ax.tick_params(labelsize=7.5)
    cbar.set_ticks((np.r_[levels[::-1], dens.max()][:-1] + np.r_[levels[::-1], dens.max()][1:]) / 2,
                   labels=[f"{int(100 * f)}%" for f in HDR_FRACTIONS[::-1]])
    _style(d, "d  Kernel density: regions holding 50/80/95% of points")
    for ax in (c, d):
        ax.set_xlabel("Age (years)", fontsize=8)
    for ax in (a, c):
        ax.set_ylabel("Systolic blood pressure (mmHg)", fontsize=8)
    a.set_xlim(EXTENT[0], EXTENT[1])
    a.set_ylim(EXTENT[2], EXTENT[3])
    fig.suptitle(f"The same {len(age):,} invented readings drawn four ways", fontsize=9)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
