"""The figure audit (PRODUCT.md §7): colour vision, grayscale, print size, completeness.

``collect_facts(fig)`` (from ``figfolio.audit_facts``) runs in the recipe's process while the
figure is open; ``audit_recipe`` runs in the builder on those facts and the output files, and
returns findings, simulated preview images and notes.

Finding codes (stable; a catalogue lists the ones that should fail a build in
``[audit] errors = [...]``; each finding is an "error" if its code is listed, else a "warning"):

==================== =====================================================================
``cvd-protan``        two data colours that differ in normal vision (ΔE00 >= min_delta_e)
``cvd-deutan``        fall below min_delta_e under simulated protan / deutan / tritan
``cvd-tritan``        vision (Machado, Oliveira & Fernandes 2009, severity cvd_severity), or
                      keep only a lightness difference: their hue-and-chroma ΔE00 (L* set
                      equal) drops from >= min_delta_e to below it
``grayscale``         two data colours that differ in normal vision have lightness L* closer
                      than min_delta_e once printed in gray (gray = relative luminance, WCAG 2.1)
``colormap-lightness`` a continuous colour map whose lightness goes up and down (jet, rainbow)
``text-size``         smallest text below min_text_pt at the recipe's print width (width_mm)
``resolution``        PNG below min_ppi at the print width (only when there is no SVG or PDF
                      of the figure: print uses the vector output when it exists)
``no-vector``         a figure has no SVG or PDF output
``alt-text``          alt text is a placeholder, shorter than 20 characters, or the title
``axes-labels``       a data axes shows tick labels but has no axis label (own, shared, or
                      the figure's supxlabel/supylabel)
==================== =====================================================================

Why these defaults (settings.AuditSettings):

- ``min_delta_e = 10`` (CIEDE2000). ΔE00 of about 1 is the just-noticeable difference for large
  patches seen side by side (CIE 142-2001 / common practice). Data marks are small, thin and
  apart, and the difference needed to tell them apart grows steeply as marks shrink: Szafir
  (2018), "Modeling Color Difference for Visualization Design", IEEE TVCG 24(1), measured that
  points and lines need several times the large-patch difference (from memory). 10 is a round,
  conservative value for lines and markers (common practice for categorical palettes).
- Grayscale uses the same number as a difference of L* (for grays ΔE*ab equals ΔL*), so one
  setting governs "can these two be told apart".
- ``min_text_pt = 6`` and ``min_ppi = 300``: the usual floor in journal artwork instructions
  for printed text and for raster halftone figures (common practice).
- ``colormap-lightness``: a continuous map should change lightness monotonically (or, for a
  diverging map, fall away monotonically from one pale/dark neutral middle); maps that go up
  and down in lightness create false boundaries and fail in grayscale (common practice).
"""
from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np

from figfolio.audit_facts import collect_facts
from figfolio.audit_pixels import (IMAGE_KINDS, PREVIEW_WIDTH, load_rgb, pixel_palette,
                                   simulate_image, transform_each, write_png_atomic)
from figfolio.colour import (CVD_KINDS, chroma, ciede2000, gray_lightness, hex_to_rgb,
                             simulate_cvd, srgb_to_lab)
from figfolio.errors import SettingsError
from figfolio.recipe import PLACEHOLDER_ALT

__all__ = ["CODES", "audit_recipe", "audit_figure", "collect_facts", "simulate_image",
           "check_error_codes", "colour_findings", "colormap_shape"]

CODES = ("cvd-protan", "cvd-deutan", "cvd-tritan", "grayscale", "colormap-lightness",
         "text-size", "resolution", "no-vector", "alt-text", "axes-labels")
MAX_COLOURS = 24      # data colours compared per figure (most used first)
MIN_ALT_CHARS = 20
MIN_PIXEL_SHARE = 0.8  # pixel fallback: below this the colours form a continuum, not groups
SHOWN_PAIRS = 3       # pairs named in one message
MIN_HUE_CHROMA = 20.0  # C*ab: both colours of a pair must be clearly coloured for the hue rule
TURN_TOLERANCE = 3.0  # L* units a colour map may wiggle before it counts as a turn
_CVD_WORDS = {"protan": ("protanopia", "protanomaly"), "deutan": ("deuteranopia", "deuteranomaly"),
              "tritan": ("tritanopia", "tritanomaly")}


# ---------------------------------------------------------------- entry points

def audit_recipe(recipe: Any, settings: Any, result_outputs: list[dict[str, Any]],
                 facts: list[dict[str, Any]], out_dir: Path) -> dict[str, Any]:
    """Audit every figure a recipe produced; see the module docstring for the codes.

    ``result_outputs``: dicts with name, format, figure (int or None), path.
    ``facts``: per captured figure, in figure order (``facts[k]`` is figure k + 1, unless a
    dict carries its own ``"figure"`` number). Writes previews under ``out_dir``.
    """
    check_error_codes(settings)
    findings: list[dict[str, Any]] = []
    images: dict[str, dict[str, str]] = {}
    notes: list[str] = []
    by_figure = _facts_by_figure(facts)
    for key, group in _groups(result_outputs).items():
        figure: int | str = group[0]["figure"] if group[0].get("figure") is not None else key
        png = next((Path(o["path"]) for o in group if o.get("format") == "png"), None)
        has_vector = any(o.get("format") in ("svg", "pdf") for o in group)
        found, made, said = _audit_one(by_figure.get(figure) if isinstance(figure, int) else None,
                                       png, recipe, settings, Path(out_dir), figure, has_vector)
        found += _vector_findings(group, figure)
        findings += found
        notes += said
        if made:
            images[str(figure)] = {k: str(v) for k, v in made.items()}
    findings += _alt_findings(recipe)
    for item in findings:
        item["severity"] = "error" if item["code"] in settings.audit.errors else "warning"
    return {"findings": findings, "images": images, "notes": notes}


def audit_figure(facts: dict[str, Any] | None, png_path: Path | None, recipe: Any,
                 settings: Any, out_dir: Path, figure: int | str = 1
                 ) -> tuple[list[dict[str, Any]], dict[str, Path]]:
    """Findings and preview images for one figure (no vector or alt-text checks)."""
    findings, images, _notes = _audit_one(facts, png_path, recipe, settings, out_dir, figure)
    for item in findings:
        item["severity"] = "error" if item["code"] in settings.audit.errors else "warning"
    return findings, images


def check_error_codes(settings: Any) -> None:
    """Refuse unknown codes in ``[audit] errors``: a typo would silently never fail a build."""
    unknown = [c for c in settings.audit.errors if c not in CODES]
    if unknown:
        raise SettingsError(f"unknown audit finding code(s) {', '.join(map(repr, unknown))}",
                            path=getattr(settings, "source", None) or getattr(settings, "root"),
                            key="audit.errors", hint=f"use codes from: {', '.join(CODES)}")


# ---------------------------------------------------------------- one figure

def _audit_one(facts: dict[str, Any] | None, png: Path | None, recipe: Any, settings: Any,
               out_dir: Path, figure: int | str, has_vector: bool = False
               ) -> tuple[list[dict[str, Any]], dict[str, Path], list[str]]:
    audit = settings.audit
    findings: list[dict[str, Any]] = []
    notes: list[str] = []
    name = f"figure {figure}" if isinstance(figure, int) else f"output '{figure}'"
    pixels = small = None
    width_px = 0
    useful = bool(facts and (facts.get("colours") or facts.get("colormaps")
                             or facts.get("texts")))
    if png is not None:
        try:
            small = load_rgb(png, PREVIEW_WIDTH)  # decodes once; also proves the file is sound
            width_px = _png_width(png)
            if not useful:
                pixels = load_rgb(png)
        except Exception as exc:  # noqa: BLE001 -- a broken output is a note, not a crash
            notes.append(f"{name}: cannot read {png.name} ({type(exc).__name__}); "
                         "previews, pixel and resolution checks skipped")
            png = small = None
    if facts and facts.get("error"):
        notes.append(f"{name}: some facts could not be read ({facts['error']})")
    if useful and facts:
        colours = [(c["hex"], c.get("label", ""), tuple(c.get("cues", ())))
                   for c in facts.get("colours", [])]
        for cmap in facts.get("colormaps", []):
            findings += _colormap_findings(cmap, figure)
        findings += _text_findings(facts, recipe, audit, figure, notes)
        findings += _axes_findings(facts, figure)
    elif pixels is not None:
        palette, share = pixel_palette(pixels)
        colours = [(code, "") for code, _n in palette]
        if share < MIN_PIXEL_SHARE:
            colours = []
            notes.append(f"{name}: no figure facts, and the coloured pixels look like a "
                         f"continuous colour map ({len(palette)} most frequent colours explain "
                         f"{share:.0%}); colour-pair checks skipped; text size, colour maps and "
                         "axes labels not checked")
        else:
            notes.append(f"{name}: no figure facts; colour checks used the {len(colours)} most "
                         "frequent non-gray pixel colours; text size, colour maps and axes "
                         "labels not checked")
    else:
        colours = []
        notes.append(f"{name}: no figure facts and no PNG; colour and text checks skipped")
    findings += colour_findings(colours[:MAX_COLOURS], audit.min_delta_e, audit.cvd_severity,
                                figure)
    if not getattr(recipe, "width_mm", None):
        notes.append(f"{name}: no width_mm in recipe.toml; text size and resolution at print "
                     "width not checked")
    if png is not None and small is not None and not has_vector:
        # Print uses the SVG/PDF when there is one; the PNG then only serves screens.
        findings += _resolution_findings(width_px, png.name, recipe, audit, figure)
    images = _previews(small, out_dir, figure, audit.cvd_severity, notes) \
        if small is not None else {}
    return findings, images, notes


def _finding(code: str, figure: int | str | None, message: str) -> dict[str, Any]:
    return {"code": code, "severity": "warning", "figure": figure, "message": message}


def _previews(small: np.ndarray, out_dir: Path, figure: int | str, severity: float,
              notes: list[str]) -> dict[str, Path]:
    """The four simulated previews from one decoded, shrunk copy of the PNG."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "-", f"figure-{figure}" if isinstance(figure, int)
                  else str(figure))
    made: dict[str, Path] = {}
    seen = transform_each(small, IMAGE_KINDS, severity)
    for kind in IMAGE_KINDS:
        try:
            made[kind] = write_png_atomic(seen[kind], out_dir / f"{stem}.{kind}.png")
        except OSError as exc:
            notes.append(f"figure {figure}: could not write the {kind} preview ({exc})")
    return made


def _png_width(png: Path) -> int:
    from PIL import Image
    with Image.open(png) as img:
        return int(img.width)


# ---------------------------------------------------------------- colour

def _name(code: str, label: str, *_cues: Any) -> str:
    return f"{code} ({label})" if label else code


def _shape_separated(colours: list[tuple[Any, ...]]) -> Any:
    """Pairs of colours whose artists never share a line style, marker or hatch.

    Such a pair is told apart by shape as well as colour (redundant encoding, common practice
    for colour-vision-safe figures), so losing the colour difference does not lose the groups.
    Colours without recorded cues (pixels, collections) are never counted as separated.
    """
    n = len(colours)
    cues = [set(c[2]) if len(c) > 2 and c[2] else set() for c in colours]
    out = np.zeros((n, n), dtype=bool)
    for i in range(n):
        for j in range(i + 1, n):
            if cues[i] and cues[j] and not cues[i] & cues[j]:
                out[i, j] = out[j, i] = True
    return out


def colour_findings(colours: list[tuple[Any, ...]], threshold: float, severity: float,
                    figure: int | str | None) -> list[dict[str, Any]]:
    """CVD and grayscale findings for data colours given as (hex, label) pairs.

    Under a simulated deficiency a pair that differs in normal vision (ΔE00 >= threshold)
    is reported when it becomes indistinguishable (ΔE00 < threshold), or when its hue and
    colourfulness difference (ΔE00 at equal lightness) falls below the threshold although it
    was above it in normal vision and both colours are clearly coloured (C*ab >= 20, common
    practice for "not a gray"): the hue the author relied on is gone and only lightness is
    left -- the very cue the grayscale check judges, and a weak one for matching a legend.
    """
    if len(colours) < 2:
        return []
    rgb = np.array([hex_to_rgb(c[0]) for c in colours])
    lab = srgb_to_lab(rgb)
    normal = _delta(lab)
    distinct = np.triu(normal >= threshold, k=1) & ~_shape_separated(colours)
    coloured = chroma(rgb) >= MIN_HUE_CHROMA
    hue_distinct = distinct & (_delta(lab, hue_only=True) >= threshold) \
        & coloured[:, None] & coloured[None, :]
    out: list[dict[str, Any]] = []
    for kind in CVD_KINDS:
        sim = srgb_to_lab(simulate_cvd(rgb, kind, severity))
        seen, seen_hue = _delta(sim), _delta(sim, hue_only=True)
        word = _CVD_WORDS[kind][0] if severity >= 1.0 else \
            f"{_CVD_WORDS[kind][1]} (severity {severity:g})"
        rows = [(seen[i, j], i, j, f"differ by ΔE00 {seen[i, j]:.1f} under {word}")
                for i, j in zip(*np.nonzero(distinct & (seen < threshold)))]
        rows += [(threshold + seen_hue[i, j], i, j,
                  f"differ only in lightness under {word} (hue and colourfulness ΔE00 "
                  f"{seen_hue[i, j]:.1f}, ΔL* {abs(sim[i, 0] - sim[j, 0]):.1f})")
                 for i, j in zip(*np.nonzero(hue_distinct & (seen >= threshold)
                                             & (seen_hue < threshold)))]
        out += _pair_finding(f"cvd-{kind}", rows, normal, colours, threshold, figure)
    gray = gray_lightness(rgb)
    dl = np.abs(gray[:, None] - gray[None])
    rows = [(dl[i, j], i, j, f"differ by ΔL* {dl[i, j]:.1f} in grayscale")
            for i, j in zip(*np.nonzero(distinct & (dl < threshold)))]
    out += _pair_finding("grayscale", rows, normal, colours, threshold, figure)
    return out


def _delta(lab: np.ndarray, hue_only: bool = False) -> np.ndarray:
    """Pairwise CIEDE2000; ``hue_only`` sets every L* equal so only hue and chroma count."""
    if hue_only:
        lab = lab.copy()
        lab[:, 0] = 50.0
    return ciede2000(lab[:, None], lab[None])


def _pair_finding(code: str, rows: list[tuple[float, int, int, str]], normal: np.ndarray,
                  colours: list[tuple[str, str]], threshold: float,
                  figure: int | str | None) -> list[dict[str, Any]]:
    """One finding per code and figure naming the worst pairs first."""
    if not rows:
        return []
    rows = sorted(rows, key=lambda r: (r[0], r[1], r[2]))
    parts = [f"{_name(*colours[i])} and {_name(*colours[j])} {text} (threshold {threshold:g}; "
             f"ΔE00 {normal[i, j]:.1f} in normal vision)" for _k, i, j, text in rows[:SHOWN_PAIRS]]
    more = f"; and {len(rows) - SHOWN_PAIRS} more pair(s)" if len(rows) > SHOWN_PAIRS else ""
    return [_finding(code, figure, "; ".join(parts) + more)]


def colormap_shape(profile: list[str]) -> tuple[str, list[float]]:
    """'monotone', 'diverging' or 'non-monotone', with the L* profile of a colour map.

    Turns are counted with hysteresis (a reversal must exceed TURN_TOLERANCE L* units). A
    diverging map has one turn near the middle at a near-neutral colour (C*ab < 25).
    """
    rgb = np.array([hex_to_rgb(h) for h in profile])
    light = srgb_to_lab(rgb)[:, 0]
    turns = _turns(light, TURN_TOLERANCE)
    if not turns:
        return "monotone", light.tolist()
    n = len(light) - 1
    if len(turns) == 1 and 0.3 <= turns[0] / n <= 0.7 and chroma(rgb[turns[0]]) < 25:
        return "diverging", light.tolist()
    return "non-monotone", light.tolist()


def _turns(values: np.ndarray, tol: float) -> list[int]:
    """Indices where the series reverses direction by more than ``tol`` (zig-zag filter)."""
    turns: list[int] = []
    lo_i = hi_i = 0
    direction = 0
    for i, v in enumerate(values):
        if direction == 0:
            lo_i = i if v < values[lo_i] else lo_i
            hi_i = i if v > values[hi_i] else hi_i
            if values[hi_i] - values[lo_i] > tol:
                direction = 1 if hi_i > lo_i else -1
                ext = hi_i if direction == 1 else lo_i
        elif direction == 1:
            if v > values[ext]:
                ext = i
            elif values[ext] - v > tol:
                turns.append(ext)
                direction, ext = -1, i
        else:
            if v < values[ext]:
                ext = i
            elif v - values[ext] > tol:
                turns.append(ext)
                direction, ext = 1, i
    return turns


def _colormap_findings(cmap: dict[str, Any], figure: int | str) -> list[dict[str, Any]]:
    if cmap.get("qualitative") or len(cmap.get("profile", [])) < 3:
        return []
    shape, light = colormap_shape(cmap["profile"])
    if shape != "non-monotone":
        return []
    marks = ", ".join(f"{light[k]:.0f}" for k in np.linspace(0, len(light) - 1, 5).astype(int))
    return [_finding("colormap-lightness", figure,
                     f"rainbow/jet-like colour map: lightness not monotone ('{cmap['name']}': "
                     f"L* {marks} from start to end); use a map whose lightness rises steadily")]


# ---------------------------------------------------------------- print size and completeness

def _text_findings(facts: dict[str, Any], recipe: Any, audit: Any, figure: int | str,
                   notes: list[str]) -> list[dict[str, Any]]:
    texts = facts.get("texts") or []
    width_in = (facts.get("canvas") or {}).get("width_in")
    if not texts or not width_in:
        return []
    if not getattr(recipe, "width_mm", None):
        return []
    scale = recipe.width_mm / 25.4 / width_in
    small = min(texts, key=lambda t: t["size_pt"])
    printed = small["size_pt"] * scale
    if printed >= audit.min_text_pt:
        return []
    under = sum(t.get("count", 1) for t in texts if t["size_pt"] * scale < audit.min_text_pt)
    return [_finding("text-size", figure,
                     f"smallest text is {printed:.1f} pt at {recipe.width_mm:g} mm print width "
                     f"(minimum {audit.min_text_pt:g} pt): {small['role']} '{small['text']}' set "
                     f"at {small['size_pt']:g} pt in a {width_in:g} in wide figure; {under} text "
                     "element(s) below the minimum")]


def _resolution_findings(width_px: int, png_name: str, recipe: Any, audit: Any,
                         figure: int | str) -> list[dict[str, Any]]:
    if not getattr(recipe, "width_mm", None):
        return []
    ppi = width_px / (recipe.width_mm / 25.4)
    if ppi >= audit.min_ppi:
        return []
    need = int(np.ceil(audit.min_ppi * recipe.width_mm / 25.4))
    return [_finding("resolution", figure,
                     f"{png_name} is {width_px} px wide: {ppi:.0f} ppi at {recipe.width_mm:g} mm "
                     f"(minimum {audit.min_ppi:g}); it needs at least {need} px, e.g. a higher "
                     "dpi setting, or use the SVG/PDF output for print")]


def _axes_findings(facts: dict[str, Any], figure: int | str) -> list[dict[str, Any]]:
    missing = []
    for ax in facts.get("axes", []):
        lacks = [n for n in ("x", "y") if ax.get(f"missing_{n}label")]
        if lacks:
            title = f" ('{ax['title']}')" if ax.get("title") else ""
            missing.append(f"axes {ax['index']}{title} has no {' or '.join(lacks)} label")
    return [_finding("axes-labels", figure, "; ".join(missing))] if missing else []


def _vector_findings(group: list[dict[str, Any]], figure: int | str) -> list[dict[str, Any]]:
    formats = {o.get("format") for o in group}
    if formats & {"svg", "pdf"}:
        return []
    return [_finding("no-vector", figure,
                     f"only {', '.join(sorted(f for f in formats if f))} output; add 'svg' or "
                     "'pdf' to formats so print and slides get sharp lines and text")]


def _alt_findings(recipe: Any) -> list[dict[str, Any]]:
    alt = (getattr(recipe, "alt", "") or "").strip()
    plain = re.sub(r"[\W_]+", " ", alt).strip().lower()
    title = re.sub(r"[\W_]+", " ", getattr(recipe, "title", "") or "").strip().lower()
    if plain in PLACEHOLDER_ALT:
        why = f"is a placeholder ('{alt}')"
    elif plain == title:
        why = "repeats the title"
    elif len(alt) < MIN_ALT_CHARS:
        why = f"has only {len(alt)} characters (fewer than {MIN_ALT_CHARS})"
    else:
        return []
    return [_finding("alt-text", None, f"alt text {why}; describe what the figure shows for a "
                                       "reader who cannot see it, in recipe.toml 'alt'")]


# ---------------------------------------------------------------- plumbing

def _facts_by_figure(facts: list[dict[str, Any]]) -> dict[int, dict[str, Any]]:
    out: dict[int, dict[str, Any]] = {}
    for k, item in enumerate(facts or [], start=1):
        if isinstance(item, dict):
            number = item.get("figure")
            out[number if isinstance(number, int) else k] = item
    return out


def _groups(outputs: list[dict[str, Any]]) -> dict[str, list[dict[str, Any]]]:
    """Outputs of one figure together: by figure number, or by file stem for written files."""
    groups: dict[str, list[dict[str, Any]]] = {}
    for out in outputs:
        fig = out.get("figure")
        key = str(fig) if fig is not None else Path(str(out.get("name", ""))).stem
        groups.setdefault(key, []).append(out)
    return groups
