"""Waterfall plot of best percentage change in tumour size, with RECIST 1.1 thresholds.

Invented data from the Velmora Regional Health Network; not for clinical decisions.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.patches import Patch
from scipy import stats

PARTIAL_RESPONSE = -30.0   # RECIST 1.1: at least a 30% decrease from baseline
PROGRESSION = 20.0         # RECIST 1.1: at least a 20% increase from the nadir ...
PROGRESSION_MM = 5.0       # ... and at least 5 mm in absolute terms
RANK = {"CR": 0, "PR": 1, "SD": 2, "PD": 3}
COLOURS = {"CR": "#009E73", "PR": "#0072B2", "SD": "#999999", "PD": "#D55E00"}  # Okabe-Ito
WORDS = {"CR": "complete response", "PR": "partial response", "SD": "stable disease",
         "PD": "progressive disease"}


def percent_change(baseline: float, value: np.ndarray | float) -> np.ndarray | float:
    """Change from baseline in percent; the waterfall's bar height uses this scale."""
    return 100.0 * (np.asarray(value, dtype=float) - baseline) / baseline


def best_percent_change(sums: np.ndarray) -> float:
    """Most negative change from baseline over the follow-up assessments (``sums[0]`` is baseline).

    Why the minimum: the waterfall answers "how far did the tumour shrink at best", so a later
    regrowth does not hide an earlier response. NaN when there is no follow-up.
    """
    sums = np.asarray(sums, dtype=float)
    if sums.size < 2:
        return float("nan")
    return float(np.min(percent_change(sums[0], sums[1:])))


def timepoint_responses(sums: np.ndarray) -> list[str]:
    """RECIST 1.1 target-lesion response at each follow-up assessment.

    Progression is judged against the nadir so far (baseline included), response against
    baseline; disappearance of all target lesions (sum 0) is a complete response.
    """
    sums = np.asarray(sums, dtype=float)
    out: list[str] = []
    nadir = sums[0]
    for value in sums[1:]:
        if value >= nadir * (1 + PROGRESSION / 100) and value - nadir >= PROGRESSION_MM:
            out.append("PD")
        elif value == 0:
            out.append("CR")
        elif percent_change(sums[0], value) <= PARTIAL_RESPONSE:
            out.append("PR")
        else:
            out.append("SD")
        nadir = min(nadir, value)
    return out


def best_overall_response(sums: np.ndarray) -> str:
    """Best response recorded up to and including the first progression (RECIST 1.1).

    Simplified on purpose: no confirmation of responses and no minimum duration for stable
    disease, which a real trial protocol would add.
    """
    best = "NE"  # not evaluable: no follow-up assessment
    for response in timepoint_responses(sums):
        if best == "NE" or RANK[response] < RANK[best]:
            best = response
        if response == "PD":
            break
    return best


def response_rate(categories: pd.Series) -> tuple[int, int, float, float]:
    """Objective response rate (CR + PR) with the exact Clopper-Pearson 95% interval."""
    k = int(categories.isin(["CR", "PR"]).sum())
    n = int(categories.size)
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    return k, n, float(ci.low), float(ci.high)


def summarise(frame: pd.DataFrame) -> pd.DataFrame:
    """One row per participant: arm, best change and best overall response, sorted for drawing."""
    rows = []
    for participant, one in frame.sort_values("week").groupby("participant", sort=True):
        sums = one["sum_diameters_mm"].to_numpy()
        rows.append({"participant": participant, "arm": one["arm"].iloc[0],
                     "best_change": best_percent_change(sums),
                     "response": best_overall_response(sums)})
    out = pd.DataFrame(rows).dropna(subset=["best_change"])
    return out.sort_values(["best_change", "participant"], ascending=[False, True],
                           ignore_index=True)


def load() -> tuple[pd.DataFrame]:
    """Read the measurements by relative path, so the recipe runs from its own folder."""
    return (pd.read_csv("data/tumour_measurements.csv"),)


def draw(frame: pd.DataFrame) -> Figure:
    """Bars sorted from largest growth to deepest shrinkage, coloured by best overall response."""
    table = summarise(frame)
    fig, ax = plt.subplots(figsize=(180 / 25.4, 92 / 25.4), layout="constrained")
    x = np.arange(len(table))
    ax.bar(x, table["best_change"], width=0.8,
           color=[COLOURS[r] for r in table["response"]], edgecolor="none")
    for level, word, where, offset in ((PROGRESSION, "+20%: progression threshold", 0.22, 2.0),
                                       (PARTIAL_RESPONSE, "\u221230%: partial response threshold",
                                        0.0, -2.5)):
        ax.axhline(level, color="black", lw=0.8, ls=(0, (4, 3)))
        ax.text(len(table) * where, level + offset, word, ha="left",
                va="bottom" if offset > 0 else "top", fontsize=7.5)
    ax.axhline(0, color="black", lw=0.8)
    for xi, arm in zip(x, table["arm"]):
        ax.text(xi, 1.0, arm, transform=ax.get_xaxis_transform(), ha="center", va="bottom",
                fontsize=7, color="#444444")
    ax.set_xlim(-0.8, len(table) - 0.2)
    ax.set_ylim(-105, max(70.0, float(table["best_change"].max()) + 10))
    ax.set_xticks([])
    ax.set_xlabel(f"Participants (n = {len(table)}), sorted by best change; letter above bar = study arm",
                  fontsize=8)
    ax.set_ylabel("Best change in sum of target\nlesion diameters from baseline (%)", fontsize=8)
    ax.tick_params(labelsize=8)
    ax.spines[["top", "right", "bottom"]].set_visible(False)
    counts = table["response"].value_counts()
    handles = [Patch(color=COLOURS[c], label=f"{WORDS[c]} ({counts.get(c, 0)})")
               for c in ("CR", "PR", "SD", "PD")]
    ax.legend(handles=handles, title="Best overall response (RECIST 1.1)", fontsize=7.5,
              title_fontsize=7.5, loc="lower left", frameon=False)
    lines = []
    for arm, one in table.groupby("arm"):
        k, n, low, high = response_rate(one["response"])
        lines.append(f"Arm {arm}: {k}/{n} responded ({100 * k / n:.0f}%, 95% CI "
                     f"{100 * low:.0f}\u2013{100 * high:.0f}%)")
    ax.text(0.995, 0.93, "\n".join(lines) + "\nInvented data; not for clinical decisions.",
            transform=ax.transAxes, ha="right", va="top", fontsize=7.5)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
