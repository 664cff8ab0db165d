"""Checks of the funnel-plot recipe: exact limits (Spiegelhalter 2005) and over-dispersion."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402
from scipy.stats import mstats  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "funnel-plot-clinic-readmissions"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "readmissions.csv")


@pytest.mark.parametrize("n,target,prob", [(50, 0.12, 0.975), (200, 0.12, 0.025),
                                           (731, 0.3, 0.999), (80, 0.05, 0.001)])
def test_interpolated_limit_hits_the_probability_on_the_linear_cdf(n, target, prob):
    # Spiegelhalter (2005, Stat Med 24:1185, appendix A.1.1): the limit is where the CDF,
    # linearly interpolated between r - 1 and r, equals prob. CDF from scipy.stats.binom.
    limit = float(fig_mod.binomial_limit(n, target, prob))
    x = limit * n
    r = np.ceil(x)
    f_low, f_high = stats.binom.cdf(r - 1, n, target), stats.binom.cdf(r, n, target)
    assert f_low + (x - (r - 1)) * (f_high - f_low) == pytest.approx(prob, abs=1e-12)
    assert r == stats.binom.ppf(prob, n, target)


def test_exact_limits_approach_normal_limits_for_large_clinics():
    # Normal approximation p0 ± z sqrt(p0(1-p0)/n) (Spiegelhalter 2005, eq. 1) for large n.
    n, target = 100_000, 0.12
    low, high = fig_mod.funnel(np.array([n]), target, 0.998)
    half = stats.norm.ppf(0.999) * np.sqrt(target * (1 - target) / n)
    assert low[0] == pytest.approx(target - half, abs=2e-4)
    assert high[0] == pytest.approx(target + half, abs=2e-4)


def test_limits_narrow_as_clinics_grow():
    n = np.array([100, 400, 1600])
    low, high = fig_mod.funnel(n, 0.12, 0.95)
    assert np.all(np.diff(high - low) < 0)


def test_winsorise_matches_scipy_mstats():
    values = np.random.default_rng(5).normal(size=30)
    ref = np.asarray(mstats.winsorize(values, limits=(0.1, 0.1)))  # reference: scipy mstats
    np.testing.assert_allclose(fig_mod.winsorise(values), ref)


def test_dispersion_without_extra_variation_is_near_one():
    # Under pure binomial sampling E[z^2] = 1 (definition of the z-score); many clinics.
    rng = np.random.default_rng(9)
    n = rng.integers(200, 2000, size=4000)
    events = rng.binomial(n, 0.12)
    spread = fig_mod.dispersion(events, n, 0.12)
    # Winsorising shrinks phi below 1 without over-dispersion; the factor for 10% of a normal
    # is E[min(z^2, q^2)] with q the 90th centile — computed from scipy.stats.norm (about 0.68).
    q = stats.norm.ppf(0.9)
    expected = 2 * (stats.norm.expect(lambda z: z * z, lb=0, ub=q) + 0.1 * q * q)
    assert spread.phi == pytest.approx(expected, rel=0.05)
    assert spread.tau2 == 0.0


def test_tau2_formula_on_real_data(frame):
    events, n = frame["readmissions_30d"].to_numpy(), frame["admissions"].to_numpy()
    target = events.sum() / n.sum()
    spread = fig_mod.dispersion(events, n, target)
    z = (events / n - target) / np.sqrt(target * (1 - target) / n)
    phi = np.mean(np.asarray(mstats.winsorize(z, limits=(0.1, 0.1))) ** 2)
    w = n / (target * (1 - target))
    tau2 = (len(n) * phi - (len(n) - 1)) / (w.sum() - (w ** 2).sum() / w.sum())
    assert spread.phi == pytest.approx(phi, rel=1e-12)
    assert spread.tau2 == pytest.approx(max(tau2, 0.0), rel=1e-12)
    assert spread.p_value == pytest.approx(stats.chi2.sf(len(n) * phi, len(n) - 1))


def test_outlying_clinics_are_flagged(frame):
    events, n = frame["readmissions_30d"].to_numpy(), frame["admissions"].to_numpy()
    verdict = fig_mod.classify(events, n, events.sum() / n.sum())
    flagged = {c: v for c, v in zip(frame["clinic"], verdict) if v != "within"}
    assert flagged == {"VC-07": "high", "VC-22": "low"}


def test_figure_draws(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        assert len(ax.collections[0].get_offsets()) == 30
        assert {t.get_text() for t in ax.texts} >= {"VC-07", "VC-22"}
    finally:
        plt.close(fig)
