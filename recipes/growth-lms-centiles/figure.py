"""Growth reference chart: LMS centile curves with children's weights and z-scores.

The LMS table and the "Velmora Growth Cohort" are invented; not for clinical decisions.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy.stats import norm

CENTILES = (2, 9, 25, 50, 75, 91, 98)  # two-thirds of a z unit apart
CHILD_COLOURS = ("#0072B2", "#D55E00", "#009E73")  # Okabe-Ito
MARKERS = ("o", "s", "^")
SMALL_L = 1e-6


def lms_z(y: np.ndarray, l_: np.ndarray, m: np.ndarray, s: np.ndarray) -> np.ndarray:
    """z-score of a measurement ``y`` under the LMS method (Cole & Green 1992).

    z = ((y/M)^L - 1) / (L S), or ln(y/M) / S when L is 0: a Box-Cox power transform removes the
    skewness, M centres and S scales, so z is standard normal in the reference population.
    """
    y, l_, m, s = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (y, l_, m, s)))
    ratio = y / m
    near_zero = np.abs(l_) < SMALL_L
    safe_l = np.where(near_zero, 1.0, l_)
    power = (ratio ** safe_l - 1) / (safe_l * s)
    return np.where(near_zero, np.log(ratio) / s, power)


def lms_value(z: np.ndarray, l_: np.ndarray, m: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Measurement at z-score ``z``: the inverse, M (1 + L S z)^(1/L), or M exp(S z) at L = 0."""
    z, l_, m, s = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (z, l_, m, s)))
    near_zero = np.abs(l_) < SMALL_L
    safe_l = np.where(near_zero, 1.0, l_)
    power = m * np.abs(1 + safe_l * s * z) ** (1 / safe_l)
    return np.where(near_zero, m * np.exp(s * z), power)


def interpolate_lms(table: pd.DataFrame, age: np.ndarray) -> tuple[np.ndarray, ...]:
    """L, M and S at arbitrary ages by linear interpolation between the tabulated months.

    Why linear: the table is monthly and smooth, so the error is far below measurement error;
    ages outside the table are refused rather than extrapolated.
    """
    age = np.asarray(age, dtype=float)
    grid = table["age_months"].to_numpy(dtype=float)
    if np.any(age < grid.min()) or np.any(age > grid.max()):
        raise ValueError(f"age outside the reference range {grid.min():g}-{grid.max():g} months")
    return tuple(np.interp(age, grid, table[col].to_numpy(dtype=float)) for col in ("L", "M", "S"))


def centile_curves(table: pd.DataFrame, centiles=CENTILES) -> dict[int, np.ndarray]:
    """Measurement at each centile for every tabulated age (z = Phi^-1(centile/100))."""
    l_, m, s = (table[c].to_numpy(dtype=float) for c in ("L", "M", "S"))
    return {c: lms_value(norm.ppf(c / 100), l_, m, s) for c in centiles}


def add_z_scores(cohort: pd.DataFrame, table: pd.DataFrame) -> pd.DataFrame:
    """Each measurement's z-score against the reference for the child's sex and age."""
    out = cohort.copy()
    out["z"] = np.nan
    for sex, rows in cohort.groupby("sex"):
        l_, m, s = interpolate_lms(table[table["sex"] == sex], rows["age_months"])
        out.loc[rows.index, "z"] = lms_z(rows["weight_kg"].to_numpy(), l_, m, s)
    return out


def load() -> tuple[pd.DataFrame, pd.DataFrame]:
    """Read the LMS table and the cohort by relative path."""
    return pd.read_csv("data/lms_weight.csv"), pd.read_csv("data/cohort_weights.csv")


def _panel(ax, table: pd.DataFrame, children: pd.DataFrame, title: str) -> None:
    ages = table["age_months"].to_numpy()
    for centile, values in centile_curves(table).items():
        ax.plot(ages, values, color="#555555", lw=1.3 if centile == 50 else 0.7,
                ls="-" if centile in (2, 50, 98) else (0, (3, 2)))
        ax.text(ages[-1] + 0.8, values[-1], f"{centile}th", va="center", fontsize=7,
                color="#333333")
    for i, (child, one) in enumerate(children.groupby("child")):
        one = one.sort_values("age_months")
        ax.plot(one["age_months"], one["weight_kg"], color=CHILD_COLOURS[i], lw=1.2,
                marker=MARKERS[i], ms=3.5, label=f"child {child}")
        last = one.iloc[-1]
        ax.annotate(f"z = {last.z:+.2f}".replace("-", "\u2212"), (last.age_months, last.weight_kg),
                    xytext=(0, 7 if i != 0 else -10), textcoords="offset points", ha="center",
                    fontsize=7, color=CHILD_COLOURS[i],
                    bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8))
    ax.set_title(title, fontsize=9)
    ax.set_xlim(0, 66)
    ax.set_xticks(range(0, 61, 12))
    ax.set_xlabel("Age (months)", fontsize=8)
    ax.tick_params(labelsize=8)
    ax.grid(color="#dddddd", lw=0.5)
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(fontsize=7, loc="upper left", frameon=False, title="latest z-score labelled",
              title_fontsize=7)


def draw(table: pd.DataFrame, cohort: pd.DataFrame) -> Figure:
    """Two panels (girls, boys) sharing the weight axis so the sexes compare directly."""
    scored = add_z_scores(cohort, table)
    fig, axes = plt.subplots(1, 2, figsize=(180 / 25.4, 95 / 25.4), sharey=True,
                             layout="constrained")
    for ax, sex in zip(axes, ("girls", "boys")):
        _panel(ax, table[table["sex"] == sex], scored[scored["sex"] == sex],
               f"Weight for age, {sex}")
    axes[0].set_ylabel("Weight (kg)", fontsize=8)
    axes[0].set_ylim(0, None)
    fig.supxlabel("Centiles 2nd\u201398th from an invented LMS reference; Velmora Growth "
             "Cohort (invented data, not for clinical decisions).", fontsize=7)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
