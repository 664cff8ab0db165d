"""Pixel-side audit helpers: simulated previews of a PNG, and a palette read from pixels.

Why a separate module: these read image files (Pillow) in the builder, while
``audit_facts`` runs inside the recipe's process and ``audit`` only judges numbers.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
from PIL import Image

from figfolio.colour import (CVD_KINDS, LUMA_709, as_rgb, chroma, ciede2000, cvd_matrix,
                             linear_to_srgb, rgb_to_hex, srgb_to_lab)
from figfolio.fingerprint import recall

IMAGE_KINDS = (*CVD_KINDS, "grayscale")
PREVIEW_WIDTH = 360  # pixels: enough to judge a figure on the recipe page, cheap to make
# sRGB code value (0..255) -> linear light, as a table: one lookup per pixel instead of a power.
_LINEAR_LUT = np.where(np.arange(256) / 255 <= 0.04045, np.arange(256) / 255 / 12.92,
                       ((np.arange(256) / 255 + 0.055) / 1.055) ** 2.4)

# linear light -> sRGB code value through a 65,536-step table: a step of 1.5e-5 in linear light
# is finer than one code value even next to black (code 1 is 3.0e-4), and a lookup is ~10x
# faster than the power function on a whole image.
_ENCODE_STEPS = 65536
_ENCODE_LUT = np.round(linear_to_srgb(np.linspace(0.0, 1.0, _ENCODE_STEPS)) * 255
                       ).astype(np.uint8)


def load_rgb(png_path: Path, width: int | None = None) -> np.ndarray:
    """The PNG as uint8 RGB composited over white paper, optionally shrunk to ``width``.

    Reuses the image the fingerprint step already decoded in this process (``fingerprint
    .recall``) rather than decoding the file a second time.
    """
    rgba = recall(Path(png_path))
    if rgba is None:
        with Image.open(png_path) as img:
            img.load()
            rgba = img.convert("RGBA")
    if width and rgba.width > width:
        height = max(1, round(rgba.height * width / rgba.width))
        rgba = rgba.resize((width, height), Image.Resampling.BOX)
    paper = Image.new("RGBA", rgba.size, (255, 255, 255, 255))
    return np.asarray(Image.alpha_composite(paper, rgba).convert("RGB"))


def transform_pixels(rgb8: np.ndarray, kind: str, severity: float = 1.0) -> np.ndarray:
    """Apply a CVD simulation or grayscale to uint8 RGB pixels, in linear light."""
    lin = _LINEAR_LUT[rgb8]
    if kind == "grayscale":
        y = lin @ LUMA_709
        lin = np.repeat(y[..., None], 3, axis=-1)
    elif kind in CVD_KINDS:
        lin = lin @ cvd_matrix(kind, severity).T
    else:
        raise ValueError(f"unknown image kind {kind!r}; expected one of {', '.join(IMAGE_KINDS)}")
    index = (np.clip(lin, 0.0, 1.0) * (_ENCODE_STEPS - 1) + 0.5).astype(np.int32)
    return _ENCODE_LUT[index]


def transform_each(rgb8: np.ndarray, kinds: tuple[str, ...] | list[str], severity: float = 1.0
                   ) -> dict[str, np.ndarray]:
    """``transform_pixels`` for several kinds at once, pixel for pixel the same result.

    Why: a chart has few distinct colours (a few thousand with anti-aliasing, in 90,000
    preview pixels), and the transform of a pixel depends only on its colour. The colours are
    found once, each kind transforms only them, and the pixels look their result up: the
    four transforms of a 360 px benchmark preview took 4.2 ms this way, 8.3 ms pixel by pixel.
    """
    flat = rgb8.reshape(-1, 3)
    codes = (flat[:, 0].astype(np.int32) << 16) | (flat[:, 1].astype(np.int32) << 8) | flat[:, 2]
    distinct, where = np.unique(codes, return_inverse=True)
    colours = np.stack([(distinct >> 16) & 255, (distinct >> 8) & 255, distinct & 255],
                       axis=-1).astype(np.uint8)[None]
    return {kind: transform_pixels(colours, kind, severity)[0][where.reshape(-1)]
            .reshape(rgb8.shape) for kind in kinds}


def write_png_atomic(pixels: np.ndarray, out_path: Path) -> Path:
    """Write to a temporary file beside the target, then rename: readers never see half a file."""
    out_path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".png", dir=out_path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            Image.fromarray(pixels).save(handle, format="PNG", compress_level=3)
        os.replace(tmp, out_path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return out_path


def simulate_image(png_path: Path, kind: str, out_path: Path, width: int = PREVIEW_WIDTH,
                   severity: float = 1.0) -> Path:
    """Write a small PNG of the figure as seen with ``kind`` (protan/deutan/tritan/grayscale).

    The image is shrunk first (box filter), then transformed: the preview is for people to
    look at on the recipe page, so a few hundred pixels are enough and cost milliseconds.
    """
    return write_png_atomic(transform_pixels(load_rgb(Path(png_path), width), kind, severity),
                            Path(out_path))


def pixel_palette(rgb8: np.ndarray, limit: int = 8, min_chroma: float = 10.0,
                  merge_delta_e: float = 5.0) -> tuple[list[tuple[str, int]], float]:
    """The ``limit`` most frequent non-gray colours of an image, and the share they explain.

    A fallback when the figure's objects are not available (command recipes, notebook display
    outputs). Pixels are binned at 5 bits per channel; each bin is represented by its mean.
    Grays (C*ab < ``min_chroma``: paper, text, axes) are dropped. A colour within
    ``merge_delta_e`` of a more frequent one, or lying on the line from it to white paper (an
    anti-aliased edge), belongs to that one. The share is the fraction of coloured pixels the
    chosen colours and their edges account for: low means a continuous colour map, where pairs
    of "most frequent colours" mean nothing.
    """
    flat = rgb8.reshape(-1, 3).astype(np.int64)
    codes = ((flat[:, 0] >> 3) << 10) | ((flat[:, 1] >> 3) << 5) | (flat[:, 2] >> 3)
    counts = np.bincount(codes, minlength=32768)
    used = np.flatnonzero(counts)
    sums = np.stack([np.bincount(codes, weights=flat[:, c], minlength=32768)[used]
                     for c in range(3)], axis=-1)
    means = as_rgb(sums / counts[used][:, None] / 255.0)
    keep = chroma(means) >= min_chroma
    means, weights = means[keep], counts[used][keep]
    total = int(weights.sum())
    if total == 0:
        return [], 1.0
    order = np.argsort(-weights, kind="stable")[:400]
    means, weights = means[order], weights[order]
    labs = srgb_to_lab(means)
    owner = np.full(len(means), -1)
    chosen: list[int] = []
    floor = max(20, flat.shape[0] // 2000)
    for k in range(len(means)):
        if chosen:
            near = ciede2000(labs[k][None], labs[chosen]) < merge_delta_e
            blend = np.array([_is_paper_blend(means[k], means[c]) for c in chosen])
            hit = np.flatnonzero(near | blend)
            if hit.size:
                owner[k] = chosen[hit[0]]
                continue
        if len(chosen) < limit and weights[k] >= floor:
            chosen.append(k)
            owner[k] = k
    share = float(weights[owner >= 0].sum()) / total
    return [(rgb_to_hex(means[k]), int(weights[owner == k].sum())) for k in chosen], share


def _is_paper_blend(colour: np.ndarray, base: np.ndarray, tol: float = 0.04) -> bool:
    """True when ``colour`` = a * base + (1 - a) * white for some 0 < a < 1 (within ``tol``)."""
    gap, target = 1.0 - base, 1.0 - colour
    denom = float(gap @ gap)
    if denom < 1e-6:
        return False
    alpha = float(gap @ target) / denom
    return 0.0 < alpha < 1.0 and float(np.max(np.abs(alpha * gap - target))) < tol
