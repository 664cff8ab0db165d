"""Checks of the grayscale dot chart: Wilson intervals and that waves differ without colour."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.colors import to_rgb  # noqa: E402
from statsmodels.stats.proportion import proportion_confint  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "prevalence-dot-chart-grayscale"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "prevalence.csv")


def luminance(colour) -> float:
    """Relative luminance with ITU-R BT.709 weights on linearised sRGB (as in WCAG 2.1)."""
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in to_rgb(colour)]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def test_wilson_matches_statsmodels(frame):
    low, high = fig_mod.wilson_interval(frame["raised_bp"], frame["examined"])
    ref_low, ref_high = proportion_confint(frame["raised_bp"], frame["examined"],
                                           alpha=0.05, method="wilson")  # statsmodels
    np.testing.assert_allclose(low, ref_low, rtol=1e-10)
    np.testing.assert_allclose(high, ref_high, rtol=1e-10)


@pytest.mark.parametrize("cases,n,low,high", [(81, 263, 0.2553, 0.3662),
                                               (15, 148, 0.0624, 0.1605),
                                               (0, 20, 0.0, 0.1611),
                                               (1, 29, 0.0061, 0.1718)])
def test_wilson_matches_newcombe_1998_examples(cases, n, low, high):
    # Newcombe RG, Stat Med 1998;17:857-872, Table II, score method (values from memory;
    # statsmodels agrees to 4 decimals).
    ours = fig_mod.wilson_interval(np.array([cases]), np.array([n]))
    assert ours[0][0] == pytest.approx(low, abs=6e-5)
    assert ours[1][0] == pytest.approx(high, abs=6e-5)


def test_interval_stays_within_zero_and_one():
    low, high = fig_mod.wilson_interval(np.array([0, 30]), np.array([30, 30]))
    assert low.min() >= 0 and high.max() <= 1 + 1e-12


def test_waves_are_distinguishable_without_colour():
    # Grayscale-safe: marker shapes differ and the styles are achromatic with a clear
    # lightness gap (common practice: encode groups redundantly, not by hue alone).
    a, b = fig_mod.STYLE["2019"], fig_mod.STYLE["2023"]
    assert a["marker"] != b["marker"]
    for style in (a, b):
        for key in ("face", "edge"):
            r, g, bl = to_rgb(style[key])
            assert r == g == bl, "colour must be achromatic"
    assert abs(luminance(a["face"]) - luminance(b["face"])) > 0.9
    assert a["lw"] != b["lw"]


def test_figure_draws_every_estimate(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        points = [c for c in ax.collections if c.get_offsets().shape[0] == 14 and
                  c.get_paths()]
        xs = np.concatenate([np.asarray(c.get_offsets())[:, 0] for c in ax.collections
                             if hasattr(c, "get_sizes") and len(c.get_sizes())])
        assert len(points) >= 2
        np.testing.assert_allclose(np.sort(xs), np.sort(100 * frame["prevalence"].to_numpy()))
        labels = [t.get_text() for t in ax.get_yticklabels()]
        assert "Deprivation fifth" in labels and "80 and over" in labels
    finally:
        plt.close(fig)
