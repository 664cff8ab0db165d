"""Checks of the Euler-diagram recipe's geometry against numerical integration and definitions."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from scipy import integrate, stats  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "euler-three-conditions"


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


def _lens_by_quadrature(r1: float, r2: float, d: float) -> float:
    """Reference lens area: integrate the vertical chord of the overlap with scipy.integrate.quad."""
    def chord(x: float) -> float:
        top = min(np.sqrt(max(r1 * r1 - x * x, 0)), np.sqrt(max(r2 * r2 - (x - d) ** 2, 0)))
        return 2 * top
    lo, hi = max(-r1, d - r2), min(r1, d + r2)
    return integrate.quad(chord, lo, hi, limit=200)[0] if hi > lo else 0.0


@pytest.mark.parametrize("r1, r2, d", [(1, 1, 1), (2, 1, 1.5), (3, 1.2, 3.5), (1, 1, 1.9)])
def test_lens_area_matches_quadrature(mod, r1, r2, d):
    # scipy.integrate.quad of the chord length is the outside reference
    assert mod.lens_area(r1, r2, d) == pytest.approx(_lens_by_quadrature(r1, r2, d), rel=1e-6)


def test_lens_special_cases(mod):
    # geometry (from memory): two unit circles one radius apart overlap by 2*pi/3 - sqrt(3)/2
    assert mod.lens_area(1, 1, 1) == pytest.approx(2 * np.pi / 3 - np.sqrt(3) / 2)
    assert mod.lens_area(1, 2, 3.01) == 0.0
    assert mod.lens_area(1, 3, 0.5) == pytest.approx(np.pi)


def test_distance_for_overlap_inverts_lens(mod):
    for overlap in (0.1, 1.0, 2.5):
        d = mod.distance_for_overlap(1.5, 1.0, overlap)
        assert mod.lens_area(1.5, 1.0, d) == pytest.approx(overlap, rel=1e-9)


def test_grid_region_areas_match_exact_two_circle_areas(mod):
    # with the third circle far away, region areas must match the exact lens and circle areas
    centres = np.array([[0.0, 0.0], [1.2, 0.0], [50.0, 50.0]])
    radii = np.array([1.0, 0.8, 0.1])
    areas = dict(zip(mod.REGIONS, mod.region_areas(centres, radii, grid=1500)))
    lens = mod.lens_area(1.0, 0.8, 1.2)
    assert areas[(1, 1, 0)] == pytest.approx(lens, rel=0.02)
    assert areas[(1, 0, 0)] == pytest.approx(np.pi - lens, rel=0.01)
    assert areas[(1, 1, 1)] == 0


def test_region_areas_against_monte_carlo(mod):
    # independent reference: scipy.stats.qmc Sobol points counted by region
    centres = np.array([[0.0, 0.0], [1.0, 0.2], [0.4, -0.9]])
    radii = np.array([1.0, 0.9, 0.7])
    lo, hi = (centres - radii[:, None]).min(0), (centres + radii[:, None]).max(0)
    pts = lo + stats.qmc.Sobol(2, seed=5).random_base2(17) * (hi - lo)
    member = [((pts - c) ** 2).sum(1) <= r * r for c, r in zip(centres, radii)]
    box = np.prod(hi - lo)
    ref = [np.mean(np.logical_and.reduce([m if b else ~m for m, b in zip(member, reg)])) * box
           for reg in mod.REGIONS]
    assert np.allclose(mod.region_areas(centres, radii, grid=800), ref, atol=0.01)


def test_stress_and_diag_error_definitions(mod):
    # stress as defined in the eulerr documentation (from memory): sum (f - b t)^2 / sum f^2 with
    # b = sum(f t) / sum(t^2); zero for any exact scaling. diagError: max |f/sum f - t/sum t|.
    t = np.array([10.0, 20, 30, 5, 5, 5, 25])
    assert mod.stress(3 * t, t) == pytest.approx(0.0, abs=1e-15)
    assert mod.diag_error(3 * t, t) == pytest.approx(0.0, abs=1e-15)
    f = t + np.array([1.0, -1, 0, 0, 0, 0, 0])
    b = f @ t / (t @ t)
    assert mod.stress(f, t) == pytest.approx(((f - b * t) ** 2).sum() / (f ** 2).sum())
    assert mod.diag_error(f, t) == pytest.approx(0.01)


def test_fit_recovers_a_representable_diagram(mod):
    # targets made from three real circles (Sobol areas above) must be refitted almost exactly
    centres = np.array([[0.0, 0.0], [1.3, 0.1], [0.5, -1.0]])
    radii = np.array([1.0, 0.8, 0.6])
    target = mod.region_areas(centres, radii, grid=600) * 1000
    _, _, fitted = mod.fit_euler(target)
    assert mod.diag_error(fitted, target) < 0.01


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    target, = mod.load()
    assert target.sum() == 10903 and (target >= 11).all()  # small-cell rule: common practice
    fig = mod.draw(target)
    assert len(fig.axes[0].patches) == 3
    plt.close(fig)
