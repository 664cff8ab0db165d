"""Tests of figfolio.cache: input keys, the stat fast path, entries, the lock, the image store.

References used:
- hashlib.sha256 (standard library) as the independent file hash.
- flock(2) (Linux man-pages, from memory): an exclusive lock conflicts with a second open file
  description and is released when the holding process dies.
- POSIX.1-2017 rename(): a directory rename is atomic (from memory).
- The "stat first, hash only on change" check is common practice of content-hash build tools.
"""
from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from figfolio import cache as cache_mod
from figfolio.cache import Cache
from figfolio.errors import BuildLockedError
from figfolio.recipe import Recipe, load_recipe
from figfolio.settings import load_settings

PAST = 1_600_000_000  # 2020-09-13: files "older" than the racy window


def _recipe_folder(root: Path, slug: str, rows: str = "x,y\n1,2\n") -> Path:
    folder = root / "recipes" / slug
    (folder / "data").mkdir(parents=True)
    (folder / "recipe.toml").write_text(f'title = "{slug}"\nsummary = "s."\nalt = "a"\n')
    (folder / "figure.py").write_text("import matplotlib.pyplot as plt\nplt.plot([1, 2])\n")
    (folder / "data" / "values.csv").write_text(rows)
    for path in folder.rglob("*"):
        os.utime(path, ns=(PAST * 10**9, PAST * 10**9))
    return folder


@pytest.fixture
def catalogue(tmp_path: Path):
    (tmp_path / "figfolio.toml").write_text('title = "t"\n')
    for slug in ("alpha", "beta"):
        _recipe_folder(tmp_path, slug)
    settings = load_settings(tmp_path)
    recipes = {s: load_recipe(tmp_path / "recipes" / s, settings) for s in ("alpha", "beta")}
    return settings, recipes


def _touch_past(path: Path, offset: int = 0) -> None:
    os.utime(path, ns=((PAST + offset) * 10**9,) * 2)


def test_key_is_stable_and_per_recipe(catalogue) -> None:
    settings, recipes = catalogue
    cache = Cache(settings.cache_path)
    keys = {s: cache.input_key(r, settings) for s, r in recipes.items()}
    assert keys["alpha"] != keys["beta"]                       # recipe.toml differs (title)
    again = Cache(settings.cache_path)
    assert {s: again.input_key(r, settings) for s, r in recipes.items()} == keys


def test_key_changes_only_for_the_changed_recipe(catalogue) -> None:
    settings, recipes = catalogue
    cache = Cache(settings.cache_path)
    before = {s: cache.input_key(r, settings) for s, r in recipes.items()}
    data = recipes["alpha"].folder / "data" / "values.csv"
    data.write_text("x,y\n1,3\n")                             # same size, new content
    _touch_past(data, 60)
    after = {s: cache.input_key(r, settings) for s, r in recipes.items()}
    assert after["alpha"] != before["alpha"]
    assert after["beta"] == before["beta"]


def test_key_ignores_readme_and_fingerprints_but_not_settings(catalogue) -> None:
    settings, recipes = catalogue
    recipe = recipes["alpha"]
    cache = Cache(settings.cache_path)
    key = cache.input_key(recipe, settings)
    (recipe.folder / "README.md").write_text("# longer description\n")
    (recipe.folder / "fingerprints.json").write_text("{}\n")
    (recipe.folder / ".figure.py.swp").write_text("editor junk")
    assert cache.input_key(recipe, settings) == key
    (recipe.folder / "data" / "extra.json").write_text("[1]")
    assert cache.input_key(recipe, settings) != key
    (recipe.folder / "data" / "extra.json").unlink()
    import dataclasses
    assert cache.input_key(recipe, dataclasses.replace(settings, dpi=300)) != key
    assert cache.input_key(recipe, settings, {"executor": "x"}) != key
    assert cache.input_key(recipe, settings) == key


def test_stat_fast_path_hashes_nothing_when_unchanged(catalogue, monkeypatch) -> None:
    settings, recipes = catalogue
    calls: list[Path] = []
    real = cache_mod.hash_file
    monkeypatch.setattr(cache_mod, "hash_file", lambda p: calls.append(p) or real(p))
    first = Cache(settings.cache_path)
    with first.lock():
        keys = [first.input_key(r, settings) for r in recipes.values()]
    assert len(calls) == 6                                      # 3 files x 2 recipes
    # Reference: hashlib.sha256 of the file, the value cached in stat.json.
    table = json.loads((settings.cache_path / "stat.json").read_text())
    csv = str(recipes["alpha"].folder / "data" / "values.csv")
    assert table[csv][2] == hashlib.sha256(Path(csv).read_bytes()).hexdigest()
    calls.clear()
    second = Cache(settings.cache_path)
    assert [second.input_key(r, settings) for r in recipes.values()] == keys
    assert calls == []
    _touch_past(Path(csv), 5)                                   # mtime moved: rehash that one
    assert second.input_key(recipes["alpha"], settings) == keys[0]
    assert calls == [Path(csv)]


def test_recently_modified_file_is_rehashed(catalogue, monkeypatch) -> None:
    settings, recipes = catalogue
    script = recipes["alpha"].folder / "figure.py"
    script.write_text("print(1)\n")                           # mtime = now: racy
    cache = Cache(settings.cache_path)
    cache.input_key(recipes["alpha"], settings)
    calls: list[Path] = []
    monkeypatch.setattr(cache_mod, "hash_file", lambda p: calls.append(p) or "0" * 64)
    cache.input_key(recipes["alpha"], settings)
    assert calls == [script]


def test_thousand_unchanged_recipes_take_milliseconds(tmp_path: Path) -> None:
    # Measured requirement of the brief: 1,000 unchanged recipes in milliseconds.
    (tmp_path / "figfolio.toml").write_text("")
    settings = load_settings(tmp_path)
    recipes = []
    for i in range(1000):
        folder = _recipe_folder(tmp_path, f"r{i}")
        recipes.append(Recipe(slug=f"r{i}", folder=folder, title="t", summary="s", alt="a",
                              script=folder / "figure.py", data=(folder / "data" / "values.csv",)))
    warm = Cache(settings.cache_path)
    with warm.lock():
        for recipe in recipes:
            warm.input_key(recipe, settings)
    cold_start = time.perf_counter()
    fresh = Cache(settings.cache_path)
    keys = [fresh.input_key(recipe, settings) for recipe in recipes]
    elapsed = time.perf_counter() - cold_start
    print(f"\n1,000 unchanged recipes keyed in {elapsed * 1000:.0f} ms")
    assert len(set(keys)) == 1000
    assert elapsed < 1.0


# --- entries --------------------------------------------------------------------------------

def _staged(tmp_path: Path) -> Path:
    staged = tmp_path / "work" / "out"
    (staged / "thumbs").mkdir(parents=True, exist_ok=True)
    (staged / "figure-1.png").write_bytes(b"\x89PNG fake pixels" * 100)
    (staged / "figure-1.svg").write_text("<svg/>")
    (staged / "thumbs" / "figure-1-320.webp").write_bytes(b"RIFF")
    return staged


KEY1, KEY2 = "1" * 64, "2" * 64


def test_store_then_lookup_hits(tmp_path: Path) -> None:
    cache = Cache(tmp_path / "cache")
    record = {"result": {"status": "ok", "duration": 2.5}, "audit": []}
    stored = cache.store("alpha", KEY1, _staged(tmp_path), record)
    found = cache.lookup("alpha", KEY1)
    assert found is not None and found.record == record
    assert found.path("figure-1.svg").read_text() == "<svg/>"
    assert found.path("thumbs/figure-1-320.webp").is_file()
    assert stored.dir == found.dir
    assert cache.lookup("alpha", KEY2) is None
    assert cache.last_run_seconds("alpha") == 2.5
    assert cache.last_run_seconds("beta") == 0.0
    manifest = json.loads((found.dir / "manifest.json").read_text())
    # Reference: hashlib.sha256 of each stored file.
    for name, meta in manifest["files"].items():
        assert meta["sha256"] == hashlib.sha256((found.dir / name).read_bytes()).hexdigest()
    assert not list((tmp_path / "cache" / "tmp").iterdir())


def test_store_removes_older_keys(tmp_path: Path) -> None:
    cache = Cache(tmp_path / "cache")
    cache.store("alpha", KEY1, _staged(tmp_path), {"duration": 1.0})
    cache.store("alpha", KEY2, _staged(tmp_path), {"duration": 3.0})
    assert [p.name for p in (tmp_path / "cache" / "runs" / "alpha").iterdir()] == [KEY2]
    assert cache.lookup("alpha", KEY1) is None
    assert cache.last_run_seconds("alpha") == 3.0
    cache.store("alpha", KEY2, _staged(tmp_path), {"duration": 4.0})   # --force re-store
    assert cache.lookup("alpha", KEY2).record == {"duration": 4.0}


def test_truncated_file_is_detected_and_dropped(tmp_path: Path) -> None:
    cache = Cache(tmp_path / "cache")
    entry = cache.store("alpha", KEY1, _staged(tmp_path), {})
    png = entry.dir / "figure-1.png"
    png.write_bytes(png.read_bytes()[:10])
    assert cache.lookup("alpha", KEY1) is None
    assert not entry.dir.exists()


def test_same_size_corruption(tmp_path: Path) -> None:
    cache = Cache(tmp_path / "cache")
    entry = cache.store("alpha", KEY1, _staged(tmp_path), {})
    png = entry.dir / "figure-1.png"
    st = png.stat()
    data = bytearray(png.read_bytes())
    data[5] ^= 0xFF
    png.write_bytes(bytes(data))
    # mtime changed -> the file is hashed and the entry dropped
    assert cache.lookup("alpha", KEY1) is None
    entry = cache.store("alpha", KEY1, _staged(tmp_path), {})
    png = entry.dir / "figure-1.png"
    st = png.stat()
    png.write_bytes(bytes(data))
    os.utime(png, ns=(st.st_atime_ns, st.st_mtime_ns))       # a bit flip that hides its mtime
    assert cache.lookup("alpha", KEY1) is not None            # the fast check cannot see it
    assert cache.lookup("alpha", KEY1, verify_hashes=True) is None


@pytest.mark.parametrize("damage", ["no-manifest", "bad-json", "bad-record", "lost-file"])
def test_half_written_entry_is_never_trusted(tmp_path: Path, damage: str) -> None:
    cache = Cache(tmp_path / "cache")
    entry = cache.store("alpha", KEY1, _staged(tmp_path), {"a": 1})
    if damage == "no-manifest":
        (entry.dir / "manifest.json").unlink()
    elif damage == "bad-json":
        (entry.dir / "manifest.json").write_text('{"files": ')
    elif damage == "bad-record":
        record = entry.dir / "record.json"
        size = record.stat().st_size
        record.write_text("x" * size)
    else:
        (entry.dir / "figure-1.svg").unlink()
    assert cache.lookup("alpha", KEY1) is None
    assert not entry.dir.exists()


def test_bad_address_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError):
        Cache(tmp_path).lookup("../etc", KEY1)
    with pytest.raises(ValueError):
        Cache(tmp_path).lookup("alpha", "../../x")


# --- lock and staging -----------------------------------------------------------------------

HOLDER = """
import sys, time
from pathlib import Path
from figfolio.cache import Cache
with Cache(Path(sys.argv[1])).lock():
    print("held", flush=True)
    time.sleep(60)
"""


def test_second_lock_holder_gets_a_clear_error(tmp_path: Path) -> None:
    # Reference: flock(2): LOCK_EX conflicts across processes; released when the holder dies.
    root = tmp_path / "cache"
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(root)],
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "held"
        start = time.monotonic()
        with pytest.raises(BuildLockedError) as info:
            with Cache(root).lock(wait=0.3):
                pass
        assert time.monotonic() - start < 2.0
        assert f"pid {holder.pid}" in info.value.message
        assert info.value.hint and info.value.exit_code == 2
    finally:
        holder.kill()
        holder.wait(timeout=10)
    with Cache(root).lock(wait=1.0):                           # freed by the holder's death
        assert (root / ".lock").read_text().strip() == str(os.getpid())


def test_lock_cleans_a_dead_builds_staging(tmp_path: Path) -> None:
    root = tmp_path / "cache"
    leftover = root / "tmp" / "abc123"
    leftover.mkdir(parents=True)
    (leftover / "figure-1.png").write_bytes(b"half")
    with Cache(root).lock():
        assert not leftover.exists()


# --- approved image store -------------------------------------------------------------------

def test_remember_and_find_images(tmp_path: Path) -> None:
    cache = Cache(tmp_path / "cache")
    png = tmp_path / "figure-1.png"
    png.write_bytes(b"pixels")
    digest = "sha256:" + "c" * 64
    assert cache.image_for(digest) is None
    kept = cache.remember_image(png, digest)
    assert cache.image_for(digest) == kept and kept.read_bytes() == b"pixels"
    png.write_bytes(b"other")
    assert cache.remember_image(png, digest).read_bytes() == b"pixels"   # once per digest
    with pytest.raises(ValueError):
        cache.image_for("sha256:../../x")


@pytest.mark.parametrize("cross_device", [False, True])
def test_store_can_move_the_staged_folder_in(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                             cross_device: bool) -> None:
    """move=True renames the staging folder into the entry (nothing copied, nothing left);
    on another file system (rename fails with EXDEV, rename(2)) it copies instead. Either
    way the entry verifies against sha256 computed here with hashlib."""
    import errno

    staged = _staged(tmp_path)
    expected = {p.relative_to(staged).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
                for p in staged.rglob("*") if p.is_file()}
    cache = Cache(tmp_path / "cache")
    if cross_device:
        real = os.replace

        def refuse(src, dst):  # type: ignore[no-untyped-def]
            if Path(src) == staged:
                raise OSError(errno.EXDEV, "Invalid cross-device link")
            return real(src, dst)
        monkeypatch.setattr(cache_mod.os, "replace", refuse)
    entry = cache.store("alpha", KEY1, staged, {"duration": 1.0}, move=True)
    assert staged.exists() == cross_device
    for rel, digest in expected.items():
        assert hashlib.sha256(entry.path(rel).read_bytes()).hexdigest() == digest
    assert cache.lookup("alpha", KEY1, verify_hashes=True) is not None
    assert not any((tmp_path / "cache" / "tmp").iterdir())
