"""Checks of the population-pyramid recipe against definitions and numpy on expanded data."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "population-pyramid"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


@pytest.fixture
def table():
    return pd.read_csv(RECIPES / SLUG / "data" / "population.csv")


def test_band_bounds(mod):
    assert mod.band_bounds("15-19") == (15.0, 20.0)
    assert mod.band_bounds("85+") == (85.0, 95.0)
    with pytest.raises(ValueError):
        mod.band_bounds("fifteen")


def test_grouped_median_matches_expanded_uniform_data(mod):
    # reference: numpy.median of individuals spread evenly within their bands (the assumption
    # behind the grouped-median formula, a fact of the trade in demography)
    lower = np.array([0, 10, 20, 40]); upper = np.array([10, 20, 40, 60]); counts = np.array([300, 500, 700, 250])
    ages = np.concatenate([lo + (np.arange(c) + 0.5) * (up - lo) / c
                           for lo, up, c in zip(lower, upper, counts)])
    assert mod.grouped_median(lower, upper, counts) == pytest.approx(np.median(ages), abs=0.02)


def test_median_age_of_data(mod, table):
    both = table.groupby("age_band", sort=False)["province"].sum()
    bounds = np.array([mod.band_bounds(b) for b in both.index])
    ages = np.concatenate([np.linspace(lo, up, int(c), endpoint=False) + (up - lo) / (2 * c)
                           for (lo, up), c in zip(bounds, both)])
    # numpy.median on the expanded population is the outside reference
    assert mod.median_age(table, "province") == pytest.approx(np.median(ages), abs=0.01)


def test_ratios_follow_definitions(mod, table):
    # UN DESA definitions (from memory): total dependency ratio = (pop 0-14 + pop 65+) / pop 15-64 x 100;
    # sex ratio = males per 100 females. Reference computed here by listing the bands by hand.
    young = ["0-4", "5-9", "10-14"]
    old = ["65-69", "70-74", "75-79", "80-84", "85+"]
    t = table.set_index("age_band")
    dep = t.loc[young + old, "catchment"].sum()
    work = t.drop(index=young + old)["catchment"].sum()
    assert mod.dependency_ratio(table, "catchment") == pytest.approx(100 * dep / work)
    males = table.loc[table.sex == "male", "catchment"].sum()
    females = table.loc[table.sex == "female", "catchment"].sum()
    assert mod.sex_ratio(table, "catchment") == pytest.approx(100 * males / females)


def test_counts_not_small(table):
    # common practice (the data screen's small-cell rule): aggregate counts are at least 11
    assert (table[["catchment", "province"]] >= 11).all().all()


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    table, = mod.load()
    fig = mod.draw(table)
    widths = [abs(p.get_width()) for p in fig.axes[0].patches]
    assert sum(widths) == pytest.approx(100.0)  # percent of the total across both sexes
    plt.close(fig)
