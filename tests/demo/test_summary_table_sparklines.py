"""Checks of the summary-table recipe against statsmodels, scipy and the WCAG definitions."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from statsmodels.stats.proportion import proportion_confint  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "summary-table-sparklines"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


@pytest.mark.parametrize("k, n", [(3605, 4000), (95, 100), (10, 10), (0, 25)])
def test_wilson_matches_statsmodels(mod, k, n):
    # statsmodels proportion_confint(method="wilson") is the reference Wilson score interval
    low, high = mod.wilson_interval(k, n)
    ref = proportion_confint(k, n, alpha=0.05, method="wilson")
    assert (low, high) == pytest.approx(ref, abs=1e-10)


def test_weekly_trend_matches_linregress(mod):
    # scipy.stats.linregress on log values is the reference least-squares slope
    values = np.array([410, 432, 425, 450, 470, 466, 490, 505, 499, 530, 541, 560])
    slope = stats.linregress(np.arange(12), np.log(values)).slope
    assert mod.weekly_trend(values) == pytest.approx(100 * (np.exp(slope) - 1))
    # a series growing exactly 2% a week has a trend of exactly 2
    assert mod.weekly_trend(300 * 1.02 ** np.arange(12)) == pytest.approx(2.0)


def test_wcag_contrast(mod):
    # W3C WCAG 2.x contrast ratio (from memory): black on white is 21:1, equal colours 1:1,
    # and #767676 on white is about 4.54:1 (the lightest grey passing the 4.5:1 AA level)
    assert mod.contrast_ratio("black", "white") == pytest.approx(21.0)
    assert mod.contrast_ratio("#336699", "#336699") == pytest.approx(1.0)
    assert mod.contrast_ratio("#767676", "white") == pytest.approx(4.54, abs=0.01)
    assert mod.text_colour("#08306B") == "white" and mod.text_colour("#F7FBFF") == "black"


def test_summary_against_pandas(mod):
    # independent recomputation of totals and change with pandas groupby
    visits = pd.read_csv(RECIPES / SLUG / "data" / "weekly_visits.csv")
    table = mod.summarise(visits).set_index("district")
    weeks = sorted(visits["week"].unique())
    recent = visits[visits["week"].isin(weeks[-12:])].groupby("district")["visits"].sum()
    before = visits[visits["week"].isin(weeks[-24:-12])].groupby("district")["visits"].sum()
    assert (table.loc[recent.index, "visits"] == recent).all()
    assert np.allclose(table.loc[recent.index, "change"], 100 * (recent / before - 1))
    assert mod.summarise(visits)["change"].is_monotonic_decreasing
    # common practice (small-cell rule of the data screen): every count is at least 11
    assert (visits[["visits", "seen_within_4h"]] >= 11).all().all()


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    fig = mod.draw(*mod.load())
    texts = {t.get_text() for t in fig.axes[0].texts}
    assert "Saltmere" in texts and "Harrel Fen" in texts
    plt.close(fig)
