"""Colour science of the audit, checked against published data and independent libraries."""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from colorspacious import cspace_convert
from skimage.color import deltaE_ciede2000, rgb2lab

from figfolio import colour

REFERENCE = Path(__file__).parent / "reference" / "ciede2000_sharma2005.csv"
CS_NAMES = {"protan": "protanomaly", "deutan": "deuteranomaly", "tritan": "tritanomaly"}


def srgb_grid(n: int = 8) -> np.ndarray:
    g = np.linspace(0, 1, n)
    return np.stack(np.meshgrid(g, g, g, indexing="ij"), axis=-1).reshape(-1, 3)


@pytest.mark.parametrize("kind", colour.CVD_KINDS)
@pytest.mark.parametrize("severity", [1.0, 0.0, 0.35, 0.5, 0.72, 0.9])
def test_cvd_matches_colorspacious(kind: str, severity: float) -> None:
    # Source: colorspacious (PyPI) implements Machado, Oliveira & Fernandes (2009) with the same
    # interpolation between tabulated severities; it does not clip, so we compare unclipped
    # results where colorspacious stays in gamut.
    rgb = srgb_grid(8)
    ref = cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": CS_NAMES[kind],
                               "severity": severity * 100}, "sRGB1")
    ours = colour.simulate_cvd(rgb, kind, severity, clip=False)
    inside = np.all((ref >= 0) & (ref <= 1), axis=1)
    assert inside.sum() > 200
    assert np.max(np.abs(ours[inside] - ref[inside])) < 0.01


def test_cvd_matrices_keep_white_and_start_at_identity() -> None:
    # Machado et al. (2009): every matrix maps white to white (rows sum to 1) -- from memory,
    # a property of their normalisation; severity 0 is normal vision.
    for kind in colour.CVD_KINDS:
        assert np.allclose(colour.cvd_matrix(kind, 0.0), np.eye(3))
        for s in np.linspace(0, 1, 11):
            assert np.allclose(colour.cvd_matrix(kind, float(s)).sum(axis=1), 1.0, atol=2e-3)
    with pytest.raises(ValueError):
        colour.cvd_matrix("protan", 1.5)


def read_sharma() -> list[dict[str, float]]:
    lines = [ln for ln in REFERENCE.read_text().splitlines() if not ln.startswith("#")]
    return [{k: float(v) for k, v in row.items()} for row in csv.DictReader(lines)]


def test_ciede2000_matches_sharma_2005_table() -> None:
    # Source: Sharma, Wu & Dalal (2005), Color Res. Appl. 30(1), Table 1: 34 pairs, 4 decimals.
    rows = read_sharma()
    assert len(rows) == 34
    lab1 = np.array([[r["L1"], r["a1"], r["b1"]] for r in rows])
    lab2 = np.array([[r["L2"], r["a2"], r["b2"]] for r in rows])
    expected = np.array([r["dE00"] for r in rows])
    got = colour.ciede2000(lab1, lab2)
    assert np.array_equal(np.round(got, 4), expected)
    # symmetric, as the formula is (Sharma et al. 2005, pairs 7 and 8 show it too)
    assert np.allclose(colour.ciede2000(lab2, lab1), got, atol=1e-12)


def test_ciede2000_matches_skimage_on_random_pairs() -> None:
    # Source: skimage.color.deltaE_ciede2000, an independent implementation of the same formula.
    rng = np.random.default_rng(7)
    lab1 = np.column_stack([rng.uniform(0, 100, 2000), rng.uniform(-100, 100, (2000, 2))])
    lab2 = np.column_stack([rng.uniform(0, 100, 2000), rng.uniform(-100, 100, (2000, 2))])
    assert np.allclose(colour.ciede2000(lab1, lab2), deltaE_ciede2000(lab1, lab2), atol=1e-8)


def test_srgb_to_lab_matches_references() -> None:
    # Sources: colorspacious "sRGB1" -> "CIELab" (D65) and skimage.color.rgb2lab (D65, 2°).
    # colorspacious uses the 4-decimal matrix of the standard (white gets a* = 0.007), skimage
    # a more precise one; hence the two tolerances.
    rgb = srgb_grid(8)
    ours = colour.srgb_to_lab(rgb)
    assert np.max(np.abs(ours - cspace_convert(rgb, "sRGB1", "CIELab"))) < 0.03
    assert np.max(np.abs(ours - rgb2lab(rgb))) < 0.01
    # CIE 15:2004: white has L* = 100, a* = b* = 0; black L* = 0 (from memory: definition).
    assert np.allclose(colour.srgb_to_lab([1, 1, 1]), [100, 0, 0], atol=0.01)


def test_wcag_luminance_and_contrast() -> None:
    # Source: WCAG 2.1, definitions "relative luminance" and "contrast ratio".
    assert colour.contrast_ratio([1, 1, 1], [0, 0, 0]) == pytest.approx(21.0)
    assert colour.contrast_ratio([0.5, 0.5, 0.5], [0.5, 0.5, 0.5]) == pytest.approx(1.0)
    white = colour.hex_to_rgb("#ffffff")
    # from memory: #767676 is the lightest gray with 4.5:1 on white (4.54); #777777 gives 4.48.
    assert colour.contrast_ratio(colour.hex_to_rgb("#767676"), white) == pytest.approx(4.54, abs=0.01)
    assert colour.contrast_ratio(colour.hex_to_rgb("#777777"), white) == pytest.approx(4.48, abs=0.01)
    # from memory: pure red on white is 4.0:1, pure blue on white 8.6:1.
    assert colour.contrast_ratio([1, 0, 0], white) == pytest.approx(4.0, abs=0.01)
    assert colour.contrast_ratio([0, 0, 1], white) == pytest.approx(8.59, abs=0.01)
    # Source: colorspacious sRGB1 -> XYZ1 gives the same Y (relative luminance).
    rgb = srgb_grid(6)
    assert np.allclose(colour.relative_luminance(rgb), cspace_convert(rgb, "sRGB1", "XYZ1")[:, 1],
                       atol=2e-4)


def test_grayscale_keeps_luminance_and_lightness() -> None:
    # Grayscale rendering must keep relative luminance (WCAG 2.1 definition), so its L* equals
    # the colour's L* (CIE 15:2004: L* depends on Y only); checked with skimage's rgb2lab.
    rgb = srgb_grid(5)
    gray = colour.to_grayscale(rgb)
    assert np.allclose(colour.relative_luminance(gray), colour.relative_luminance(rgb), atol=1e-9)
    assert np.allclose(colour.gray_lightness(rgb), rgb2lab(rgb)[:, 0], atol=0.05)


def test_hex_round_trip_and_errors() -> None:
    assert colour.rgb_to_hex(colour.hex_to_rgb("#d62728")) == "#d62728"
    assert colour.hex_to_rgb("#fff") == (1.0, 1.0, 1.0)
    with pytest.raises(ValueError):
        colour.hex_to_rgb("#12345")
