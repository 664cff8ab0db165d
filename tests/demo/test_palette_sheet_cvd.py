"""Checks of the palette-sheet recipe's colour science against colorspacious and scikit-image."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from colorspacious import cspace_convert  # noqa: E402
from skimage import color as skcolor  # noqa: E402

RECIPES = Path(__file__).resolve().parents[2] / "recipes"
SLUG = "palette-sheet-cvd"
COLOURS = np.random.default_rng(9).uniform(0.05, 0.95, size=(40, 3))
KINDS = {"protanopia": "protanomaly", "deuteranopia": "deuteranomaly", "tritanopia": "tritanomaly"}


@pytest.fixture
def mod(recipe_module):
    return recipe_module(SLUG)


@pytest.mark.parametrize("ours, theirs", sorted(KINDS.items()))
def test_cvd_simulation_matches_colorspacious(mod, ours, theirs):
    # colorspacious implements Machado, Oliveira & Fernandes (2009); severity 100 = dichromacy
    cvd = {"name": "sRGB1+CVD", "cvd_type": theirs, "severity": 100}
    ref = np.clip(cspace_convert(COLOURS, cvd, "sRGB1"), 0, 1)
    assert np.allclose(mod.simulate_cvd(COLOURS, ours), ref, atol=2e-3)


def test_lab_matches_skimage_and_colorspacious(mod):
    # skimage.color.rgb2lab and colorspacious "CIELab" (D65) are reference CIE L*a*b* conversions
    ours = mod.srgb_to_lab(COLOURS)
    assert np.allclose(ours, skcolor.rgb2lab(COLOURS[None])[0], atol=0.05)
    assert np.allclose(ours, cspace_convert(COLOURS, "sRGB1", "CIELab"), atol=0.05)


def test_min_delta_e_matches_skimage(mod):
    # skimage.color.deltaE_cie76 is the reference CIE76 colour difference
    rgb = COLOURS[:6]
    lab = skcolor.rgb2lab(rgb[None])[0]
    neighbours = skcolor.deltaE_cie76(lab[:-1], lab[1:]).min()
    pairs = min(skcolor.deltaE_cie76(lab[i], lab[j]) for i in range(6) for j in range(i + 1, 6))
    assert mod.min_delta_e(rgb, neighbours_only=True) == pytest.approx(neighbours, abs=0.05)
    assert mod.min_delta_e(rgb, neighbours_only=False) == pytest.approx(pairs, abs=0.05)


def test_grayscale_keeps_luminance(mod):
    # colorspacious sRGB1 -> XYZ1 gives relative luminance Y; the gray must have the same Y
    gray = mod.to_grayscale(COLOURS)
    assert np.allclose(gray[:, 0], gray[:, 1]) and np.allclose(gray[:, 1], gray[:, 2])
    y_in = cspace_convert(COLOURS, "sRGB1", "XYZ1")[:, 1]
    y_out = cspace_convert(gray, "sRGB1", "XYZ1")[:, 1]
    assert np.allclose(y_in, y_out, atol=1e-4)


def test_srgb_round_trip(mod):
    # IEC 61966-2-1 transfer curve: decode then encode is the identity; 0.5 decodes to 0.2140
    # (from memory, checked here against colorspacious sRGB1 -> sRGB1-linear)
    assert np.allclose(mod.linear_to_srgb(mod.srgb_to_linear(COLOURS)), COLOURS)
    assert mod.srgb_to_linear(0.5) == pytest.approx(cspace_convert([0.5, 0.5, 0.5], "sRGB1",
                                                                   "sRGB1-linear")[0])


def test_okabe_ito_colours(mod, monkeypatch):
    # Okabe & Ito (2008) palette, hex codes from memory: orange E69F00, sky blue 56B4E9,
    # bluish green 009E73, yellow F0E442, blue 0072B2, vermillion D55E00, reddish purple CC79A7
    monkeypatch.chdir(RECIPES / SLUG)
    palettes, = mod.load()
    row = palettes.set_index("palette").loc["Okabe-Ito"]
    assert row["colours"].split()[:7] == ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2",
                                          "#D55E00", "#CC79A7"]


def test_figure_draws(mod, monkeypatch):
    monkeypatch.chdir(RECIPES / SLUG)
    palettes, = mod.load()
    fig = mod.draw(palettes)
    swatches = sum(len(mod.palette_colours(r)) for _, r in palettes.iterrows()) * len(mod.VIEWS)
    assert len(fig.axes[0].collections[0].get_paths()) == swatches
    plt.close(fig)
