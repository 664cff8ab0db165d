"""Prevalence by subgroup as a dot chart with 95% confidence intervals, readable in grayscale.

A dot chart (Cleveland 1984) puts every estimate on one common scale — the most accurate visual
judgement — with its interval as a line. The two survey waves are told apart by marker SHAPE and
FILL (open circle vs filled square) and by line weight, never by hue alone, so the figure
survives photocopying and every colour-vision deficiency. Data are invented.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from scipy import stats

DATA = Path("data") / "prevalence.csv"
WIDTH_MM = 120
# Each wave: marker, face colour, edge/line colour, line width. Distinct without colour.
STYLE = {"2019": dict(marker="o", face="white", edge="#6E6E6E", lw=1.0),
         "2023": dict(marker="s", face="#000000", edge="#000000", lw=1.6)}
OFFSET = {"2019": -0.17, "2023": 0.17}


def wilson_interval(cases: np.ndarray, n: np.ndarray, level: float = 0.95
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for a proportion.

    Chosen over the textbook Wald interval because its coverage stays close to nominal for
    small counts and proportions near 0 or 1, and it never leaves [0, 1].
    """
    cases, n = np.asarray(cases, float), np.asarray(n, float)
    z = stats.norm.ppf(0.5 + level / 2)
    p = cases / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    return centre - half, centre + half


def load(path: Path = DATA) -> pd.DataFrame:
    """Aggregate table; waves kept as text so '2019' is a label, not a number."""
    frame = pd.read_csv(path, dtype={"wave": str, "subgroup": str})
    frame["prevalence"] = frame["raised_bp"] / frame["examined"]
    frame["low"], frame["high"] = wilson_interval(frame["raised_bp"], frame["examined"])
    return frame


def layout(frame: pd.DataFrame) -> tuple[dict[tuple[str, str], float], dict[str, float]]:
    """y position of each (grouping, subgroup) row and of each grouping's heading, top down."""
    rows, heads, y = {}, {}, 0.0
    for grouping in dict.fromkeys(frame["grouping"]):
        heads[grouping] = y
        y -= 1.0
        for subgroup in dict.fromkeys(frame.loc[frame["grouping"] == grouping, "subgroup"]):
            rows[(grouping, subgroup)] = y
            y -= 1.0
        y -= 0.3
    return rows, heads


def draw(frame: pd.DataFrame) -> Figure:
    """Dot chart: heading rows per grouping, two offset estimates per subgroup."""
    plt.rcParams.update({"font.size": 7})
    rows, heads = layout(frame)
    width = WIDTH_MM / 25.4
    fig, ax = plt.subplots(figsize=(width, width * 0.95), layout="constrained")
    for y in rows.values():
        ax.axhline(y, color="#E3E3E3", lw=0.5, zorder=0)
    for wave, style in STYLE.items():
        part = frame[frame["wave"] == wave]
        ys = np.array([rows[(g, s)] for g, s in zip(part["grouping"], part["subgroup"])])
        ys = ys + OFFSET[wave]
        ax.hlines(ys, 100 * part["low"], 100 * part["high"], color=style["edge"],
                  lw=style["lw"], zorder=2)
        ax.scatter(100 * part["prevalence"], ys, marker=style["marker"], s=20,
                   facecolors=style["face"], edgecolors=style["edge"], linewidths=1.0,
                   zorder=3, label=wave)
    labels = {**{y: s.replace("-", "\u2013") for (g, s), y in rows.items()},
              **{y: g for g, y in heads.items()}}
    ax.set_yticks(list(labels), list(labels.values()))
    for tick, y in zip(ax.get_yticklabels(), labels):
        if y in heads.values():
            tick.set_fontweight("bold")
    ax.tick_params(axis="y", length=0)
    ax.set_ylim(min(rows.values()) - 0.7, 0.6)
    ax.set_xlim(0, None)
    ax.set_xlabel("Raised blood pressure, % of adults examined (95% Wilson interval)")
    ax.xaxis.grid(True, color="#E3E3E3", lw=0.5)
    ax.spines[["top", "right", "left"]].set_visible(False)
    handles = [Line2D([], [], marker=s["marker"], markerfacecolor=s["face"],
                      markeredgecolor=s["edge"], color=s["edge"], lw=s["lw"], markersize=5,
                      label=f"{wave} wave") for wave, s in STYLE.items()]
    ax.legend(handles=handles, loc="upper right", frameon=False, fontsize=7)
    ax.set_title("Raised blood pressure by subgroup and survey wave (invented data)",
                 loc="left", fontsize=7.5)
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
