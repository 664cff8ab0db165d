"""Checks of the Bland-Altman recipe against the 1986 worked example and scipy."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "bland-altman-limits-of-agreement"
fig_mod = load_recipe_module(SLUG)

# Bland & Altman (1986, Lancet i:307), Table 1: first PEFR readings (l/min) of 17 subjects
# with the Wright and the mini Wright peak flow meters (values from memory; their published
# summary -2.1, 38.8 below is reproduced exactly, which supports the transcription).
WRIGHT = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427]
MINI = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451]


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "bp_pairs.csv")


def test_reproduces_bland_altman_1986_worked_example():
    # Paper: mean difference -2.1 l/min, SD 38.8, limits -79.7 to 75.5 (with 2 SD);
    # CI of the lower limit -114.3 to -45.1 and of the upper 40.9 to 110.1 (from memory).
    r = fig_mod.limits_of_agreement(MINI, WRIGHT, multiplier=2.0)
    assert r.bias == pytest.approx(-2.1, abs=0.05)
    assert r.sd == pytest.approx(38.8, abs=0.05)
    assert r.lower == pytest.approx(-79.7, abs=0.1)
    assert r.upper == pytest.approx(75.5, abs=0.15)
    assert r.lower_ci == pytest.approx((-114.3, -45.1), abs=0.3)
    assert r.upper_ci == pytest.approx((40.9, 110.1), abs=0.3)


def test_bias_interval_matches_paired_t_test(frame):
    ref, new = frame["observer_mmhg"], frame["automated_mmhg"]
    r = fig_mod.limits_of_agreement(ref, new)
    ci = stats.ttest_rel(new, ref).confidence_interval(0.95)  # scipy paired t interval
    assert r.bias_ci == pytest.approx((ci.low, ci.high), rel=1e-10)


def test_limits_are_bias_plus_minus_196_sd(frame):
    diff = frame["automated_mmhg"] - frame["observer_mmhg"]
    r = fig_mod.limits_of_agreement(frame["observer_mmhg"], frame["automated_mmhg"])
    assert r.sd == pytest.approx(np.std(diff, ddof=1))
    assert (r.lower, r.upper) == pytest.approx((diff.mean() - 1.96 * r.sd,
                                                diff.mean() + 1.96 * r.sd))
    # about 95% of differences inside the limits when differences are near normal
    inside = np.mean((diff >= r.lower) & (diff <= r.upper))
    assert 0.9 <= inside <= 0.99


def test_proportional_bias_detected_when_present():
    rng = np.random.default_rng(1)
    ref = rng.uniform(80, 200, 200)
    new = 1.15 * ref + rng.normal(0, 3, 200)
    slope, p = fig_mod.proportional_bias(ref, new)
    assert slope > 0.1 and p < 1e-6


def test_figure_draws(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        assert len(ax.collections[-1].get_offsets()) == len(frame)
        labels = " ".join(t.get_text() for t in ax.texts)
        assert "bias" in labels and "upper limit" in labels
    finally:
        plt.close(fig)
