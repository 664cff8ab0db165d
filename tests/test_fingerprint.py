"""Tests of figfolio.fingerprint against references outside the project.

References used:
- imagehash (PyPI) ``phash(img, hash_size=16)`` and its Hamming distance (``ImageHash.__sub__``):
  the reference implementation of the DCT perceptual hash figfolio reproduces.
- Pillow's PNG decoder, and the PNG specification (W3C, PNG 2nd ed., §11.3 ancillary chunks
  such as tEXt carry no pixel data; §10 compression is lossless), for digest invariance.
- hashlib (Python standard library) for the sha256 definitions.
"""
from __future__ import annotations

import hashlib
import io
from pathlib import Path

import imagehash
import matplotlib
import numpy as np
import pytest
from PIL import Image, PngImagePlugin

from figfolio import fingerprint as fp
from figfolio.errors import RecipeError

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402


def _chart(kind: str, seed: int) -> Image.Image:
    """A small real matplotlib figure of one of several common chart types."""
    rng = np.random.default_rng(seed)
    fig, ax = plt.subplots(figsize=(3.2, 2.4), dpi=80)
    if kind == "line":
        ax.plot(rng.normal(size=60).cumsum())
    elif kind == "scatter":
        ax.scatter(rng.normal(size=200), rng.normal(size=200), s=6, alpha=0.6)
    elif kind == "bar":
        ax.bar(list("ABCDEF"), rng.integers(1, 20, size=6))
    elif kind == "hist":
        ax.hist(rng.gamma(2.0, size=500), bins=25)
    elif kind == "heat":
        ax.imshow(rng.random((12, 16)), cmap="viridis")
    else:  # forest-plot-like: points with intervals
        est = rng.normal(size=8)
        ax.errorbar(est, np.arange(8), xerr=rng.uniform(0.2, 0.8, 8), fmt="s")
        ax.axvline(0, color="k", lw=0.8)
    ax.set_title(f"{kind} {seed}")
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    buf.seek(0)
    img = Image.open(buf)
    img.load()
    return img


def _noise(seed: int) -> Image.Image:
    rng = np.random.default_rng(100 + seed)
    w, h = int(rng.integers(40, 300)), int(rng.integers(40, 300))
    mode = ["RGB", "L", "RGBA"][seed % 3]
    bands = {"RGB": 3, "L": 1, "RGBA": 4}[mode]
    arr = rng.integers(0, 256, size=(h, w, bands), dtype=np.uint8)
    return Image.fromarray(arr[:, :, 0] if bands == 1 else arr, mode)


@pytest.fixture(scope="module")
def images(tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    """14 real charts and 10 noise images written as PNG files."""
    folder = tmp_path_factory.mktemp("images")
    found = []
    kinds = ["line", "scatter", "bar", "hist", "heat", "forest"]
    for i in range(14):
        path = folder / f"chart-{i}.png"
        _chart(kinds[i % len(kinds)], i).save(path)
        found.append(path)
    for i in range(10):
        path = folder / f"noise-{i}.png"
        _noise(i).save(path)
        found.append(path)
    return found


def test_perceptual_digest_agrees_with_imagehash(images: list[Path]) -> None:
    # Reference: imagehash.phash(img, hash_size=16) (PyPI imagehash 4.3), printed as hex.
    distances = []
    for path in images:
        with Image.open(path) as img:
            ours = fp.perceptual_digest(img)
            theirs = str(imagehash.phash(img, hash_size=16))
        assert len(ours) == 64
        distances.append(fp.hamming(ours, theirs))
    assert len(distances) >= 20
    assert max(distances) <= 2, distances
    assert distances.count(0) >= len(distances) - 1, distances


def test_hamming_agrees_with_imagehash(images: list[Path]) -> None:
    # Reference: imagehash.ImageHash.__sub__ is the Hamming distance of two hashes.
    opened = [Image.open(p) for p in images[:6]]
    hashes = [imagehash.phash(img, hash_size=16) for img in opened]
    for a, b in zip(hashes, hashes[1:]):
        assert fp.hamming(str(a), str(b)) == a - b
    with pytest.raises(ValueError):
        fp.hamming("ff", "fff")


def test_exact_digest_definition() -> None:
    # Reference: hashlib.sha256 over 'RGBA|w|h|' + raw RGBA bytes (the documented definition).
    img = _noise(1).convert("RGB")
    raw = np.asarray(img.convert("RGBA")).tobytes()
    expected = hashlib.sha256(f"RGBA|{img.width}|{img.height}|".encode() + raw).hexdigest()
    assert fp.exact_digest(img) == "sha256:" + expected


def test_exact_digest_ignores_png_encoding(tmp_path: Path, images: list[Path]) -> None:
    # Reference: PNG spec (W3C PNG 2nd ed.): zlib compression is lossless and tEXt chunks are
    # ancillary, so Pillow must decode identical pixels from all three files.
    source = Image.open(images[0])
    source.load()
    info = PngImagePlugin.PngInfo()
    info.add_text("Comment", "re-saved by a test")
    variants = {"c0.png": {"compress_level": 0}, "c9.png": {"compress_level": 9},
                "text.png": {"pnginfo": info}}
    digests, sizes = set(), set()
    for name, options in variants.items():
        source.save(tmp_path / name, **options)
        sizes.add((tmp_path / name).stat().st_size)
        with Image.open(tmp_path / name) as img:
            digests.add(fp.exact_digest(img))
    assert len(sizes) == 3                     # the files really differ
    assert digests == {fp.exact_digest(source)}


def test_exact_digest_sees_one_pixel_and_size(images: list[Path]) -> None:
    # Reference: sha256 (FIPS 180-4) changes with any input change; common practice.
    img = Image.open(images[1]).convert("RGBA")
    before = fp.exact_digest(img)
    r, g, b, a = img.getpixel((5, 5))
    img.putpixel((5, 5), ((r + 1) % 256, g, b, a))
    assert fp.exact_digest(img) != before
    flat = Image.new("RGBA", (4, 6), (255, 255, 255, 255))
    assert fp.exact_digest(flat) != fp.exact_digest(Image.new("RGBA", (6, 4), (255,) * 4))


def test_exact_digest_same_pixels_different_mode() -> None:
    # Reference: Pillow's palette -> RGBA conversion reproduces the same pixel values.
    rgb = Image.new("RGB", (10, 10), (200, 30, 40))
    rgb.putpixel((2, 3), (0, 0, 255))
    palette = rgb.quantize(colors=4)
    assert np.array_equal(np.asarray(palette.convert("RGB")), np.asarray(rgb))
    assert fp.exact_digest(palette) == fp.exact_digest(rgb)


def test_perceptual_tolerance_separates_drift_from_change() -> None:
    # Measured on this stack: a font-hinting change moves 0-2 bits, different data ~100 bits;
    # the default tolerance of 10 bits (settings.drift_tolerance) lies between. Common practice.
    def render(hinting: str, seed: int) -> Image.Image:
        with plt.rc_context({"text.hinting": hinting}):
            rng = np.random.default_rng(seed)
            fig, ax = plt.subplots(figsize=(4, 3), dpi=100)
            ax.plot(rng.normal(size=50).cumsum())
            ax.set_title("Weekly visits")
            buf = io.BytesIO()
            fig.savefig(buf, format="png")
            plt.close(fig)
        return Image.open(io.BytesIO(buf.getvalue()))

    base = fp.perceptual_digest(render("auto", 1))
    assert fp.hamming(base, fp.perceptual_digest(render("none", 1))) <= 10
    assert fp.hamming(base, fp.perceptual_digest(render("auto", 2))) > 10


def test_vector_digest_is_sha256_of_bytes(tmp_path: Path) -> None:
    # Reference: hashlib.sha256 of the file bytes.
    path = tmp_path / "figure-1.svg"
    path.write_bytes(b"<svg xmlns='http://www.w3.org/2000/svg'/>" * 1000)
    assert fp.vector_digest(path) == "sha256:" + hashlib.sha256(path.read_bytes()).hexdigest()


def test_analyse_png_decodes_once(tmp_path: Path, images: list[Path],
                                  monkeypatch: pytest.MonkeyPatch) -> None:
    # Reference: imagehash.phash and the definition above; the call count is the contract.
    calls = []
    real_open = Image.open
    monkeypatch.setattr(fp.Image, "open", lambda *a, **k: calls.append(a) or real_open(*a, **k))
    facts = fp.analyse_png(images[0], tmp_path / "thumbs")
    assert len(calls) == 1
    monkeypatch.undo()
    with Image.open(images[0]) as img:
        assert facts.perceptual == str(imagehash.phash(img, hash_size=16))
        assert facts.exact == fp.exact_digest(img)
        assert (facts.width, facts.height) == img.size
    assert sorted(facts.thumbs) == [320, 640]
    for size, path in facts.thumbs.items():
        with Image.open(path) as thumb:
            expected_w = min(size, facts.width)
            assert thumb.width == expected_w
            assert abs(thumb.height - facts.height * expected_w / facts.width) <= 1


def test_analyse_png_without_thumbs(images: list[Path]) -> None:
    facts = fp.analyse_png(images[-1], None)
    assert facts.thumbs == {}
    assert facts.exact.startswith("sha256:")


def test_decode_refuses_junk(tmp_path: Path, images: list[Path]) -> None:
    # Reference: PNG spec: a file cut short misses IDAT/IEND and cannot be decoded.
    text = tmp_path / "not.png"
    text.write_text("hello")
    cut = tmp_path / "cut.png"
    cut.write_bytes(images[0].read_bytes()[:300])
    for bad in (text, cut):
        with pytest.raises(RecipeError) as info:
            fp.decode(bad)
        assert str(bad) in info.value.render() and info.value.hint


def test_decode_refuses_too_many_pixels(tmp_path: Path) -> None:
    path = tmp_path / "big.png"
    Image.new("L", (300, 200)).save(path)
    with pytest.raises(RecipeError) as info:
        fp.decode(path, max_pixels=50_000)
    assert info.value.key == "max_pixels"
    assert fp.decode(path, max_pixels=60_000).size == (300, 200)


def test_decode_reports_pillows_own_bomb_limit(tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    # Reference: Pillow raises DecompressionBombError above 2 x Image.MAX_IMAGE_PIXELS.
    path = tmp_path / "big.png"
    Image.new("L", (300, 200)).save(path)
    monkeypatch.setattr(Image, "MAX_IMAGE_PIXELS", 1000)
    with pytest.raises(RecipeError) as info:
        fp.decode(path, max_pixels=10**9)
    assert info.value.key == "max_pixels"


def test_diff_image_marks_exactly_the_changed_block(tmp_path: Path) -> None:
    # Reference: numpy comparison of the two pixel arrays (independent count below).
    rng = np.random.default_rng(7)
    old = rng.integers(0, 200, size=(60, 90, 3), dtype=np.uint8)
    new = old.copy()
    new[10:15, 20:27] = 255                                 # 5 x 7 = 35 pixels
    Image.fromarray(old).save(tmp_path / "old.png")
    Image.fromarray(new).save(tmp_path / "new.png")
    stats = fp.diff_image(tmp_path / "old.png", tmp_path / "new.png", tmp_path / "d.png")
    independent = int(np.any(old != new, axis=2).sum())
    assert stats["changed_pixels"] == independent == 35
    assert stats["bbox"] == [20, 10, 27, 15]
    assert stats["changed_fraction"] == pytest.approx(35 / (60 * 90))
    with Image.open(tmp_path / "d.png") as sheet:
        assert sheet.width >= 3 * 90
        third_x = sheet.width - 16 - 90        # third panel's left edge (gap 16)
        rgb = sheet.convert("RGB")
        top = sheet.height - 16 - 60
        assert rgb.getpixel((third_x + 22, top + 12)) == fp.CHANGED
        unchanged = rgb.getpixel((third_x + 60, top + 45))
        assert min(unchanged) >= 190 and max(unchanged) - min(unchanged) == 0  # light gray


def test_diff_image_pads_different_sizes(tmp_path: Path) -> None:
    Image.new("RGB", (100, 80), "white").save(tmp_path / "old.png")
    Image.new("RGB", (120, 80), "white").save(tmp_path / "new.png")
    stats = fp.diff_image(tmp_path / "old.png", tmp_path / "new.png", tmp_path / "d.png")
    assert stats["changed_pixels"] == 20 * 80
    assert stats["bbox"] == [100, 0, 120, 80]
    assert stats["approved_size"] == [100, 80] and stats["new_size"] == [120, 80]


def test_diff_image_without_approved(tmp_path: Path) -> None:
    Image.new("RGB", (100, 80), "white").save(tmp_path / "new.png")
    stats = fp.diff_image(None, tmp_path / "new.png", tmp_path / "d.png")
    assert stats["changed_pixels"] is None and stats["approved_size"] is None
    with Image.open(tmp_path / "d.png") as sheet:
        first = np.asarray(sheet.convert("L"))[40:100, 16:116]
        assert (first < 128).any()                 # the panel carries its message in text
    assert not list(tmp_path.glob(".tmp-*"))
