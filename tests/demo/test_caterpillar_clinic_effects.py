"""Checks of the caterpillar recipe's REML fit and BLUPs against statsmodels MixedLM."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
import statsmodels.formula.api as smf  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "caterpillar-clinic-effects"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


@pytest.fixture(scope="module")
def reviews():
    return pd.read_csv(RECIPES / SLUG / "data" / "hba1c_reviews.csv")


@pytest.fixture(scope="module")
def reference(reviews):
    # statsmodels MixedLM (REML) is the reference implementation of the random-intercept model
    model = smf.mixedlm("hba1c_mmol_mol ~ 1", reviews, groups=reviews["clinic"])
    return model.fit(reml=True)


def test_variance_components_match_statsmodels(mod, reviews, reference):
    fit = mod.fit_random_intercept(reviews["hba1c_mmol_mol"], reviews["clinic"])
    assert fit.sigma2 == pytest.approx(reference.scale, rel=1e-4)
    assert fit.tau2 == pytest.approx(float(reference.cov_re.iloc[0, 0]), rel=1e-3)
    assert fit.mu == pytest.approx(float(reference.fe_params.iloc[0]), abs=1e-4)
    # statsmodels takes the SE from the numerical Hessian of the joint likelihood; the recipe uses
    # the GLS formula (X'V^-1X)^-1/2, so they agree to about 0.1%
    assert fit.mu_se == pytest.approx(float(reference.bse_fe.iloc[0]), rel=5e-3)


def test_blups_and_conditional_se_match_statsmodels(mod, reviews, reference):
    fit = mod.fit_random_intercept(reviews["hba1c_mmol_mol"], reviews["clinic"])
    table = fit.groups.set_index("clinic")
    for clinic, effect in reference.random_effects.items():
        assert table.loc[clinic, "effect"] == pytest.approx(float(effect.iloc[0]), abs=2e-3)
        cov = reference.random_effects_cov[clinic]
        assert table.loc[clinic, "se"] == pytest.approx(float(np.sqrt(cov.iloc[0, 0])), rel=2e-3)


def test_unbalanced_small_example(mod):
    # a second, small unbalanced data set, again against statsmodels MixedLM
    rng = np.random.default_rng(7)
    groups = np.repeat(["a", "b", "c", "d", "e", "f"], [3, 8, 5, 12, 4, 9])
    effects = dict(zip("abcdef", rng.normal(0, 2, 6)))
    y = 10 + np.array([effects[g] for g in groups]) + rng.normal(0, 1.5, len(groups))
    frame = pd.DataFrame({"y": y, "g": groups})
    ref = smf.mixedlm("y ~ 1", frame, groups=frame["g"]).fit(reml=True)
    fit = mod.fit_random_intercept(y, groups)
    assert fit.tau2 == pytest.approx(float(ref.cov_re.iloc[0, 0]), rel=1e-3)
    blups = fit.groups.set_index("clinic")["effect"]
    assert np.allclose([blups[g] for g in ref.random_effects],
                       [float(v.iloc[0]) for v in ref.random_effects.values()], atol=1e-3)


def test_shrinkage_is_towards_zero(mod, reviews):
    # common practice / definition of BLUP shrinkage: |BLUP| <= |raw mean - mu|, same sign
    fit = mod.fit_random_intercept(reviews["hba1c_mmol_mol"], reviews["clinic"])
    raw = fit.groups["raw_mean"] - fit.mu
    assert (fit.groups["effect"].abs() <= raw.abs() + 1e-12).all()
    assert (np.sign(fit.groups["effect"]) == np.sign(raw)).all()


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    fig = mod.draw(*mod.load())
    assert len(fig.axes[0].get_yticklabels()) == 30
    plt.close(fig)
