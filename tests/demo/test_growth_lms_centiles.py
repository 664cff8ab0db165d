"""Checks of the LMS growth-chart recipe against scipy's Box-Cox and the normal distribution."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from scipy import special, stats  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "growth-lms-centiles"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


@pytest.mark.parametrize("l_", [-1.2, -0.3, 0.0, 0.4, 1.0])
def test_z_is_box_cox_over_s(mod, l_):
    # Cole & Green 1992: z = BoxCox(y/M; L) / S; scipy.special.boxcox is the reference Box-Cox
    y = np.array([7.9, 9.5, 11.2, 14.0])
    m, s = 10.3, 0.12
    ref = special.boxcox(y / m, l_) / s
    assert np.allclose(mod.lms_z(y, l_, m, s), ref, rtol=1e-10)


@pytest.mark.parametrize("l_", [-0.8, 0.0, 0.5])
def test_centile_is_inverse_box_cox(mod, l_):
    # scipy.special.inv_boxcox inverts Box-Cox; y = M * inv_boxcox(S z, L)
    z = np.linspace(-3, 3, 7)
    m, s = 12.0, 0.11
    ref = m * special.inv_boxcox(s * z, l_)
    assert np.allclose(mod.lms_value(z, l_, m, s), ref, rtol=1e-10)
    assert np.allclose(mod.lms_z(mod.lms_value(z, l_, m, s), l_, m, s), z)


def test_l_zero_is_continuous(mod):
    # Cole & Green 1992: the L -> 0 limit of the power formula is ln(y/M)/S
    assert mod.lms_z(11.0, 1e-5, 10.0, 0.1) == pytest.approx(mod.lms_z(11.0, 0.0, 10.0, 0.1),
                                                              rel=1e-4)


def test_centile_curves_use_normal_quantiles(mod):
    # scipy.stats.norm.ppf is the standard normal quantile; the 50th centile must equal M
    table = pd.read_csv(RECIPES / SLUG / "data" / "lms_weight.csv")
    boys = table[table["sex"] == "boys"]
    curves = mod.centile_curves(boys, (50, 98))
    assert np.allclose(curves[50], boys["M"])
    z98 = mod.lms_z(curves[98], boys["L"].to_numpy(), boys["M"].to_numpy(), boys["S"].to_numpy())
    assert np.allclose(z98, stats.norm.ppf(0.98))
    # common practice: centile curves never cross
    assert np.all(curves[98] > curves[50])


def test_interpolation_and_range(mod):
    # numpy.interp is the reference linear interpolation; outside the table is refused
    table = pd.read_csv(RECIPES / SLUG / "data" / "lms_weight.csv")
    girls = table[table["sex"] == "girls"]
    l_, m, s = mod.interpolate_lms(girls, np.array([12.5]))
    pair = girls.set_index("age_months").loc[[12, 13]]
    assert m[0] == pytest.approx(pair["M"].mean())
    with pytest.raises(ValueError):
        mod.interpolate_lms(girls, np.array([61.0]))


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    table, cohort = mod.load()
    scored = mod.add_z_scores(cohort, table)
    assert scored["z"].notna().all() and scored["z"].abs().max() < 4
    fig = mod.draw(table, cohort)
    assert len(fig.axes) == 2
    plt.close(fig)
