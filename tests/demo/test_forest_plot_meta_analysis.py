"""Checks of the forest-plot recipe against statsmodels' meta-analysis and 2x2 tables."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.collections import PathCollection  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from statsmodels.stats.contingency_tables import Table2x2  # noqa: E402
from statsmodels.stats.meta_analysis import combine_effects  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "forest-plot-meta-analysis"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "trials.csv")


@pytest.fixture(scope="module")
def effects(frame):
    return fig_mod.log_odds_ratio(frame["treated_events"], frame["treated_total"],
                                  frame["control_events"], frame["control_total"])


def test_log_odds_ratio_matches_statsmodels_table2x2(frame, effects):
    y, v = effects
    for i, row in enumerate(frame.itertuples()):
        table = Table2x2(np.array([[row.treated_events, row.treated_total - row.treated_events],
                                   [row.control_events, row.control_total - row.control_events]]))
        assert y[i] == pytest.approx(table.log_oddsratio, rel=1e-12)  # statsmodels Table2x2
        assert np.sqrt(v[i]) == pytest.approx(table.log_oddsratio_se, rel=1e-12)


def test_zero_cell_gets_half_correction():
    # Haldane-Anscombe: 0.5 added to each cell when a cell is zero (common practice).
    y, v = fig_mod.log_odds_ratio([0], [20], [5], [20])
    assert y[0] == pytest.approx(np.log(0.5 * 15.5 / (20.5 * 5.5)))
    assert v[0] == pytest.approx(1 / 0.5 + 1 / 20.5 + 1 / 5.5 + 1 / 15.5)


def test_fixed_and_dersimonian_laird_match_statsmodels(effects):
    y, v = effects
    ref = combine_effects(y, v, method_re="dl")  # statsmodels.stats.meta_analysis
    fixed, random = fig_mod.fixed_effect(y, v), fig_mod.dersimonian_laird(y, v)
    het = fig_mod.heterogeneity(y, v)
    assert fixed.estimate == pytest.approx(ref.mean_effect_fe, rel=1e-10)
    assert fixed.se == pytest.approx(ref.sd_eff_w_fe, rel=1e-10)
    assert random.estimate == pytest.approx(ref.mean_effect_re, rel=1e-10)
    assert random.se == pytest.approx(ref.sd_eff_w_re, rel=1e-10)
    assert random.tau2 == pytest.approx(ref.tau2, rel=1e-10)
    assert het.q == pytest.approx(ref.q, rel=1e-10)
    assert het.i2 == pytest.approx(ref.i2, rel=1e-10)
    np.testing.assert_allclose(random.weights, ref.weights_rel_re, rtol=1e-10)
    np.testing.assert_allclose(fixed.weights, ref.weights_rel_fe, rtol=1e-10)
    lo, hi = random.interval()
    ref_lo, ref_hi = ref.conf_int(use_t=False)[1]  # (fixed, random, ...): random effects
    assert (lo, hi) == pytest.approx((ref_lo, ref_hi), rel=1e-10)


def test_homogeneous_trials_give_zero_tau2():
    # DerSimonian & Laird (1986): tau^2 truncated at 0 when Q <= df.
    y = np.array([0.1, 0.11, 0.09, 0.1])
    v = np.array([0.05, 0.04, 0.06, 0.05])
    random, fixed = fig_mod.dersimonian_laird(y, v), fig_mod.fixed_effect(y, v)
    assert random.tau2 == 0.0 and random.estimate == pytest.approx(fixed.estimate)


def test_prediction_interval_formula(effects):
    # Higgins, Thompson & Spiegelhalter (2009, JRSS A 172:137), eq. 12: t on k - 2 df.
    y, v = effects
    pooled = fig_mod.dersimonian_laird(y, v)
    lo, hi = fig_mod.prediction_interval(pooled, len(y))
    half = stats.t.ppf(0.975, len(y) - 2) * np.sqrt(pooled.tau2 + pooled.se ** 2)
    assert (lo, hi) == pytest.approx((pooled.estimate - half, pooled.estimate + half))
    assert hi - lo > 2 * 1.96 * pooled.se


def test_format_p():
    assert fig_mod.format_p(0.0004) == "p < 0.001"
    assert fig_mod.format_p(0.0038) == "p = 0.004"
    assert fig_mod.format_p(0.21) == "p = 0.21"


def test_marker_area_is_proportional_to_weight(frame, effects):
    fig = fig_mod.draw(frame)
    try:
        mid = fig.axes[1]
        squares = [c for c in mid.collections if isinstance(c, PathCollection)]
        sizes = squares[0].get_sizes()  # scatter sizes are areas in points^2
        weights = fig_mod.dersimonian_laird(*effects).weights
        ratio = sizes / weights
        assert np.allclose(ratio, ratio[0])
        assert mid.get_xscale() == "log"
    finally:
        plt.close(fig)
