"""A tile-grid map of the 24 Velmora districts on a classed colour scale with class counts.

A tile grid gives every district the same area, so a small dense district counts as much as a
large empty one — the usual distortion of a choropleth. Values are grouped into four quantile
classes (equal numbers of districts per class) and the legend states each class's range and how
many districts fall in it, so the reader can check the classing. Data are invented.
"""
from __future__ import annotations

import textwrap
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

DATA = Path("data") / "uptake.csv"
WIDTH_MM = 150
CLASSES = 4


def quantile_breaks(values: np.ndarray, classes: int) -> np.ndarray:
    """Inner break points at the 1/k, 2/k ... quantiles: equal numbers per class."""
    return np.quantile(np.asarray(values, float), np.arange(1, classes) / classes)


def equal_interval_breaks(values: np.ndarray, classes: int) -> np.ndarray:
    """Inner break points that split the range into equal widths (counts may be uneven)."""
    values = np.asarray(values, float)
    return np.linspace(values.min(), values.max(), classes + 1)[1:-1]


def assign_classes(values: np.ndarray, breaks: np.ndarray) -> np.ndarray:
    """Class index 0..k-1; a value equal to a break goes to the upper class."""
    return np.searchsorted(np.asarray(breaks), np.asarray(values, float), side="right")


def class_table(values: np.ndarray, breaks: np.ndarray) -> pd.DataFrame:
    """Per class: the observed minimum and maximum, and the count — what the legend prints."""
    values = np.asarray(values, float)
    klass = assign_classes(values, breaks)
    rows = []
    for k in range(len(breaks) + 1):
        members = values[klass == k]
        rows.append({"class": k, "low": members.min() if members.size else np.nan,
                     "high": members.max() if members.size else np.nan,
                     "count": int(members.size)})
    return pd.DataFrame(rows)


def palette(classes: int) -> list[tuple[float, float, float, float]]:
    """Sequential Brewer yellow-green-blue, sampled so the lightest class is not white."""
    cmap = plt.get_cmap("YlGnBu")
    return [cmap(x) for x in np.linspace(0.18, 0.92, classes)]


def relative_luminance(rgba) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour (linearised channels, BT.709 weights)."""
    linear = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgba[:3]]
    return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]


def contrast_ratio(a, b) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker."""
    la, lb = sorted((relative_luminance(a), relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def text_colour(rgba) -> str:
    """Black or white, whichever contrasts more with the tile, so every label stays legible."""
    black, white = (0.0, 0.0, 0.0), (1.0, 1.0, 1.0)
    return "black" if contrast_ratio(rgba, black) >= contrast_ratio(rgba, white) else "white"


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def _legend(ax, table: pd.DataFrame, colours) -> None:
    """One swatch per class, low to high, each with its range and its count of districts."""
    ax.set_axis_off()
    ax.set_xlim(-1.45, len(table))
    ax.set_ylim(0, 1)
    ax.text(-1.45, 0.5, "Uptake (%),\nquartile classes", fontsize=7, va="center")
    for row in table.itertuples():
        x = row[1]
        ax.add_patch(Rectangle((x, 0.55), 0.95, 0.4, color=colours[row[1]], ec="white"))
        ax.text(x + 0.02, 0.4, f"{row.low:.1f}\u2013{row.high:.1f}", va="top", fontsize=7)
        ax.text(x + 0.02, 0.08, f"{row.count} districts", va="top", fontsize=7,
                color="#444444")


def draw(frame: pd.DataFrame, scheme: str = "quantile") -> Figure:
    """Square tiles on the grid; fill by class; name and value written in each tile."""
    plt.rcParams.update({"font.size": 7})
    values = frame["uptake_pct"].to_numpy()
    breaks = (quantile_breaks if scheme == "quantile" else equal_interval_breaks)(values, CLASSES)
    klass = assign_classes(values, breaks)
    colours = palette(CLASSES)
    width = WIDTH_MM / 25.4
    fig, (ax, legend_ax) = plt.subplots(2, 1, figsize=(width, width * 0.8),
                                        height_ratios=[5, 0.75], layout="constrained")
    for row, k in zip(frame.itertuples(), klass):
        x, y = row.tile_col, -row.tile_row
        fill = colours[k]
        ax.add_patch(Rectangle((x + 0.03, y + 0.03), 0.94, 0.94, color=fill))
        label = "\n".join(textwrap.wrap(row.district, 10, break_long_words=False))
        ax.text(x + 0.5, y + 0.6, label, ha="center", va="center", fontsize=7,
                color=text_colour(fill), linespacing=1.0)
        ax.text(x + 0.5, y + 0.2, f"{row.uptake_pct:.1f}", ha="center", va="center",
                fontsize=7, color=text_colour(fill), fontweight="bold")
    ax.set_xlim(-0.9, frame["tile_col"].max() + 1.05)
    ax.set_ylim(-frame["tile_row"].max() - 0.05, 1.05)
    ax.set_aspect("equal")
    ax.set_axis_off()
    ax.text(-0.45, -2.0, "SEA", rotation=90, ha="center", va="center", fontsize=7,
            color="#6A8CAF", fontstyle="italic")
    ax.set_title("Influenza vaccination uptake, residents aged 65+, 2023-24 season "
                 "(invented data)", loc="left", fontsize=7.5)
    _legend(legend_ax, class_table(values, breaks), colours)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
