"""Theme colours meet WCAG 2.1 AA contrast in the light and the dark scheme.

Source: WCAG 2.1, definitions "relative luminance" and "contrast ratio", Success Criteria 1.4.3
(text: 4.5:1) and 1.4.11 (non-text, e.g. focus rings and chart bars: 3:1). The luminance is
cross-checked against colorspacious (sRGB -> CIE XYZ, Y) from PyPI.
"""
from __future__ import annotations

import re

import numpy as np
import pytest
from colorspacious import cspace_convert

from figfolio.site_render import default_theme

CSS = default_theme() / "static" / "style.css"

TEXT_PAIRS = [
    ("text", "bg"), ("text", "surface"), ("text", "code-bg"), ("muted", "bg"),
    ("muted", "surface"), ("muted", "code-bg"), ("link", "bg"), ("link", "surface"),
    ("link", "code-bg"), ("ok-fg", "ok-bg"), ("warn-fg", "warn-bg"), ("bad-fg", "bad-bg"),
    ("alarm-fg", "alarm-bg"), ("plain-fg", "plain-bg"), ("odd-fg", "odd-bg"),
    ("note-fg", "note-bg"), ("t-keyword", "code-bg"), ("t-string", "code-bg"),
    ("t-comment", "code-bg"), ("t-number", "code-bg"), ("t-name", "code-bg"),
    ("bad-fg", "code-bg"),
]
NON_TEXT_PAIRS = [("focus", "bg"), ("focus", "surface"), ("mark", "surface"), ("mark", "bg")]


def blocks() -> dict[str, dict[str, str]]:
    """Custom properties of the light :root block and of the dark-scheme :root block."""
    css = CSS.read_text(encoding="utf-8")
    dark_at = css.index("@media (prefers-color-scheme: dark)")
    light = re.search(r":root\s*\{(.*?)\}", css[:dark_at], re.S).group(1)
    dark = re.search(r":root\s*\{(.*?)\}", css[dark_at:], re.S).group(1)
    def props(body: str) -> dict[str, str]:
        return dict(re.findall(r"--fol-([\w-]+):\s*(#[0-9a-fA-F]{6})\s*;", body))
    return {"light": props(light), "dark": props(dark)}


def channel(c: float) -> float:
    # WCAG 2.1 relative luminance: sRGB component linearisation.
    return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4


def luminance(hex_colour: str) -> float:
    r, g, b = (int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5))
    return 0.2126 * channel(r) + 0.7152 * channel(g) + 0.0722 * channel(b)


def contrast(a: str, b: str) -> float:
    la, lb = sorted((luminance(a), luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_formula_matches_published_anchor_values():
    # WCAG 2.1: black on white is 21:1; identical colours 1:1.
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast("#777777", "#777777") == pytest.approx(1.0)
    # colorspacious' sRGB1 -> XYZ100 gives the same luminance (Y / 100).
    for colour in ("#0b5a87", "#fbefc4", "#80c6f2", "#14171a"):
        rgb = np.array([int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
        y = cspace_convert(rgb, "sRGB1", "XYZ100")[1] / 100
        assert luminance(colour) == pytest.approx(y, abs=2e-3)


@pytest.mark.parametrize("scheme", ["light", "dark"])
def test_text_pairs_meet_aa(scheme):
    colours = blocks()[scheme]
    assert len(colours) >= 25, "the scheme lost its custom properties"
    low = {f"{fg}/{bg}": round(contrast(colours[fg], colours[bg]), 2)
           for fg, bg in TEXT_PAIRS if contrast(colours[fg], colours[bg]) < 4.5}
    assert not low, f"{scheme}: below 4.5:1 -> {low}"


@pytest.mark.parametrize("scheme", ["light", "dark"])
def test_non_text_pairs_meet_aa(scheme):
    colours = blocks()[scheme]
    low = {f"{fg}/{bg}": round(contrast(colours[fg], colours[bg]), 2)
           for fg, bg in NON_TEXT_PAIRS if contrast(colours[fg], colours[bg]) < 3.0}
    assert not low, f"{scheme}: below 3:1 -> {low}"


def test_both_schemes_define_the_same_colours():
    b = blocks()
    assert set(b["light"]) == set(b["dark"])


def test_no_web_fonts_or_remote_urls_in_css():
    for path in (default_theme() / "static").glob("*.css"):
        css = path.read_text(encoding="utf-8")
        assert "@font-face" not in css and "@import" not in css
        assert not re.search(r"url\(\s*['\"]?(https?:)?//", css), path
