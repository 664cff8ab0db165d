"""Population pyramid of an invented catchment by age band and sex, with the province outline.

Invented population of the Velmora Regional Health Network. Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import re

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

COLOURS = {"male": "#0072B2", "female": "#E69F00"}  # Okabe-Ito blue and orange
OPEN_BAND_WIDTH = 10.0  # assumed width of the open top band (85+) for the median
BAND = re.compile(r"^(\d+)(?:-(\d+)|\+)$")


def band_bounds(label: str) -> tuple[float, float]:
    """Lower and upper age of a band such as '15-19' (upper is 20) or '85+' (open band)."""
    match = BAND.match(label)
    if not match:
        raise ValueError(f"'{label}' is not an age band like '15-19' or '85+'")
    lower = float(match[1])
    upper = float(match[2]) + 1 if match[2] else lower + OPEN_BAND_WIDTH
    return lower, upper


def percent_of_total(counts: pd.Series) -> pd.Series:
    """Share of the whole population (both sexes) in percent, so catchments of any size compare."""
    return 100.0 * counts / counts.sum()


def dependency_ratio(table: pd.DataFrame, column: str) -> float:
    """Total dependency ratio: people aged 0-14 and 65+ per 100 people aged 15-64."""
    lower = table["age_band"].map(lambda b: band_bounds(b)[0])
    young_old = table.loc[(lower < 15) | (lower >= 65), column].sum()
    working = table.loc[(lower >= 15) & (lower < 65), column].sum()
    return 100.0 * young_old / working


def sex_ratio(table: pd.DataFrame, column: str) -> float:
    """Males per 100 females, the demographer's convention."""
    by_sex = table.groupby("sex")[column].sum()
    return 100.0 * by_sex["male"] / by_sex["female"]


def grouped_median(lower: np.ndarray, upper: np.ndarray, counts: np.ndarray) -> float:
    """Median of grouped data, assuming people spread evenly within each band.

    Median = L + (N/2 - F) / f * w, where the median band starts at L, has width w and count f,
    and F people lie below it. Why: published tables give bands, not single years of age.
    """
    order = np.argsort(lower)
    lower, upper, counts = (np.asarray(a, dtype=float)[order] for a in (lower, upper, counts))
    cumulative = np.cumsum(counts)
    half = cumulative[-1] / 2.0
    k = int(np.searchsorted(cumulative, half))
    below = cumulative[k - 1] if k else 0.0
    return float(lower[k] + (half - below) / counts[k] * (upper[k] - lower[k]))


def median_age(table: pd.DataFrame, column: str) -> float:
    """Median age of both sexes together from the banded counts."""
    both = table.groupby("age_band", sort=False)[column].sum()
    bounds = np.array([band_bounds(b) for b in both.index])
    return grouped_median(bounds[:, 0], bounds[:, 1], both.to_numpy())


def load() -> tuple[pd.DataFrame]:
    """Read the banded counts by relative path."""
    return (pd.read_csv("data/population.csv"),)


def draw(table: pd.DataFrame) -> Figure:
    """Males to the left, females to the right, in percent of the total; province as outline."""
    bands = list(dict.fromkeys(table["age_band"]))
    y = np.arange(len(bands))
    fig, ax = plt.subplots(figsize=(120 / 25.4, 110 / 25.4), layout="constrained")
    share = {c: percent_of_total(table.set_index(["sex", "age_band"])[c])
             for c in ("catchment", "province")}
    for sex, sign in (("male", -1), ("female", 1)):
        ax.barh(y, sign * share["catchment"][sex][bands], height=0.9, color=COLOURS[sex],
                edgecolor="white", lw=0.4)
        ref = sign * share["province"][sex][bands].to_numpy()
        ax.plot(np.repeat(ref, 2), np.column_stack([y - 0.5, y + 0.5]).ravel(), color="black",
                lw=1.0)
    limit = float(np.ceil(max(s.max() for s in share.values()) + 0.5))
    ticks = np.arange(-limit, limit + 0.1, 1.0)
    ax.set_xticks(ticks, [f"{abs(t):g}" for t in ticks], fontsize=8)
    ax.set_xlim(-limit, limit)
    ax.set_yticks(y, bands, fontsize=7.5)
    ax.set_ylim(-0.6, len(bands) - 0.4)
    ax.axvline(0, color="black", lw=0.6)
    ax.set_xlabel("Percent of the total population", fontsize=8)
    ax.set_ylabel("Age band (years)", fontsize=8)
    ax.text(0.02, 0.99, "Males", transform=ax.transAxes, fontsize=9, va="top",
            color=COLOURS["male"], weight="bold")
    ax.text(0.98, 0.99, "Females", transform=ax.transAxes, fontsize=9, va="top", ha="right",
            color="#A66F00", weight="bold")
    ax.spines[["top", "right", "left"]].set_visible(False)
    ax.tick_params(axis="y", length=0)
    ax.xaxis.grid(color="#e5e5e5", lw=0.5)
    ax.set_axisbelow(True)
    facts = "\n".join(
        f"{word}: median age {median_age(table, c):.1f}, dependency ratio "
        f"{dependency_ratio(table, c):.0f}, {sex_ratio(table, c):.0f} males per 100 females"
        for word, c in (("Catchment", "catchment"), ("Province", "province")))
    handles = [Patch(color=COLOURS["male"], label="catchment, males"),
               Patch(color=COLOURS["female"], label="catchment, females"),
               Line2D([], [], color="black", lw=1.0, label="whole province (outline)")]
    ax.set_title(f"Esker Bay catchment (n = {table['catchment'].sum():,}) and the whole province",
                 fontsize=8.5)
    fig.supxlabel(facts + "\nInvented population of the fictional province of Velmora.",
                  fontsize=7, x=0.02, ha="left")
    fig.legend(handles=handles, fontsize=7, frameon=False, loc="outside upper center", ncols=3)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
