"""Checks of the seriated heat map: z-scores, distances and the optimal leaf ordering."""
from __future__ import annotations

import itertools

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from scipy.cluster import hierarchy  # noqa: E402
from scipy.spatial.distance import pdist  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "heatmap-seriated-dendrogram"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def wide():
    return fig_mod.load(RECIPES / SLUG / "data" / "monthly_rates.csv")


def all_flipped_orders(tree: np.ndarray) -> list[list[int]]:
    """Every leaf order the tree allows (each merge may swap its children)."""
    n = tree.shape[0] + 1

    def orders(node: int) -> list[list[int]]:
        if node < n:
            return [[node]]
        left, right = int(tree[node - n, 0]), int(tree[node - n, 1])
        out = []
        for a, b in itertools.product(orders(left), orders(right)):
            out.extend([a + b, b + a])
        return out

    return orders(2 * n - 2)


def test_zscore_rows_matches_scipy(wide):
    z = fig_mod.zscore_rows(wide.to_numpy())
    ref = stats.zscore(wide.to_numpy(), axis=1, ddof=1)  # reference: scipy.stats.zscore
    np.testing.assert_allclose(z, ref, rtol=1e-12)


def test_correlation_distance_is_one_minus_pearson(wide):
    z = fig_mod.zscore_rows(wide.to_numpy())
    d = pdist(z, metric="correlation")
    r = stats.pearsonr(z[0], z[1]).statistic  # reference: scipy.stats.pearsonr
    assert d[0] == pytest.approx(1 - r, rel=1e-10)


def test_leaf_order_is_the_brute_force_optimum():
    # Optimal leaf ordering (Bar-Joseph, Gifford & Jaakkola 2001, Bioinformatics 17:S22):
    # among all 2^(n-1) flips of the tree, the order with minimal summed adjacent distance.
    rng = np.random.default_rng(11)
    data = rng.normal(size=(8, 6))
    order, tree = fig_mod.seriate(data, metric="euclidean")
    d = pdist(data)
    candidates = all_flipped_orders(hierarchy.linkage(d, method="average"))
    assert len(candidates) == 2 ** 7
    best = min(fig_mod.path_length(d, c) for c in candidates)
    assert fig_mod.path_length(d, order) == pytest.approx(best, rel=1e-12)
    assert sorted(order) == list(range(8))


def test_seriation_shortens_the_path_on_real_data(wide):
    z = fig_mod.zscore_rows(wide.to_numpy())
    order, _ = fig_mod.seriate(z)
    d = pdist(z, metric="correlation")
    assert fig_mod.path_length(d, order) < fig_mod.path_length(d, np.arange(len(z)))


def test_constant_row_is_refused():
    with pytest.raises(ValueError):
        fig_mod.zscore_rows(np.array([[1.0, 1.0, 1.0], [1.0, 2.0, 3.0]]))


def test_figure_rows_follow_dendrogram_leaves(wide):
    fig = fig_mod.draw(wide)
    try:
        z = fig_mod.zscore_rows(wide.to_numpy())
        order, tree = fig_mod.seriate(z)
        leaves = hierarchy.dendrogram(tree, no_plot=True)["leaves"]
        assert list(leaves) == list(order)
        seriated = fig.axes[2]
        labels = [t.get_text() for t in seriated.get_yticklabels()]
        assert labels == [wide.index[i] for i in order]
        np.testing.assert_allclose(seriated.images[0].get_array(), z[order])
    finally:
        plt.close(fig)


@pytest.mark.parametrize("seed", range(15))
def test_leaf_order_optimal_on_many_random_trees(seed):
    # Same definition (Bar-Joseph et al. 2001), brute force over every flip, several linkages.
    rng = np.random.default_rng(100 + seed)
    data = rng.normal(size=(7, 4))
    d = pdist(data)
    method = ("average", "complete", "ward")[seed % 3]
    tree = hierarchy.linkage(d, method=method)
    order = fig_mod.optimal_leaf_order(tree, d)
    best = min(fig_mod.path_length(d, c) for c in all_flipped_orders(tree))
    assert fig_mod.path_length(d, order) == pytest.approx(best, rel=1e-12)
    # reorder_linkage keeps the same tree (same merge heights, same clusters) in our order.
    again = fig_mod.reorder_linkage(tree, order)
    assert list(hierarchy.leaves_list(again)) == list(order)
    np.testing.assert_array_equal(again[:, 2], tree[:, 2])
    np.testing.assert_array_equal(np.sort(again[:, :2], axis=1), np.sort(tree[:, :2], axis=1))
