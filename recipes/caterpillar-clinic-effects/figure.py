"""Caterpillar plot of clinic effects from a random-intercept model, ordered by estimate.

Invented HbA1c reviews from 30 Velmora clinics; not for judging real clinics.
Run by hand: ``python figure.py``.
"""
from __future__ import annotations

from typing import NamedTuple

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from scipy import optimize, stats


class RandomIntercept(NamedTuple):
    """REML fit of y_ij = mu + u_j + e_ij with u_j ~ N(0, tau2) and e_ij ~ N(0, sigma2)."""

    mu: float
    mu_se: float
    tau2: float
    sigma2: float
    groups: pd.DataFrame  # per clinic: n, raw mean, BLUP effect, conditional SE


def _group_stats(y: np.ndarray, g: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    labels, index = np.unique(g, return_inverse=True)
    n = np.bincount(index).astype(float)
    total = np.bincount(index, weights=y)
    squares = np.bincount(index, weights=y * y)
    return labels, n, total, squares


def _gls_mean(n: np.ndarray, total: np.ndarray, sigma2: float, tau2: float) -> tuple[float, float]:
    """Generalised least squares mean: clinic means weighted by n / (sigma2 + n tau2)."""
    weight = n / (sigma2 + n * tau2)
    info = float(weight.sum())
    return float((weight * total / n).sum() / info), info


def reml_criterion(log_var: np.ndarray, n, total, squares) -> float:
    """-2 x REML log-likelihood (without constants) of the one-way random-effects model.

    Closed form per clinic, because V_j = sigma2 I + tau2 J has a known inverse and determinant;
    this keeps the fit a two-parameter optimisation however many reviews there are.
    """
    sigma2, tau2 = np.exp(log_var)
    mu, info = _gls_mean(n, total, sigma2, tau2)
    resid_total = total - n * mu
    resid_squares = squares - 2 * mu * total + n * mu * mu
    shrink = tau2 / (sigma2 + n * tau2)
    quad = (resid_squares - shrink * resid_total ** 2) / sigma2
    logdet = (n - 1) * np.log(sigma2) + np.log(sigma2 + n * tau2)
    return float(np.sum(logdet + quad) + np.log(info))


def fit_random_intercept(y: np.ndarray, groups: np.ndarray) -> RandomIntercept:
    """Fit by REML, then predict each clinic's effect (BLUP) with its conditional variance.

    BLUP u_j = tau2 / (tau2 + sigma2/n_j) x (mean_j - mu): small clinics are pulled towards the
    overall mean, which is why a caterpillar of BLUPs is fairer than one of raw means.
    """
    y = np.asarray(y, dtype=float)
    labels, n, total, squares = _group_stats(y, np.asarray(groups))
    start = np.log([np.var(y), np.var(total / n) + 1e-6])
    best = optimize.minimize(reml_criterion, start, args=(n, total, squares), method="Nelder-Mead",
                             options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 4000})
    sigma2, tau2 = np.exp(best.x)
    mu, info = _gls_mean(n, total, sigma2, tau2)
    factor = tau2 / (tau2 + sigma2 / n)
    means = total / n
    effect = factor * (means - mu)
    cond_var = 1.0 / (1.0 / tau2 + n / sigma2)
    table = pd.DataFrame({"clinic": labels, "n": n.astype(int), "raw_mean": means,
                          "effect": effect, "se": np.sqrt(cond_var)})
    return RandomIntercept(mu, float(np.sqrt(1 / info)), float(tau2), float(sigma2), table)


def load() -> tuple[pd.DataFrame]:
    """Read the reviews by relative path."""
    return (pd.read_csv("data/hba1c_reviews.csv"),)


def draw(reviews: pd.DataFrame) -> Figure:
    """Clinics ordered by predicted effect, 95% intervals, raw means shown to reveal shrinkage."""
    fit = fit_random_intercept(reviews["hba1c_mmol_mol"].to_numpy(), reviews["clinic"].to_numpy())
    table = fit.groups.sort_values("effect", ignore_index=True)
    z = stats.norm.ppf(0.975)
    low, high = table["effect"] - z * table["se"], table["effect"] + z * table["se"]
    flagged = (low > 0) | (high < 0)
    y = np.arange(len(table))
    fig, ax = plt.subplots(figsize=(85 / 25.4, 130 / 25.4), layout="constrained")
    ax.axvline(0, color="#777777", lw=0.8)
    colours = np.where(flagged, "#D55E00", "#0072B2")
    ax.hlines(y, low, high, color=colours, lw=1.4)
    ax.scatter(table["effect"], y, color=colours, s=14, zorder=3)
    ax.scatter(table["raw_mean"] - fit.mu, y, facecolor="none", edgecolor="#555555", s=12,
               lw=0.7, zorder=2)
    ax.set_yticks(y, [f"{c} (n={n})" for c, n in zip(table["clinic"], table["n"])], fontsize=7)
    ax.set_ylim(-0.7, len(table) - 0.3)
    ax.set_xlabel("Clinic effect on HbA1c (mmol/mol),\ndifference from the overall mean",
                  fontsize=8)
    ax.tick_params(axis="x", labelsize=8)
    ax.spines[["top", "right"]].set_visible(False)
    ax.xaxis.grid(color="#e5e5e5", lw=0.5)
    ax.set_axisbelow(True)
    handles = [Line2D([], [], color="#0072B2", marker="o", ms=4, lw=1.4,
                      label="predicted effect (BLUP), 95% interval"),
               Line2D([], [], color="#D55E00", marker="o", ms=4, lw=1.4,
                      label="interval excludes 0"),
               Line2D([], [], ls="none", marker="o", mfc="none", mec="#555555", ms=4,
                      label="raw clinic mean")]
    fig.legend(handles=handles, fontsize=7, loc="outside lower center", frameon=False)
    icc = fit.tau2 / (fit.tau2 + fit.sigma2)
    fig.suptitle(f"Overall mean {fit.mu:.1f} mmol/mol (REML fit)\nSD between clinics "
                 f"{np.sqrt(fit.tau2):.1f}, within clinics {np.sqrt(fit.sigma2):.1f}; "
                 f"ICC {icc:.3f}\nInvented data, not for judging real clinics", fontsize=7)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
