"""Checks of ROC points, AUCs and the DeLong covariance against scikit-learn and definitions."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from sklearn.metrics import roc_auc_score, roc_curve  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "roc-two-markers-delong"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "markers.csv")


def structural_components(scores: np.ndarray, labels: np.ndarray):
    """DeLong et al. (1988) V10 and V01 straight from the definition psi(X, Y)."""
    x, y = scores[labels == 1], scores[labels == 0]
    psi = (x[:, None] > y[None, :]) + 0.5 * (x[:, None] == y[None, :])
    return psi.mean(axis=1), psi.mean(axis=0), psi.mean()


@pytest.mark.parametrize("column", list(fig_mod.MARKERS))
def test_auc_matches_sklearn(frame, column):
    result = fig_mod.delong([frame[column].to_numpy()], frame["condition"].to_numpy())
    ref = roc_auc_score(frame["condition"], frame[column])  # reference: scikit-learn
    assert result.auc[0] == pytest.approx(ref, rel=1e-12)


@pytest.mark.parametrize("column", list(fig_mod.MARKERS))
def test_roc_points_match_sklearn(frame, column):
    fpr, tpr = fig_mod.roc_points(frame[column].to_numpy(), frame["condition"].to_numpy())
    ref_fpr, ref_tpr, _ = roc_curve(frame["condition"], frame[column], drop_intermediate=False)
    np.testing.assert_allclose(fpr, ref_fpr)
    np.testing.assert_allclose(tpr, ref_tpr)


def test_hanley_mcneil_1982_worked_example():
    # Hanley & McNeil (1982, Radiology 143:29), CT ratings 1-5 of 58 normal and 51 abnormal
    # scans; AUC 0.893 (counts and value from memory; scikit-learn gives the same).
    neg = np.repeat([1, 2, 3, 4, 5], [33, 6, 6, 11, 2])
    pos = np.repeat([1, 2, 3, 4, 5], [3, 2, 2, 11, 33])
    labels = np.r_[np.zeros(neg.size, int), np.ones(pos.size, int)]
    result = fig_mod.delong([np.r_[neg, pos]], labels)
    assert result.auc[0] == pytest.approx(0.893, abs=5e-4)


def test_delong_covariance_matches_structural_components(frame):
    labels = frame["condition"].to_numpy()
    columns = [frame[c].to_numpy(float) for c in fig_mod.MARKERS]
    result = fig_mod.delong(columns, labels)
    parts = [structural_components(c, labels) for c in columns]
    m, n = labels.sum(), (1 - labels).sum()
    v10 = np.array([p[0] for p in parts])
    v01 = np.array([p[1] for p in parts])
    expected = np.cov(v10) / m + np.cov(v01) / n  # DeLong et al. 1988, Biometrics 44:837
    np.testing.assert_allclose(result.cov, expected, rtol=1e-10)
    np.testing.assert_allclose(result.auc, [p[2] for p in parts], rtol=1e-12)


def test_paired_test_and_interval(frame):
    labels = frame["condition"].to_numpy()
    result = fig_mod.delong([frame[c].to_numpy() for c in fig_mod.MARKERS], labels)
    diff, z, p = result.paired_test()
    var = result.cov[0, 0] + result.cov[1, 1] - 2 * result.cov[0, 1]
    assert z == pytest.approx(diff / np.sqrt(var))
    assert p == pytest.approx(2 * stats.norm.sf(abs(z)))
    lo, hi = result.interval(0)
    assert lo < result.auc[0] < hi


def test_delong_variance_agrees_with_simulation():
    # The DeLong variance estimates the sampling variance of the AUC: check by simulation.
    rng = np.random.default_rng(7)
    aucs, variances = [], []
    for _ in range(400):
        labels = np.r_[np.ones(40, int), np.zeros(60, int)]
        scores = rng.normal(size=100) + 1.0 * labels
        result = fig_mod.delong([scores], labels)
        aucs.append(result.auc[0])
        variances.append(result.cov[0, 0])
    assert np.mean(variances) == pytest.approx(np.var(aucs), rel=0.2)


def test_figure_draws(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        assert len(ax.lines) == 3
        assert ax.get_xlim() == ax.get_ylim()
    finally:
        plt.close(fig)
