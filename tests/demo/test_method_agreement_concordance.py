"""Checks of Lin's concordance correlation coefficient and its interval."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402

from demo_support import RECIPES, load_recipe_module  # noqa: E402

SLUG = "method-agreement-concordance"
fig_mod = load_recipe_module(SLUG)


@pytest.fixture(scope="module")
def frame():
    return fig_mod.load(RECIPES / SLUG / "data" / "hba1c_pairs.csv")


def test_ccc_equals_expected_squared_difference_form(frame):
    # Lin (1989, Biometrics 45:255), eq. 2: ccc = 1 - E[(X-Y)^2] / (sx^2 + sy^2 + (mx-my)^2).
    x = frame["reference_mmol_mol"].to_numpy(float)
    y = frame["point_of_care_mmol_mol"].to_numpy(float)
    ccc, _, _ = fig_mod.lin_ccc(x, y)
    alt = 1 - np.mean((x - y) ** 2) / (x.var() + y.var() + (x.mean() - y.mean()) ** 2)
    assert ccc == pytest.approx(alt, rel=1e-12)


def test_ccc_is_pearson_times_bias_factor(frame):
    # Lin (1989): ccc = r * C_b with C_b = 2 / (v + 1/v + u^2), v = sx/sy, u = (mx-my)/sqrt(sx sy).
    x = frame["reference_mmol_mol"].to_numpy(float)
    y = frame["point_of_care_mmol_mol"].to_numpy(float)
    ccc, r, cb = fig_mod.lin_ccc(x, y)
    assert r == pytest.approx(stats.pearsonr(x, y).statistic, rel=1e-12)  # scipy.stats.pearsonr
    v = x.std() / y.std()
    u = (x.mean() - y.mean()) / np.sqrt(x.std() * y.std())
    assert cb == pytest.approx(2 / (v + 1 / v + u * u), rel=1e-12)
    assert ccc == pytest.approx(r * cb, rel=1e-12)


def test_ccc_penalises_lines_other_than_identity():
    x = np.linspace(1, 10, 50)
    assert fig_mod.lin_ccc(x, x)[0] == pytest.approx(1.0)
    ccc, r, _ = fig_mod.lin_ccc(x, 2 * x)
    assert r == pytest.approx(1.0) and ccc < 0.8
    assert fig_mod.lin_ccc(x, x + 3)[0] < 1.0


def test_z_variance_matches_simulation():
    # Monte Carlo check of Lin's asymptotic variance of atanh(ccc) under bivariate normality
    # with a location shift (the case the 2000 correction concerns).
    rng = np.random.default_rng(2024)
    n, reps = 150, 3000
    cov = [[1.0, 0.8], [0.8, 1.3]]
    draws = rng.multivariate_normal([0.0, 0.4], cov, size=(reps, n))
    z = np.array([np.arctanh(fig_mod.lin_ccc(d[:, 0], d[:, 1])[0]) for d in draws])
    # population values
    rho_c = 2 * 0.8 / (1 + 1.3 + 0.16)
    r = 0.8 / np.sqrt(1.3)
    u = -0.4 / np.sqrt(np.sqrt(1.3))
    expected = fig_mod.ccc_z_variance(rho_c, r, u, n)
    assert z.var() == pytest.approx(expected, rel=0.1)


def test_interval_covers_the_estimate_and_is_inside_bounds(frame):
    result = fig_mod.concordance(frame["reference_mmol_mol"], frame["point_of_care_mmol_mol"])
    assert -1 < result.low < result.ccc < result.high < 1
    assert result.n == 1500


def test_figure_draws_with_transparency_and_identity_line(frame):
    fig = fig_mod.draw(frame)
    try:
        ax = fig.axes[0]
        assert ax.collections[0].get_alpha() < 0.5
        line = ax.lines[0]
        np.testing.assert_allclose(line.get_xdata(), line.get_ydata())
        assert ax.get_xlim() == ax.get_ylim()
    finally:
        plt.close(fig)
