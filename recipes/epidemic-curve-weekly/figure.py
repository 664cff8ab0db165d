"""Epidemic curve by ISO week of onset, stacked by case classification.

Invented outbreak in the Velmora Regional Health Network; not for public-health decisions.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import re
from datetime import date, timedelta

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure

CLASSES = ("confirmed", "probable", "suspected")      # most to least certain, bottom to top
COLOURS = ("#08519C", "#6BAED6", "#DADADA")           # Brewer Blues + grey: reads in grayscale
WEEK = re.compile(r"^(\d{4})-W(\d{2})$")
INCOMPLETE_WEEKS = 2


def week_monday(label: str) -> date:
    """Monday of an ISO 8601 week label such as '2026-W53'; bad labels raise ValueError."""
    match = WEEK.match(label)
    if not match:
        raise ValueError(f"'{label}' is not an ISO week label like 2026-W05")
    return date.fromisocalendar(int(match[1]), int(match[2]), 1)


def week_label(day: date) -> str:
    """ISO week label of a day; the ISO year can differ from the calendar year near 1 January."""
    year, week, _ = day.isocalendar()
    return f"{year}-W{week:02d}"


def week_range(first: str, last: str) -> list[str]:
    """Every ISO week from ``first`` to ``last`` inclusive, so empty weeks are not skipped.

    Why: an epidemic curve's x-axis is time; a week with no cases must show as a gap, not vanish.
    """
    start, stop = week_monday(first), week_monday(last)
    if stop < start:
        raise ValueError(f"{last} is before {first}")
    return [week_label(start + timedelta(weeks=k)) for k in range((stop - start).days // 7 + 1)]


def weekly_counts(cases: pd.DataFrame, pad_before: int = 1, pad_after: int = 1) -> pd.DataFrame:
    """Cases per ISO week (rows, consecutive, zero-filled) and classification (columns)."""
    weeks = sorted(cases["onset_week"].unique(), key=week_monday)
    first = week_label(week_monday(weeks[0]) - timedelta(weeks=pad_before))
    last = week_label(week_monday(weeks[-1]) + timedelta(weeks=pad_after))
    counts = pd.crosstab(cases["onset_week"], cases["classification"])
    return counts.reindex(index=week_range(first, last), columns=list(CLASSES), fill_value=0)


def load() -> tuple[pd.DataFrame]:
    """Read the line list by relative path."""
    return (pd.read_csv("data/cases.csv"),)


def draw(cases: pd.DataFrame) -> Figure:
    """Touching bars (time is continuous), most certain class at the base for a stable baseline."""
    counts = weekly_counts(cases, pad_before=2, pad_after=1)
    x = np.arange(len(counts))
    fig, ax = plt.subplots(figsize=(180 / 25.4, 85 / 25.4), layout="constrained")
    bottom = np.zeros(len(counts))
    for cls, colour in zip(CLASSES, COLOURS):
        ax.bar(x, counts[cls], bottom=bottom, width=1.0, color=colour, edgecolor="white",
               linewidth=0.6, label=f"{cls} ({counts[cls].sum()})")
        bottom += counts[cls].to_numpy()
    last_with_cases = int(np.nonzero(bottom)[0].max())
    ax.axvspan(last_with_cases - INCOMPLETE_WEEKS + 0.5, last_with_cases + 0.5, color="#F0E442",
               alpha=0.35, lw=0, zorder=0)
    ax.text(last_with_cases + 0.4, bottom.max() * 0.55, "onset in the last two\nweeks: counts\n"
            "still incomplete", ha="right", va="bottom", fontsize=7)
    labels = list(counts.index)
    for i, label in enumerate(labels):
        if label.endswith("W01"):
            ax.axvline(i - 0.5, color="black", lw=0.7, ls=":")
            ax.text(i - 0.4, bottom.max() * 1.02, label[:4] + " \u2192", fontsize=7, va="bottom")
    ax.set_xticks(x[::2], [lab.replace("-", "\n") for lab in labels[::2]], fontsize=7)
    ax.set_xlim(-0.5, len(counts) - 0.5)
    ax.set_ylim(0, bottom.max() * 1.12)
    ax.set_xlabel("ISO week of symptom onset", fontsize=8)
    ax.set_ylabel("Cases", fontsize=8)
    ax.tick_params(axis="y", labelsize=8)
    ax.yaxis.grid(color="#dddddd", lw=0.5)
    ax.set_axisbelow(True)
    ax.spines[["top", "right"]].set_visible(False)
    handles, names = ax.get_legend_handles_labels()
    ax.legend(handles[::-1], names[::-1], title=f"Case classification (n = {len(cases)})",
              fontsize=7.5, title_fontsize=7.5, frameon=False, loc="upper right")
    ax.set_title("Invented outbreak, Velmora Regional Health Network (not real data)",
                 fontsize=8, loc="left")
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
