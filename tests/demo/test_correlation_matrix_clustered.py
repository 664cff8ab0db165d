"""Checks of the clustered correlation matrix: Spearman, distance, leaf order, blocks."""
from __future__ import annotations

import itertools

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from scipy.cluster import hierarchy  # noqa: E402
from scipy.spatial.distance import squareform  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "correlation-matrix-clustered"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "lab_panel.csv")


def test_spearman_matches_scipy(frame):
    ours = fig_mod.spearman_matrix(frame.to_numpy())
    ref = stats.spearmanr(frame.to_numpy()).statistic  # reference: scipy.stats.spearmanr
    np.testing.assert_allclose(ours, ref, atol=1e-12)


def test_spearman_handles_ties_like_scipy():
    x = np.array([[1, 2], [1, 3], [2, 3], [3, 1], [3, 5], [4, 5]], float)
    assert fig_mod.spearman_matrix(x)[0, 1] == pytest.approx(
        stats.spearmanr(x[:, 0], x[:, 1]).statistic)  # scipy.stats.spearmanr with ties


def test_distance_treats_negative_correlation_as_close():
    r = np.array([[1.0, -0.9, 0.1], [-0.9, 1.0, 0.0], [0.1, 0.0, 1.0]])
    d = squareform(fig_mod.correlation_distance(r))
    assert d[0, 1] == pytest.approx(0.1) and d[0, 2] == pytest.approx(0.9)


def _flips(tree: np.ndarray) -> list[list[int]]:
    n = tree.shape[0] + 1

    def orders(node: int) -> list[list[int]]:
        if node < n:
            return [[node]]
        a, b = int(tree[node - n, 0]), int(tree[node - n, 1])
        return [o for x, y in itertools.product(orders(a), orders(b)) for o in (x + y, y + x)]

    return orders(2 * n - 2)


@pytest.mark.parametrize("seed", range(6))
def test_leaf_order_is_brute_force_optimum(seed):
    # Optimal leaf ordering, defined by Bar-Joseph, Gifford & Jaakkola (2001): minimum summed
    # adjacent distance over every flip of the tree; checked by exhaustive search.
    rng = np.random.default_rng(seed)
    r = np.corrcoef(rng.normal(size=(30, 7)) @ rng.normal(size=(7, 7)), rowvar=False)
    d = fig_mod.correlation_distance(r)
    tree = hierarchy.linkage(d, method="average")
    order = fig_mod.optimal_leaf_order(tree, d)
    sq = squareform(d)
    cost = lambda o: sum(sq[a, b] for a, b in zip(o, o[1:]))  # noqa: E731
    assert cost(order) == pytest.approx(min(cost(o) for o in _flips(tree)), rel=1e-12)


def test_clusters_found_in_real_data(frame):
    r = fig_mod.spearman_matrix(frame.to_numpy())
    order, clusters = fig_mod.cluster_order(r)
    cols = list(frame.columns)
    same = lambda a, b: clusters[cols.index(a)] == clusters[cols.index(b)]  # noqa: E731
    assert same("alt_u_l", "ggt_u_l") and same("urea_mmol_l", "creatinine_umol_l")
    assert same("hdl_mmol_l", "triglycerides_mmol_l")
    assert not same("alt_u_l", "urea_mmol_l")
    runs = fig_mod.blocks(clusters[order])
    assert sum(length for _, length in runs) == 12
    assert all(len(set(clusters[order][s:s + n])) == 1 for s, n in runs)  # contiguous blocks


def test_short_coefficient():
    assert fig_mod.short_coefficient(0.8449) == ".84"
    assert fig_mod.short_coefficient(-0.004) == ".00"
    assert fig_mod.short_coefficient(-0.57) == "\u2212.57"


def test_figure_draws(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        assert len(ax.texts) == 12 * 11
        assert len(ax.patches) == 5
    finally:
        plt.close(fig)
