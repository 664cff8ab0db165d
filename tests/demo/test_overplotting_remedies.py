"""Checks of the overplotting recipe's density estimate against scipy and the normal distribution."""
from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import stats  # noqa: E402

SLUG = "overplotting-remedies"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


def test_scott_factor_matches_scipy(mod):
    # scipy.stats.gaussian_kde.scotts_factor() = n^(-1/(d+4))
    data = np.random.default_rng(1).normal(size=(2, 500))
    assert mod.scott_factor(500, 2) == pytest.approx(stats.gaussian_kde(data).scotts_factor())


def test_binned_kde_matches_gaussian_kde(mod):
    # scipy.stats.gaussian_kde (direct sum of Gaussian kernels, Scott's rule) is the reference
    x, y = mod.simulate(4000, seed=3)
    gx = np.linspace(15, 95, 161)
    gy = np.linspace(70, 220, 151)
    ours = mod.binned_kde(x, y, gx, gy)
    ref_kde = stats.gaussian_kde(np.vstack([x, y]))
    sub_x, sub_y = np.meshgrid(gx[::8], gy[::8])
    ref = ref_kde(np.vstack([sub_x.ravel(), sub_y.ravel()])).reshape(sub_x.shape)
    mine = ours[::8, ::8]
    big = ref > 0.05 * ref.max()
    assert np.max(np.abs(mine[big] - ref[big]) / ref[big]) < 0.03
    assert np.max(np.abs(mine - ref)) < 0.01 * ref.max()


def test_linear_binning_conserves_points(mod):
    # conservation of mass: the binned weights sum to the number of points inside the grid
    x, y = mod.simulate(10_000, seed=4)
    gx = np.linspace(15, 95, 81)
    gy = np.linspace(70, 220, 76)
    inside = (x >= 15) & (x <= 95) & (y >= 70) & (y <= 220)
    assert mod.linear_binning(x, y, gx, gy).sum() == pytest.approx(inside.sum())


def test_hdr_levels_for_bivariate_normal(mod):
    # For a standard bivariate normal the p highest-density region is the disc with
    # r^2 = chi2(2).ppf(p), so its density level is exp(-r^2/2) / (2 pi) (scipy.stats.chi2)
    g = np.linspace(-6, 6, 601)
    gx, gy = np.meshgrid(g, g)
    density = np.exp(-(gx ** 2 + gy ** 2) / 2) / (2 * np.pi)
    levels = mod.hdr_levels(density, (0.5, 0.8, 0.95))
    expected = np.exp(-stats.chi2(2).ppf([0.5, 0.8, 0.95]) / 2) / (2 * np.pi)
    assert np.allclose(levels, expected, rtol=0.01)


def test_simulation_is_seeded(mod):
    a = mod.simulate(1000)
    b = mod.simulate(1000)
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
    assert len(mod.load()[0]) == 200_000


def test_figure_draws(mod):
    fig = mod.draw(*mod.simulate(20_000))
    axes = fig.axes[:4]
    # common practice: the panels share their axes so only the technique differs
    assert len({ax.get_xlim() for ax in axes}) == 1 and len({ax.get_ylim() for ax in axes}) == 1
    plt.close(fig)
