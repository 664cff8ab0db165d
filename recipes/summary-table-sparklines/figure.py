"""A summary table drawn as a figure: colour-coded cells and sparklines of weekly values.

Invented urgent-care visits for the 24 districts of the Velmora Regional Health Network.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import matplotlib
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.colors import Normalize, to_rgb
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle
from scipy import stats

RECENT = 12  # weeks in the reporting period; the 12 before it are the comparison period
CHANGE_LIMIT = 20.0  # percent at which the change colour saturates
CHANGE_CMAP = matplotlib.colormaps["PuOr_r"]  # Brewer PuOr: purple = fall, orange = rise
ON_TIME_CMAP = matplotlib.colormaps["Blues"]
ON_TIME_RANGE = (75.0, 100.0)
ROW_MM, HEAD_MM, WIDTH_MM = 5.6, 14.0, 180.0
COLUMNS = {"district": 0, "spark": 30, "visits": 86, "change": 90, "trend": 127,
           "on_time": 131, "ci": 175}  # x positions in mm
SPARK_MM, CHANGE_MM, ON_TIME_MM = 38.0, 21.0, 18.0


def percent_change(recent: float, previous: float) -> float:
    """Change of the recent period's total against the previous period's, in percent."""
    return 100.0 * (recent - previous) / previous


def weekly_trend(values: np.ndarray) -> float:
    """Average change per week in percent, from a least-squares line through log(values).

    Why the log: districts differ tenfold in size, and a percent trend compares them fairly.
    """
    weeks = np.arange(len(values), dtype=float)
    slope = np.polyfit(weeks, np.log(np.asarray(values, dtype=float)), 1)[0]
    return 100.0 * (np.exp(slope) - 1.0)


def wilson_interval(successes: int, total: int, level: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for a proportion: stays inside [0, 1] and is good near 90-100%."""
    z = stats.norm.ppf(0.5 + level / 2)
    p = successes / total
    centre = (p + z * z / (2 * total)) / (1 + z * z / total)
    half = z / (1 + z * z / total) * np.sqrt(p * (1 - p) / total + z * z / (4 * total * total))
    return centre - half, centre + half


def relative_luminance(rgb) -> float:
    """WCAG 2 relative luminance of an sRGB colour (0-1 channels)."""
    c = np.asarray(to_rgb(rgb), dtype=float)
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return float(lin @ np.array([0.2126, 0.7152, 0.0722]))


def contrast_ratio(a, b) -> float:
    """WCAG 2 contrast ratio (L1 + 0.05) / (L2 + 0.05), from 1 (none) to 21 (black on white)."""
    la, lb = sorted((relative_luminance(a), relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def text_colour(background) -> str:
    """Black or white, whichever contrasts more with the cell: numbers stay legible on any fill."""
    return "black" if contrast_ratio(background, "black") >= contrast_ratio(background, "white") \
        else "white"


def summarise(visits: pd.DataFrame) -> pd.DataFrame:
    """One row per district with the numbers the table shows, sorted by change (largest rise first)."""
    rows = []
    weeks = sorted(visits["week"].unique())
    recent_weeks = set(weeks[-RECENT:])
    previous_weeks = set(weeks[-2 * RECENT:-RECENT])
    for district, one in visits.groupby("district"):
        one = one.sort_values("week")
        recent = one[one["week"].isin(recent_weeks)]
        previous = one[one["week"].isin(previous_weeks)]
        seen, total = int(recent["seen_within_4h"].sum()), int(recent["visits"].sum())
        low, high = wilson_interval(seen, total)
        rows.append({"district": district, "series": one["visits"].to_numpy(),
                     "visits": total, "change": percent_change(total, previous["visits"].sum()),
                     "trend": weekly_trend(recent["visits"].to_numpy()),
                     "on_time": 100 * seen / total, "low": 100 * low, "high": 100 * high})
    return pd.DataFrame(rows).sort_values("change", ascending=False, ignore_index=True)


def load() -> tuple[pd.DataFrame]:
    """Read the weekly counts by relative path."""
    return (pd.read_csv("data/weekly_visits.csv"),)


def _cell(ax, x0: float, x1: float, y: float, value: float, cmap, norm, text: str) -> None:
    fill = cmap(norm(value))
    ax.add_patch(Rectangle((x0, y - ROW_MM / 2 + 0.3), x1 - x0, ROW_MM - 0.6, color=fill, lw=0))
    ax.text((x0 + x1) / 2, y, text, ha="center", va="center", fontsize=7,
            color=text_colour(fill[:3]))


def _sparkline(ax, x0: float, x1: float, y: float, series: np.ndarray) -> None:
    """Both periods on one scale per row; the comparison period grey, the recent one dark."""
    lo, hi = series.min(), series.max()
    xs = np.linspace(x0, x1, len(series))
    scaled = (series - lo) / (hi - lo if hi > lo else 1) * 2 - 1
    ys = y - ROW_MM * 0.38 * scaled  # the table's y axis points down
    split = len(series) - RECENT
    ax.plot(xs[:split + 1], ys[:split + 1], color="#AAAAAA", lw=0.7)
    ax.plot(xs[split:], ys[split:], color="#222222", lw=0.8)
    ax.plot(xs[-1], ys[-1], "o", color="#D55E00", ms=2.2)


def draw(visits: pd.DataFrame) -> Figure:
    """Draw the table in millimetre coordinates so the layout is exact at the print width."""
    table = summarise(visits)
    height = HEAD_MM + ROW_MM * len(table) + 15
    fig = plt.figure(figsize=(WIDTH_MM / 25.4, height / 25.4))
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(-2, WIDTH_MM - 2)
    ax.set_ylim(height - 2, -2)
    ax.axis("off")
    weeks = sorted(visits["week"].unique())
    heads = [("district", "left", "District"),
             ("spark", "left", f"Weekly visits {weeks[0]}\u2013{weeks[-1][5:]}\n"
                               "(grey: previous period)"),
             ("visits", "right", f"Visits,\nlast {RECENT} wk"),
             ("change", "left", f"Change vs\nprevious {RECENT} wk"),
             ("trend", "right", "Trend\n%/week"),
             ("on_time", "left", "Seen within\n4 hours"), ("ci", "right", "95% CI\n(Wilson)")]
    for key, align, words in heads:
        ax.text(COLUMNS[key], HEAD_MM - 2, words, ha=align, va="bottom", fontsize=7,
                weight="bold")
    ax.plot([0, WIDTH_MM - 4], [HEAD_MM - 1] * 2, color="black", lw=0.8)
    change_norm = Normalize(-CHANGE_LIMIT, CHANGE_LIMIT, clip=True)
    on_time_norm = Normalize(*ON_TIME_RANGE, clip=True)
    for i, row in table.iterrows():
        y = HEAD_MM + ROW_MM * (i + 0.5)
        if i % 2:
            ax.add_patch(Rectangle((-1, y - ROW_MM / 2), WIDTH_MM - 2, ROW_MM, color="#F4F4F4",
                                   lw=0, zorder=0))
        ax.text(COLUMNS["district"], y, row["district"], va="center", fontsize=7.5)
        _sparkline(ax, COLUMNS["spark"], COLUMNS["spark"] + SPARK_MM, y, row["series"])
        ax.text(COLUMNS["visits"], y, f"{row['visits']:,}", ha="right", va="center", fontsize=7.5)
        _cell(ax, COLUMNS["change"], COLUMNS["change"] + CHANGE_MM, y, row["change"], CHANGE_CMAP,
              change_norm, f"{row['change']:+.1f}%".replace("-", "\u2212"))
        ax.text(COLUMNS["trend"], y, f"{row['trend']:+.1f}".replace("-", "\u2212"), ha="right",
                va="center", fontsize=7.5)
        _cell(ax, COLUMNS["on_time"], COLUMNS["on_time"] + ON_TIME_MM, y, row["on_time"], ON_TIME_CMAP,
              on_time_norm, f"{row['on_time']:.1f}%")
        ax.text(COLUMNS["ci"], y, f"{row['low']:.1f}\u2013{row['high']:.1f}", ha="right",
                va="center", fontsize=7.5)
    bottom = HEAD_MM + ROW_MM * len(table)
    ax.plot([0, WIDTH_MM - 4], [bottom] * 2, color="black", lw=0.8)
    ax.text(0, bottom + 2, f"Sorted by change. Change colours saturate at \u00b1{CHANGE_LIMIT:.0f}% "
            f"(purple: fewer visits, orange: more); 4-hour colours run from "
            f"{ON_TIME_RANGE[0]:.0f}% (light)\nto {ON_TIME_RANGE[1]:.0f}% (dark). Trend: "
            f"least-squares slope of log weekly visits over the last {RECENT} weeks; orange dot: "
            "latest week.\nInvented data for the fictional Velmora Regional Health Network.", va="top", fontsize=7)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
