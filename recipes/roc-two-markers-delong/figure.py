"""ROC curves of two diagnostic markers on the same patients, AUCs with CIs, DeLong's test.

Both markers were measured on the same 320 invented patients, so their AUCs are correlated and
must be compared by a paired test: DeLong, DeLong & Clarke-Pearson (1988) estimate the variances
AND the covariance of the two AUCs from the same "structural components", computed here with
the mid-rank algorithm of Sun & Xu (2014). The curves are empirical step functions on a square
plot with the chance diagonal; marker B is an integer score, so its curve has few, long steps
(ties). Data are invented.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from scipy import stats

DATA = Path("data") / "markers.csv"
WIDTH_MM = 85
MARKERS = {"marker_a_ng_ml": ("Marker A (blood level)", "#0072B2", "-"),
           "marker_b_score": ("Marker B (0\u201310 score)", "#E69F00", "--")}


def roc_points(scores: np.ndarray, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """False- and true-positive rates at every distinct threshold, from (0, 0) to (1, 1).

    'Positive' means score >= threshold; tied scores move the curve diagonally, which is the
    honest drawing of a tie (the order within a tie is unknown).
    """
    scores, labels = np.asarray(scores, float), np.asarray(labels, int)
    thresholds = np.unique(scores)[::-1]
    pos, neg = labels.sum(), (1 - labels).sum()
    tpr = np.array([0.0] + [np.sum((scores >= t) & (labels == 1)) / pos for t in thresholds])
    fpr = np.array([0.0] + [np.sum((scores >= t) & (labels == 0)) / neg for t in thresholds])
    return fpr, tpr


@dataclass(frozen=True)
class DeLong:
    """AUCs of several markers on the same cases, with their covariance matrix."""

    auc: np.ndarray
    cov: np.ndarray

    def interval(self, i: int, level: float = 0.95) -> tuple[float, float]:
        """Normal interval on the AUC scale, clipped to [0, 1]."""
        z = stats.norm.ppf(0.5 + level / 2)
        half = z * np.sqrt(self.cov[i, i])
        return max(0.0, float(self.auc[i] - half)), min(1.0, float(self.auc[i] + half))

    def paired_test(self, i: int = 0, j: int = 1) -> tuple[float, float, float]:
        """(difference, z, two-sided p) for AUC_i - AUC_j; the covariance enters the variance."""
        diff = self.auc[i] - self.auc[j]
        var = self.cov[i, i] + self.cov[j, j] - 2 * self.cov[i, j]
        z = diff / np.sqrt(var)
        return float(diff), float(z), float(2 * stats.norm.sf(abs(z)))


def delong(score_columns: list[np.ndarray], labels: np.ndarray) -> DeLong:
    """DeLong AUCs and covariance via mid-ranks (Sun & Xu 2014), O(n log n) per marker.

    For each marker, V10 (one per diseased case) is the share of non-diseased it outranks and
    V01 (one per non-diseased) the share of diseased that outrank it (ties count one half).
    cov = S10 / m + S01 / n, with S the sample covariance matrices of V10 and V01 across markers.
    """
    labels = np.asarray(labels, int)
    positive, negative = labels == 1, labels == 0
    m, n = positive.sum(), negative.sum()
    v10, v01, auc = [], [], []
    for scores in score_columns:
        scores = np.asarray(scores, float)
        x, y = scores[positive], scores[negative]
        rank_all = stats.rankdata(np.concatenate([x, y]))
        rank_x, rank_y = stats.rankdata(x), stats.rankdata(y)
        auc.append((rank_all[:m].sum() - m * (m + 1) / 2) / (m * n))
        v10.append((rank_all[:m] - rank_x) / n)
        v01.append(1 - (rank_all[m:] - rank_y) / m)
    s10 = np.atleast_2d(np.cov(np.array(v10)))
    s01 = np.atleast_2d(np.cov(np.array(v01)))
    return DeLong(np.array(auc), s10 / m + s01 / n)


def load(path: Path = DATA) -> pd.DataFrame:
    return pd.read_csv(path)


def draw(frame: pd.DataFrame) -> Figure:
    """Square unit plot, chance diagonal, both curves, AUCs and the paired test in the legend."""
    plt.rcParams.update({"font.size": 7})
    labels = frame["condition"].to_numpy()
    result = delong([frame[c].to_numpy() for c in MARKERS], labels)
    width = WIDTH_MM / 25.4
    fig, ax = plt.subplots(figsize=(width, width * 1.05), layout="constrained")
    ax.plot([0, 1], [0, 1], color="#D0D0D0", lw=1.0, ls=":")  # chance: AUC 0.5
    for i, (column, (name, colour, style)) in enumerate(MARKERS.items()):
        fpr, tpr = roc_points(frame[column].to_numpy(), labels)
        lo, hi = result.interval(i)
        ax.plot(fpr, tpr, color=colour, ls=style, lw=1.4,
                label=f"{name}\nAUC {result.auc[i]:.3f} ({lo:.3f}\u2013{hi:.3f})")
    diff, z, p = result.paired_test()
    ax.set_xlim(-0.01, 1.01)
    ax.set_ylim(-0.01, 1.01)
    ax.set_aspect("equal")
    ax.set_xlabel("1 \u2212 specificity (false-positive rate)")
    ax.set_ylabel("Sensitivity (true-positive rate)")
    ax.legend(loc="lower right", bbox_to_anchor=(1.0, 0.13), frameon=False, fontsize=7,
              handlelength=2.2)
    ax.text(0.98, 0.02, f"DeLong paired test:\n\u0394AUC {diff:.3f}, z = {z:.2f}, "
            f"{'p < 0.001' if p < 0.001 else f'p = {p:.3f}'}", transform=ax.transAxes,
            ha="right", va="bottom", fontsize=7)
    ax.spines[["top", "right"]].set_visible(False)
    n_pos = int(labels.sum())
    fig.suptitle(f"Two markers on the same {len(labels)} patients, {n_pos} with the condition"
                 "\n(invented data); AUC with 95% CI; dotted diagonal: chance", fontsize=7,
                 x=0.02, ha="left")
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
