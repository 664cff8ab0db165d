"""Area-proportional Euler diagram of three overlapping conditions, fitted numerically.

Invented counts from the Velmora Regional Health Network; not for clinical decisions.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

from itertools import product

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Circle
from scipy import ndimage, optimize

SETS = ("hypertension", "diabetes", "ckd")
LABELS = {"hypertension": "Hypertension", "diabetes": "Type 2 diabetes",
          "ckd": "Chronic kidney\ndisease"}
COLOURS = ("#E69F00", "#0072B2", "#009E73")  # Okabe-Ito
REGIONS = [r for r in product((0, 1), repeat=3) if any(r)]  # the seven disjoint combinations
GRID = 400


def lens_area(r1: float, r2: float, d: float) -> float:
    """Area of the intersection of two circles with radii r1, r2 whose centres are d apart."""
    if d >= r1 + r2:
        return 0.0
    if d <= abs(r1 - r2):
        return float(np.pi * min(r1, r2) ** 2)
    a1 = r1 * r1 * np.arccos((d * d + r1 * r1 - r2 * r2) / (2 * d * r1))
    a2 = r2 * r2 * np.arccos((d * d + r2 * r2 - r1 * r1) / (2 * d * r2))
    kite = 0.5 * np.sqrt((-d + r1 + r2) * (d + r1 - r2) * (d - r1 + r2) * (d + r1 + r2))
    return float(a1 + a2 - kite)


def distance_for_overlap(r1: float, r2: float, overlap: float) -> float:
    """Centre distance giving the wanted overlap area (the lens area falls as d grows)."""
    if overlap <= 0:
        return r1 + r2
    if overlap >= np.pi * min(r1, r2) ** 2:
        return abs(r1 - r2)
    return float(optimize.brentq(lambda d: lens_area(r1, r2, d) - overlap, abs(r1 - r2), r1 + r2,
                                 xtol=1e-12))


def region_areas(centres: np.ndarray, radii: np.ndarray, grid: int = GRID) -> np.ndarray:
    """Areas of the seven disjoint regions, counted on a regular grid over the bounding box.

    Why a grid: the area shared by all three circles has no simple closed form, and a 400 x 400
    grid is accurate to well under 1% of the total, far finer than the eye.
    """
    (xs, ys), (xm, ym) = (centres - radii[:, None]).min(0), (centres + radii[:, None]).max(0)
    gx = np.linspace(xs, xm, grid)
    gy = np.linspace(ys, ym, grid)
    cell = (gx[1] - gx[0]) * (gy[1] - gy[0])
    px, py = np.meshgrid(gx, gy)
    code = np.zeros(px.shape, dtype=int)
    for k, ((cx, cy), r) in enumerate(zip(centres, radii)):
        code |= (((px - cx) ** 2 + (py - cy) ** 2) <= r * r).astype(int) << k
    counts = np.bincount(code.ravel(), minlength=8)
    return np.array([counts[sum(b << k for k, b in enumerate(reg))] for reg in REGIONS]) * cell


def stress(fitted: np.ndarray, target: np.ndarray) -> float:
    """Stress: residual sum of squares after the best scaling of the target, over sum fitted^2."""
    beta = fitted @ target / (target @ target)
    return float(((fitted - beta * target) ** 2).sum() / (fitted ** 2).sum())


def diag_error(fitted: np.ndarray, target: np.ndarray) -> float:
    """Largest absolute difference between fitted and wanted shares of the total area."""
    return float(np.max(np.abs(fitted / fitted.sum() - target / target.sum())))


def set_totals(target: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Set sizes and pairwise intersections (each including the triple) from region counts."""
    regions = np.array(REGIONS)
    totals = np.array([target[regions[:, k] == 1].sum() for k in range(3)])
    pairs = np.array([target[(regions[:, i] == 1) & (regions[:, j] == 1)].sum()
                      for i, j in ((0, 1), (0, 2), (1, 2))])
    return totals, pairs


def initial_layout(totals: np.ndarray, pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Radii from set sizes; centres from the pairwise distances that match each overlap exactly."""
    radii = np.sqrt(totals / np.pi)
    d01 = distance_for_overlap(radii[0], radii[1], pairs[0])
    d02 = distance_for_overlap(radii[0], radii[2], pairs[1])
    d12 = distance_for_overlap(radii[1], radii[2], pairs[2])
    x2 = (d02 ** 2 - d12 ** 2 + d01 ** 2) / (2 * d01)
    y2 = np.sqrt(max(d02 ** 2 - x2 ** 2, 0.0))
    return np.array([[0.0, 0.0], [d01, 0.0], [x2, -y2]]), radii


def fit_euler(target: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Fit three circles so the seven region areas match ``target`` (counts) as closely as possible.

    Start from the exact pairwise solution (each pair's overlap right, the triple region left to
    chance), then move the centres and radii together to minimise the stress of all seven
    regions. Three circles cannot show every combination exactly; the stress says how far off.
    """
    target = np.asarray(target, dtype=float)
    totals, pairs = set_totals(target)
    centres, radii = initial_layout(totals, pairs)

    def unpack(free: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return np.vstack([[0.0, 0.0], free[:4].reshape(2, 2)]), np.exp(free[4:])

    def loss(free: np.ndarray) -> float:
        return stress(region_areas(*unpack(free), grid=200), target)

    start = np.r_[centres[1:].ravel(), np.log(radii)]
    best = optimize.minimize(loss, start, method="Nelder-Mead",
                             options={"xatol": 1e-4, "fatol": 1e-10, "maxiter": 1500})
    if best.fun < loss(start):
        centres, radii = unpack(best.x)
    return centres, radii, region_areas(centres, radii)


def load() -> tuple[np.ndarray]:
    """Read the seven region counts in the order of ``REGIONS``."""
    frame = pd.read_csv("data/conditions.csv").set_index(list(SETS))
    return (np.array([frame.loc[reg, "adults"] for reg in REGIONS], dtype=float),)


def _label_points(centres: np.ndarray, radii: np.ndarray) -> dict[tuple, tuple[float, float]]:
    """For each region, the grid point deepest inside it (farthest from its edge)."""
    (xs, ys), (xm, ym) = (centres - radii[:, None]).min(0), (centres + radii[:, None]).max(0)
    gx, gy = np.linspace(xs, xm, GRID), np.linspace(ys, ym, GRID)
    px, py = np.meshgrid(gx, gy)
    inside = [((px - cx) ** 2 + (py - cy) ** 2) <= r * r for (cx, cy), r in zip(centres, radii)]
    points = {}
    for reg in REGIONS:
        mask = np.logical_and.reduce([m if b else ~m for m, b in zip(inside, reg)])
        if mask.any():
            depth = ndimage.distance_transform_edt(np.pad(mask, 1))[1:-1, 1:-1]
            iy, ix = np.unravel_index(np.argmax(depth), depth.shape)
            points[reg] = (gx[ix], gy[iy])
    return points


def draw(target: np.ndarray) -> Figure:
    """Translucent circles so every overlap shows as a mix; counts inside, names outside."""
    centres, radii, fitted = fit_euler(target)
    fig, ax = plt.subplots(figsize=(120 / 25.4, 92 / 25.4), layout="constrained")
    for (cx, cy), r, colour in zip(centres, radii, COLOURS):
        ax.add_patch(Circle((cx, cy), r, facecolor=colour, alpha=0.35, edgecolor=colour, lw=1.5))
    for reg, (x, y) in _label_points(centres, radii).items():
        ax.text(x, y, f"{int(target[REGIONS.index(reg)]):,}", ha="center", va="center",
                fontsize=7.5)
    totals, _ = set_totals(target)
    middle = centres.mean(0)
    for k, ((cx, cy), r) in enumerate(zip(centres, radii)):
        away = np.array([cx, cy]) - middle
        away = away / np.linalg.norm(away) if np.linalg.norm(away) > 0 else np.array([0.0, 1.0])
        x, y = np.array([cx, cy]) + away * (r * 1.08)
        ax.text(x, y, f"{LABELS[SETS[k]]}\n(n = {int(totals[k]):,})", color="black",
                ha="left" if away[0] > 0.3 else "right" if away[0] < -0.3 else "center",
                va="bottom" if away[1] > 0.3 else "top" if away[1] < -0.3 else "center",
                fontsize=8, weight="bold")
    ax.set_aspect("equal")
    ax.autoscale_view()
    span = np.ptp(np.r_[centres[:, 0] - radii, centres[:, 0] + radii])
    lo, hi = (centres - radii[:, None]).min(0), (centres + radii[:, None]).max(0)
    ax.set_xlim(lo[0] - 0.3 * span, hi[0] + 0.3 * span)
    ax.set_ylim(lo[1] - 0.24 * span, hi[1] + 0.06 * span)
    ax.axis("off")
    ax.set_title(f"Adults with at least one of three conditions (n = {int(target.sum()):,}); "
                 "invented data", fontsize=8)
    fig.supxlabel(f"Circle areas fitted numerically: stress {stress(fitted, target):.4f}; "
                  f"largest error in a region's\nshare of the total area "
                  f"{100 * diag_error(fitted, target):.1f} percentage points. Numbers are the "
                  "observed counts.", fontsize=7)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
