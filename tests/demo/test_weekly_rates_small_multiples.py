"""Checks of the small-multiples recipe against outside references (scipy, statsmodels)."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
import statsmodels.api as sm  # noqa: E402
from scipy import stats  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "weekly-rates-small-multiples"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "weekly_visits.csv")


def test_slope_matches_scipy_linregress(frame):
    part = frame[frame["district"] == "Pellam"]
    x, y = part["week"].to_numpy(), part["rate_per_10k"].to_numpy()
    fit = fig_mod.fit_trend(x, y)
    ref = stats.linregress(x, y)  # reference: scipy.stats.linregress
    assert fit.slope == pytest.approx(ref.slope, rel=1e-10)
    assert fit.intercept == pytest.approx(ref.intercept, rel=1e-10)
    assert fit.slope_se == pytest.approx(ref.stderr, rel=1e-10)


def test_slope_interval_and_band_match_statsmodels_ols(frame):
    part = frame[frame["district"] == "Amberlow"]
    x, y = part["week"].to_numpy(float), part["rate_per_10k"].to_numpy()
    fit = fig_mod.fit_trend(x, y)
    model = sm.OLS(y, sm.add_constant(x)).fit()  # reference: statsmodels OLS
    low, high = model.conf_int(alpha=0.05)[1]
    assert (fit.slope_low, fit.slope_high) == pytest.approx((low, high), rel=1e-9)
    grid = np.array([1.0, 10.5, 26.0, 52.0])
    mean, band_low, band_high = fig_mod.confidence_band(fit, grid)
    ref = model.get_prediction(sm.add_constant(grid, has_constant="add")).summary_frame(alpha=0.05)
    np.testing.assert_allclose(mean, ref["mean"], rtol=1e-9)
    np.testing.assert_allclose(band_low, ref["mean_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(band_high, ref["mean_ci_upper"], rtol=1e-9)


def test_band_is_narrowest_at_mean_of_x():
    # Property of the OLS mean band (any regression text; common practice): width is minimal at x̄.
    rng = np.random.default_rng(3)
    x = np.arange(20.0)
    fit = fig_mod.fit_trend(x, 2 + 0.5 * x + rng.normal(size=20))
    grid = np.linspace(0, 19, 39)
    _, low, high = fig_mod.confidence_band(fit, grid)
    assert grid[np.argmin(high - low)] == pytest.approx(9.5)


def test_panels_ordered_by_slope_not_name(frame):
    fits = fig_mod.fit_all(frame)
    order = fig_mod.panel_order(fits)
    slopes = [fits[d].slope for d in order]
    assert slopes == sorted(slopes, reverse=True)
    assert order != sorted(order)
    assert sorted(order) == sorted(frame["district"].unique()) and len(order) == 24


def test_trend_colour_follows_interval():
    fit = fig_mod.fit_trend(np.arange(10.0), np.arange(10.0) * 2 + np.tile([0.1, -0.1], 5))
    assert fig_mod.trend_colour(fit) == fig_mod.RISING


def test_figure_draws_on_shared_axes(frame):
    fig = fig_mod.draw(frame)
    try:
        visible = [ax for ax in fig.axes if ax.get_visible()]
        assert len(visible) == 24
        # Shared axes across panels: common practice for small multiples.
        assert len({ax.get_ylim() for ax in visible}) == 1
        assert len({ax.get_xlim() for ax in visible}) == 1
        titles = [ax.get_title(loc="left") for ax in visible]
        fits = fig_mod.fit_all(frame)
        assert titles == fig_mod.panel_order(fits)
        assert fig.get_size_inches()[0] == pytest.approx(180 / 25.4)
    finally:
        plt.close(fig)
