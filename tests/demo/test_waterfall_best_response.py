"""Checks of the waterfall recipe against RECIST 1.1 and reference libraries."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from statsmodels.stats.proportion import proportion_confint  # noqa: E402

from pathlib import Path  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"

SLUG = "waterfall-best-response"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


def test_thresholds_are_recist_1_1(mod):
    # Eisenhauer et al. 2009 (RECIST 1.1), a fact of the trade: PR = at least 30% decrease in the
    # sum of diameters from baseline; PD = at least 20% increase from the nadir and >= 5 mm.
    assert mod.PARTIAL_RESPONSE == -30.0
    assert mod.PROGRESSION == 20.0
    assert mod.PROGRESSION_MM == 5.0


@pytest.mark.parametrize("sums, expected", [
    ([100, 70], ["PR"]),            # exactly -30% is a partial response (RECIST 1.1: "at least 30%")
    ([100, 71], ["SD"]),            # -29% is not
    ([100, 0], ["CR"]),             # disappearance of all target lesions
    ([100, 120], ["PD"]),           # exactly +20% and +20 mm: progression
    ([20, 24], ["SD"]),             # +20% but only 4 mm: not progression (5 mm rule)
    ([100, 60, 72], ["PR", "PD"]),  # +20% over the nadir of 60, though still below baseline
])
def test_timepoint_responses(mod, sums, expected):
    # RECIST 1.1 (Eisenhauer et al. 2009), a fact of the trade: the cases above follow the rules
    assert mod.timepoint_responses(np.array(sums)) == expected


def test_best_overall_response_stops_at_progression(mod):
    # RECIST 1.1: best overall response is the best recorded until progression
    assert mod.best_overall_response(np.array([100, 60, 75, 0])) == "PR"
    assert mod.best_overall_response(np.array([100, 130, 0])) == "PD"
    assert mod.best_overall_response(np.array([100])) == "NE"


def test_best_change_matches_pandas(mod):
    # independent computation with pandas pct_change relative to the first value
    frame = pd.read_csv(RECIPES / SLUG / "data" / "tumour_measurements.csv")
    table = mod.summarise(frame).set_index("participant")
    for participant, one in frame.sort_values("week").groupby("participant"):
        sums = one["sum_diameters_mm"].astype(float)
        ref = ((sums / sums.iloc[0] - 1) * 100).iloc[1:].min()
        assert table.loc[participant, "best_change"] == pytest.approx(ref)
    assert table["best_change"].is_monotonic_decreasing


def test_response_rate_matches_statsmodels(mod):
    # statsmodels proportion_confint(method="beta") is the Clopper-Pearson interval
    cats = pd.Series(["PR"] * 9 + ["CR"] * 2 + ["SD"] * 10 + ["PD"] * 4)
    k, n, low, high = mod.response_rate(cats)
    ref_low, ref_high = proportion_confint(11, 25, alpha=0.05, method="beta")
    assert (k, n) == (11, 25)
    assert low == pytest.approx(ref_low, abs=1e-9)
    assert high == pytest.approx(ref_high, abs=1e-9)


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    fig = mod.draw(*mod.load())
    assert len(fig.axes[0].patches) == len(mod.summarise(*mod.load()))
    plt.close(fig)
