"""Checks of the tile-grid map: classing against pandas, counts, and label contrast (WCAG)."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from matplotlib.colors import to_rgba  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "tile-grid-map-quantile-classes"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "uptake.csv")


def test_quantile_classes_match_pandas_qcut(frame):
    values = frame["uptake_pct"].to_numpy()
    ours = fig_mod.assign_classes(values, fig_mod.quantile_breaks(values, 4))
    ref = pd.qcut(values, 4, labels=False)  # reference: pandas.qcut
    np.testing.assert_array_equal(ours, ref)


def test_quantile_classes_have_equal_counts(frame):
    # Equal class counts are the defining property of quantile classes (common practice).
    values = frame["uptake_pct"].to_numpy()
    table = fig_mod.class_table(values, fig_mod.quantile_breaks(values, 4))
    assert table["count"].tolist() == [6, 6, 6, 6]
    assert table["low"].iloc[0] == values.min() and table["high"].iloc[-1] == values.max()


def test_equal_interval_classes_match_pandas_cut():
    values = np.random.default_rng(2).lognormal(size=50)
    ours = fig_mod.assign_classes(values, fig_mod.equal_interval_breaks(values, 5))
    edges = np.linspace(values.min(), values.max(), 6)
    ref = pd.cut(values, edges, labels=False, include_lowest=True, right=False)  # pandas.cut
    ref = np.where(values == values.max(), 4, ref)  # pandas leaves the maximum out when right=False
    np.testing.assert_array_equal(ours, ref)


def test_relative_luminance_of_reference_colours():
    # WCAG 2.1 definition: white 1.0, black 0.0, pure sRGB green 0.7152 (its BT.709 weight);
    # contrast of black on white 21:1 (WCAG 2.1, understanding SC 1.4.3).
    assert fig_mod.relative_luminance((1, 1, 1)) == pytest.approx(1.0)
    assert fig_mod.relative_luminance((0, 1, 0)) == pytest.approx(0.7152)
    assert fig_mod.contrast_ratio((0, 0, 0), (1, 1, 1)) == pytest.approx(21.0)


def test_every_tile_label_meets_wcag_large_text_contrast(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        tiles = [p for p in ax.patches]
        assert len(tiles) == 24
        for text in ax.texts:
            if text.get_text() == "SEA":
                continue
            x, y = text.get_position()
            tile = next(p for p in tiles if p.contains_point(ax.transData.transform((x, y))))
            ratio = fig_mod.contrast_ratio(to_rgba(tile.get_facecolor()),
                                           to_rgba(text.get_color()))
            assert ratio >= 4.5, text.get_text()  # WCAG 2.1 SC 1.4.3 minimum for normal text
    finally:
        plt.close(fig)


def test_legend_prints_counts(frame):
    fig = fig_mod.draw(frame)
    try:
        texts = [t.get_text() for t in fig.axes[1].texts]
        assert texts.count("6 districts") == 4
    finally:
        plt.close(fig)
