"""Fingerprints of one output image: exact digest, perceptual digest, thumbnails, difference.

Why two digests (PRODUCT.md §5): the *exact* digest proves a figure reproduced to the pixel;
the *perceptual* digest tells a harmless rendering drift (anti-aliasing, font hinting) from a
figure that now says something else. The exact digest hashes decoded pixels, never file bytes,
so PNG compression level or metadata chunks do not matter. The perceptual digest is a 256-bit
DCT hash computed exactly as the widely used ``imagehash.phash(img, hash_size=16)`` does, so
digests recorded by figfolio can be checked with that library; figfolio does not import it.

Performance: a build fingerprints every PNG of every recipe, so ``analyse_png`` decodes each
file once and derives both digests and the thumbnails from the same pixels; with
``keep_decoded=True`` it also lends the decoded image to the audit's previews (``recall``), which
would otherwise decode the file again. Thumbnails are WebP with the fastest lossless effort:
the slowest setting made files a quarter smaller but cost 20-30x the time (about 0.1-0.2 s
per figure, measured on the benchmark catalogue), more than running a small recipe.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path

from figfolio.atomic import write_with
from figfolio.errors import RecipeError
from figfolio.lazy import lazy

np = lazy("numpy")
scipy_fft = lazy("scipy.fft")
Image = lazy("PIL.Image")
ImageDraw = lazy("PIL.ImageDraw")
ImageFont = lazy("PIL.ImageFont")
features = lazy("PIL.features")

HASH_SIZE = 16                 # 16 x 16 = 256 bits
HIGHFREQ_FACTOR = 4            # the image is reduced to 64 x 64 before the DCT
PERCEPTUAL_BITS = HASH_SIZE * HASH_SIZE
DEFAULT_MAX_PIXELS = 60_000_000
THUMB_SIZES = (320, 640)
CHANGED = (204, 0, 68)         # strong crimson for changed pixels in the difference image
FADED = 0.25                   # unchanged pixels keep a quarter of their contrast
PAD = (236, 236, 236)          # where one of two images of different sizes has no pixels


@dataclass(frozen=True)
class ImageFacts:
    """What figfolio records about one PNG output."""

    exact: str
    perceptual: str
    width: int
    height: int
    thumbs: dict[int, Path] = field(default_factory=dict)


def decode(path: Path, max_pixels: int = DEFAULT_MAX_PIXELS) -> Image.Image:
    """Open and fully decode an image, refusing junk and decompression bombs.

    The size is checked from the header *before* the pixels are decoded, so a hostile or
    broken recipe cannot make figfolio allocate gigabytes.
    """
    path = Path(path)
    try:
        img = Image.open(path)
        width, height = img.size
        if width * height > max_pixels:
            raise RecipeError(
                f"image is {width} x {height} pixels, more than the limit of {max_pixels:,}",
                path=path, key="max_pixels",
                hint="make the figure smaller or its dpi lower, or raise max_pixels in the "
                     "catalogue settings")
        img.load()
    except RecipeError:
        raise
    except Image.DecompressionBombError as exc:     # Pillow's own, larger, safety limit
        raise RecipeError(f"image is too large to decode safely ({exc})", path=path,
                          key="max_pixels", hint="make the figure smaller or its dpi lower"
                          ) from None
    except (Image.UnidentifiedImageError, OSError, SyntaxError, ValueError) as exc:
        raise RecipeError(f"not a readable image ({exc})", path=path,
                          hint="check that the recipe writes a complete PNG file; delete the "
                               "file and rebuild") from None
    return img


def exact_digest(img: Image.Image) -> str:
    """sha256 over 'RGBA|width|height|' and the decoded RGBA pixels.

    Pixels are converted to RGBA first so that a palette PNG and an RGB PNG showing the same
    pixels get the same digest; the size is included so a reshaped buffer cannot collide.
    """
    rgba = img if img.mode == "RGBA" else img.convert("RGBA")
    width, height = rgba.size
    digest = hashlib.sha256(f"RGBA|{width}|{height}|".encode("ascii"))
    digest.update(rgba.tobytes())
    return "sha256:" + digest.hexdigest()


def perceptual_digest(img: Image.Image) -> str:
    """256-bit DCT perceptual hash as 64 hex digits (imagehash.phash, hash_size=16).

    Steps: grayscale, resize to 64 x 64 with Lanczos, unnormalised 2-D DCT-II, keep the
    lowest 16 x 16 frequencies, one bit per coefficient: above the block's median or not.
    Bits are read row by row, most significant first, as imagehash prints them.
    """
    side = HASH_SIZE * HIGHFREQ_FACTOR
    gray = img.convert("L").resize((side, side), Image.Resampling.LANCZOS)
    pixels = np.asarray(gray, dtype=np.float64)
    coeffs = scipy_fft.dct(scipy_fft.dct(pixels, type=2, axis=0), type=2, axis=1)
    low = coeffs[:HASH_SIZE, :HASH_SIZE]
    bits = low > np.median(low)
    return np.packbits(bits.flatten()).tobytes().hex()


def hamming(a: str, b: str) -> int:
    """Number of bits that differ between two hex digests of the same length."""
    if len(a) != len(b):
        raise ValueError(f"digests of different length ({len(a)} and {len(b)} hex digits)")
    return (int(a, 16) ^ int(b, 16)).bit_count()


def vector_digest(path: Path) -> str:
    """sha256 of an SVG or PDF file's bytes; the runner makes those bytes deterministic."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return "sha256:" + digest.hexdigest()


def thumb_suffix() -> str:
    """WebP (lossless, smaller) when this Pillow can write it, otherwise PNG."""
    return "webp" if features.check("webp") else "png"


# Lossless WebP at the fastest effort (method 0; quality is the effort for lossless): 3-7 ms
# for a 640 px thumbnail against 60-190 ms at method 4, for files about 25% larger.
WEBP_OPTIONS = {"lossless": True, "method": 0, "quality": 50}


def _save(img: Image.Image, path: Path) -> None:
    fmt = "WEBP" if path.suffix == ".webp" else "PNG"
    options = WEBP_OPTIONS if fmt == "WEBP" else {"optimize": False, "compress_level": 3}
    write_with(path, lambda tmp: img.save(tmp, format=fmt, **options))


def _opaque(rgba: Image.Image) -> Image.Image:
    """RGB when every pixel is opaque (smaller, faster to encode), else the RGBA image."""
    alpha = rgba.getextrema()[3]
    return rgba.convert("RGB") if alpha == (255, 255) else rgba


def make_thumbs(rgba: Image.Image, stem: str, thumbs_dir: Path,
                sizes: tuple[int, ...] = THUMB_SIZES) -> dict[int, Path]:
    """Write one thumbnail per width, aspect kept, never enlarged beyond the original.

    Widths are made largest first and each smaller one from the previous result when that is
    at least twice as wide: Lanczos from a 2x image looks the same and costs a quarter.
    """
    thumbs: dict[int, Path] = {}
    suffix = thumb_suffix()
    full = source = _opaque(rgba)
    for size in sorted(sizes, reverse=True):
        if source.width < 2 * size:
            source = full
        if source.width > size:
            new_h = max(1, round(full.height * size / full.width))
            small = source.resize((size, new_h), Image.Resampling.LANCZOS, reducing_gap=3.0)
        else:
            small = source
        out = thumbs_dir / f"{stem}-{size}.{suffix}"
        _save(small, out)
        thumbs[size] = out
        source = small if small.width >= size else source
    return {size: thumbs[size] for size in sizes}


# Decoded images lent to the audit's previews (same process, same file, unchanged on disk).
_DECODED: dict[str, tuple[tuple[int, int], Image.Image]] = {}


def _stat_key(path: Path) -> tuple[int, int]:
    st = path.stat()
    return st.st_size, st.st_mtime_ns


def remember_decoded(path: Path, rgba: Image.Image) -> None:
    """Keep ``rgba`` for ``recall(path)`` until ``forget_decoded()``."""
    _DECODED[str(Path(path).resolve())] = (_stat_key(Path(path)), rgba)


def recall(path: Path) -> Image.Image | None:
    """The decoded RGBA image of ``path`` if this process decoded it and the file is unchanged."""
    found = _DECODED.get(str(Path(path).resolve()))
    if found is None:
        return None
    try:
        return found[1] if found[0] == _stat_key(Path(path)) else None
    except OSError:
        return None


def forget_decoded() -> None:
    """Release every lent image (call when the recipe's post step is over)."""
    _DECODED.clear()


def analyse_png(path: Path, thumbs_dir: Path | None, sizes: tuple[int, ...] = THUMB_SIZES,
                max_pixels: int = DEFAULT_MAX_PIXELS, keep_decoded: bool = False
                ) -> ImageFacts:
    """Decode ``path`` once; return its digests, size and thumbnails (when asked for).

    ``keep_decoded``: also lend the decoded image to ``recall`` (the audit's previews).
    """
    path = Path(path)
    img = decode(path, max_pixels)
    rgba = img if img.mode == "RGBA" else img.convert("RGBA")
    thumbs = make_thumbs(rgba, path.stem, thumbs_dir, sizes) if thumbs_dir is not None else {}
    if keep_decoded:
        remember_decoded(path, rgba)
    return ImageFacts(exact=exact_digest(rgba), perceptual=perceptual_digest(img),
                      width=img.width, height=img.height, thumbs=thumbs)


# --- difference image -----------------------------------------------------------------------

def _padded(rgba: Image.Image, width: int, height: int) -> np.ndarray:
    """RGBA pixels as int16 on a (height, width) canvas; -1 marks 'no pixel here'."""
    out = np.full((height, width, 4), -1, dtype=np.int16)
    out[:rgba.height, :rgba.width] = np.asarray(rgba, dtype=np.int16)
    return out


def _on_white(rgba: Image.Image, width: int, height: int) -> Image.Image:
    """The image as people see it (transparent areas over white), padded to the canvas."""
    flat = Image.alpha_composite(Image.new("RGBA", rgba.size, (255, 255, 255, 255)), rgba)
    canvas = Image.new("RGB", (width, height), PAD)
    canvas.paste(flat.convert("RGB"), (0, 0))
    return canvas


def _highlight(new_rgb: Image.Image, mask: np.ndarray | None) -> Image.Image:
    """Unchanged pixels faded to light gray, changed ones in a strong colour."""
    gray = np.asarray(new_rgb.convert("L"), dtype=np.float64)
    faded = (255 - (255 - gray) * FADED).astype(np.uint8)
    out = np.repeat(faded[:, :, None], 3, axis=2)
    if mask is not None:
        out[mask] = CHANGED
    return Image.fromarray(out, "RGB")


def _font(size: int) -> ImageFont.ImageFont | ImageFont.FreeTypeFont:
    try:
        return ImageFont.load_default(size=size)
    except (TypeError, OSError):       # Pillow without FreeType: fixed bitmap font
        return ImageFont.load_default()


def _message_panel(width: int, height: int, lines: list[str]) -> Image.Image:
    panel = Image.new("RGB", (width, height), PAD)
    draw = ImageDraw.Draw(panel)
    font = _font(max(12, min(22, width // 30)))
    y = height // 2 - 14 * len(lines)
    for line in lines:
        left, top, right, bottom = (int(v) for v in draw.textbbox((0, 0), line, font=font))
        draw.text(((width - (right - left)) // 2, y), line, fill=(60, 60, 60), font=font)
        y += (bottom - top) + 10
    return panel


def _compose(panels: list[Image.Image], labels: list[str]) -> Image.Image:
    """Panels side by side, each under a one-line label."""
    size = max(16, min(40, max(p.width for p in panels) // 40))
    gap, head = 16, size + 14
    width = sum(p.width for p in panels) + gap * (len(panels) + 1)
    height = max(p.height for p in panels) + head + gap
    sheet = Image.new("RGB", (width, height), (255, 255, 255))
    draw = ImageDraw.Draw(sheet)
    font = _font(size)
    x = gap
    for panel, label in zip(panels, labels):
        draw.text((x, 6), label, fill=(20, 20, 20), font=font)
        sheet.paste(panel, (x, head))
        draw.rectangle((x - 1, head - 1, x + panel.width, head + panel.height),
                       outline=(180, 180, 180))
        x += panel.width + gap
    return sheet


def _changed_box(mask: np.ndarray) -> list[int] | None:
    """[x0, y0, x1, y1) around every changed pixel, or None when nothing changed."""
    if not mask.any():
        return None
    rows = np.flatnonzero(mask.any(axis=1))
    cols = np.flatnonzero(mask.any(axis=0))
    return [int(cols[0]), int(rows[0]), int(cols[-1]) + 1, int(rows[-1]) + 1]


def diff_image(approved: Path | None, new: Path, out: Path,
               max_pixels: int = DEFAULT_MAX_PIXELS) -> dict[str, object]:
    """Write approved | new | changed-pixels as one PNG; return the change statistics.

    Images of different sizes are compared on a common canvas (top-left aligned); pixels
    present in only one image count as changed. ``bbox`` is [x0, y0, x1, y1), or None.
    Without an approved image the first panel says so and the statistics are None.
    """
    new_img = decode(Path(new), max_pixels).convert("RGBA")
    old_img = None
    if approved is not None and Path(approved).is_file():
        old_img = decode(Path(approved), max_pixels).convert("RGBA")
    width = max(new_img.width, old_img.width if old_img else 0)
    height = max(new_img.height, old_img.height if old_img else 0)
    new_rgb = _on_white(new_img, width, height)
    stats: dict[str, object] = {"width": width, "height": height,
                                "new_size": [new_img.width, new_img.height]}
    if old_img is None:
        first = _message_panel(width, height, ["approved image not available",
                                               "(run figfolio approve to keep one)"])
        third = _highlight(new_rgb, None)
        stats.update(changed_pixels=None, changed_fraction=None, bbox=None, approved_size=None)
        label = "changed pixels: nothing to compare"
    else:
        mask = np.any(_padded(old_img, width, height) != _padded(new_img, width, height), axis=2)
        first = _on_white(old_img, width, height)
        third = _highlight(new_rgb, mask)
        count, bbox = int(mask.sum()), _changed_box(mask)
        stats.update(changed_pixels=count, changed_fraction=count / mask.size, bbox=bbox,
                     approved_size=[old_img.width, old_img.height])
        if bbox:
            x0, y0, x1, y1 = bbox
            ImageDraw.Draw(third).rectangle((max(0, x0 - 3), max(0, y0 - 3), x1 + 2, y1 + 2),
                                            outline=CHANGED, width=2)
        label = f"changed pixels: {count:,} ({100 * count / mask.size:.2f}%)"
    sheet = _compose([first, new_rgb, third], ["approved", "new", label])
    write_with(Path(out), lambda tmp: sheet.save(tmp, format="PNG"))
    return stats
