"""Content-addressed incremental state under ``build/cache/``.

Why content addressing: a recipe is re-run only when something that can change its pixels
changed: its files, the settings that shape rendering, figfolio or the rendering stack. The key
is a sha256 over all of those; an entry stored under a key is valid for exactly those inputs,
so there is no invalidation logic to get wrong.

Why a stat table: hashing every data file of a thousand recipes on each build takes seconds.
Like content-hash build tools, figfolio first compares each file's size and modification time
(ns) with ``stat.json`` and rehashes only files whose stat changed. A file modified less than
``RACY_SECONDS`` before it was hashed is not trusted from the table next time (its mtime may
not yet tell a later edit in the same clock tick apart).

What is *not* in the key: ``fingerprints.json`` (approval does not change what the recipe
draws) and ``README.md`` (a new description re-renders the site page but does not re-run the
recipe), hidden files and folders (``.ipynb_checkpoints``, editor files) and ``__pycache__``.

Layout::

    build/cache/.lock                 fcntl lock; holds the pid of the running build
    build/cache/stat.json             {abs path: [size, mtime_ns, sha256]}
    build/cache/runs/<slug>/<key>/    outputs + record.json + manifest.json (written last)
    build/cache/images/<hex>.png      approved PNGs by exact digest, for difference images
    build/cache/tmp/                  staging; whatever is here at lock time is a dead build's
"""
from __future__ import annotations

import contextlib
import errno
import fcntl
import hashlib
import json
import os
import platform
import re
import shutil
import time
import uuid
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import metadata
from pathlib import Path
from typing import Any, Iterator, Mapping

from figfolio import __version__
from figfolio.atomic import fsync_dir, write_text
from figfolio.errors import BuildLockedError
from figfolio.recipe import Recipe
from figfolio.settings import Settings

STACK = ("matplotlib", "numpy", "pandas", "pillow", "scipy")
NOT_INPUTS = frozenset({"fingerprints.json", "README.md"})
RACY_SECONDS = 2.0
MANIFEST = "manifest.json"
RECORD = "record.json"
_KEY = re.compile(r"^[0-9a-f]{16,64}$")
_SLUG = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")


def hash_file(path: Path) -> str:
    """sha256 hex of a file, read in 1 MiB blocks (module level so tests can count calls)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


@lru_cache(maxsize=1)
def stack_fingerprint() -> tuple[tuple[str, str], ...]:
    """figfolio, Python and rendering-stack versions from package metadata, not imports."""
    found = [("figfolio", __version__), ("python", platform.python_version())]
    for name in STACK:
        try:
            found.append((name, metadata.version(name)))
        except metadata.PackageNotFoundError:
            found.append((name, "absent"))
    return tuple(found)


def input_files(folder: Path) -> list[Path]:
    """Every file of a recipe that can change what it draws, sorted by relative path."""
    return [Path(full) for _, full in _input_rows(str(folder))]


def _input_rows(folder: str) -> list[tuple[str, str]]:
    """(relative posix path, absolute path) of ``input_files``, as strings.

    Strings, not Path objects: the input key is computed for every recipe on every full pass,
    and building and relativising Path objects was most of its time.
    """
    out: list[tuple[str, str]] = []

    def walk(current: str, prefix: str) -> None:
        with os.scandir(current) as it:
            for entry in it:
                if entry.name.startswith(".") or entry.name == "__pycache__":
                    continue
                if entry.is_dir(follow_symlinks=False):
                    walk(entry.path, prefix + entry.name + "/")
                elif entry.is_file(follow_symlinks=False) and not (
                        not prefix and entry.name in NOT_INPUTS):
                    out.append((prefix + entry.name, entry.path))

    walk(folder, "")
    out.sort()
    return out


@dataclass
class Entry:
    """One stored run: its folder, the builder's record, and the checksum manifest."""

    slug: str
    key: str
    dir: Path
    record: dict[str, Any]
    files: dict[str, dict[str, Any]] = field(default_factory=dict)

    def path(self, name: str) -> Path:
        """Absolute path of a file in the entry (``name`` relative, '/'-separated)."""
        return self.dir / name


class Cache:
    """The build cache of one catalogue (``settings.cache_path``)."""

    def __init__(self, path: Path) -> None:
        self.root = Path(path)
        self.path = self.root            # the cache folder, e.g. build/cache
        self._stats: dict[str, list[Any]] | None = None
        self._touched: set[str] = set()
        self._dirty = False

    # --- lock ---------------------------------------------------------------------------
    @contextlib.contextmanager
    def lock(self, wait: float = 3.0) -> Iterator["Cache"]:
        """Hold the catalogue's build lock; clean a dead build's staging; save stats at exit.

        ``fcntl.flock`` is released by the kernel when the holder dies, so a killed build
        never leaves a stale lock behind (unlike a pid file).
        """
        self.root.mkdir(parents=True, exist_ok=True)
        handle = open(self.root / ".lock", "a+")
        try:
            self._acquire(handle, wait)
            handle.seek(0)
            handle.truncate()
            handle.write(f"{os.getpid()}\n")
            handle.flush()
            self.clean_tmp()
            try:
                yield self
            finally:
                self.flush()     # stat rows are facts about files, valid even after a failure
        finally:
            handle.close()       # closing the descriptor releases the lock

    def _acquire(self, handle: Any, wait: float) -> None:
        deadline = time.monotonic() + wait
        while True:
            try:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
                return
            except OSError as exc:
                if exc.errno not in (errno.EAGAIN, errno.EACCES):
                    raise
            if time.monotonic() >= deadline:
                handle.seek(0)
                pid = handle.read().strip() or "unknown"
                raise BuildLockedError(
                    f"another figfolio build is running in this catalogue (pid {pid})",
                    path=self.root / ".lock",
                    hint="wait for it to finish, or stop it; the lock is released "
                         "automatically when that process ends")
            time.sleep(0.05)

    def clean_tmp(self) -> int:
        """Remove staging folders left by a killed build; returns how many were removed."""
        tmp = self.root / "tmp"
        if not tmp.is_dir():
            return 0
        count = 0
        for child in tmp.iterdir():
            _remove(child)
            count += 1
        return count

    # --- input key ----------------------------------------------------------------------
    def _table(self) -> dict[str, list[Any]]:
        if self._stats is None:
            try:
                raw = json.loads((self.root / "stat.json").read_text(encoding="utf-8"))
                self._stats = raw if isinstance(raw, dict) else {}
            except (OSError, ValueError):
                self._stats = {}
        return self._stats

    def file_digest(self, path: Path | str) -> str:
        """sha256 of a file, from the stat table when size and mtime are unchanged."""
        table = self._table()
        name = str(path)
        st = os.stat(name)
        self._touched.add(name)
        known = table.get(name)
        if isinstance(known, list) and len(known) == 3 and known[0] == st.st_size \
                and known[1] == st.st_mtime_ns:
            return str(known[2])
        digest = hash_file(Path(path))
        racy = time.time_ns() - st.st_mtime_ns < RACY_SECONDS * 1e9
        if racy:
            table.pop(name, None)   # ask again next time: an edit in the same tick is invisible
        else:
            table[name] = [st.st_size, st.st_mtime_ns, digest]
        self._dirty = True
        return digest

    def input_key(self, recipe: Recipe, settings: Settings,
                  extra: Mapping[str, Any] | None = None) -> str:
        """sha256 hex over everything that can change what ``recipe`` draws."""
        digest = hashlib.sha256()
        for name, version in stack_fingerprint():
            digest.update(f"stack {name} {version}\n".encode())
        digest.update(f"settings {settings.run_digest()}\n".encode())
        digest.update(f"extra {json.dumps(dict(extra or {}), sort_keys=True, default=str)}\n"
                      .encode())
        for rel, full in _input_rows(str(recipe.folder)):
            digest.update(f"file {rel}\0{self.file_digest(full)}\n".encode())
        return digest.hexdigest()

    def flush(self) -> None:
        """Save the stat table (atomic) when it changed; drop rows of deleted files."""
        if self._stats is None or not self._dirty:
            return
        table = {k: v for k, v in self._stats.items()
                 if k in self._touched or os.path.exists(k)}
        write_text(self.root / "stat.json", json.dumps(table, sort_keys=True))
        self._stats, self._dirty = table, False

    # --- entries ------------------------------------------------------------------------
    def _entry_dir(self, slug: str, key: str) -> Path:
        if not _SLUG.match(slug) or not _KEY.match(key):
            raise ValueError(f"bad cache address {slug!r}/{key!r}")
        return self.root / "runs" / slug / key

    def _staging(self) -> Path:
        tmp = self.root / "tmp" / uuid.uuid4().hex
        tmp.mkdir(parents=True)
        return tmp

    def store(self, slug: str, key: str, staged_dir: Path | None,
              record: Mapping[str, Any], move: bool = False) -> Entry:
        """Copy ``staged_dir`` and ``record`` into a new entry; older keys of the slug go.

        ``move``: the caller gives ``staged_dir`` up; it is renamed into the cache when it is
        on the same file system (else copied). Why: copying each recipe's outputs and then
        deleting the staging folder cost the builder about 17 ms a recipe in file creations,
        unlinks and rmdirs (1.0 s over the 60-recipe benchmark catalogue).

        Order matters for crash safety: files, fsync, manifest last, then one rename. A
        folder without a valid manifest is never trusted by ``lookup``.
        """
        target = self._entry_dir(slug, key)
        stage = self._staging()
        if staged_dir is not None and Path(staged_dir).is_dir() \
                and not (move and _renamed(Path(staged_dir), stage)):
            shutil.copytree(staged_dir, stage, dirs_exist_ok=True, symlinks=False)
        (stage / RECORD).write_text(json.dumps(dict(record), sort_keys=True, default=str),
                                    encoding="utf-8")
        files = _describe(stage)
        manifest = {"slug": slug, "key": key, "files": files, "created": time.time()}
        (stage / MANIFEST).write_text(json.dumps(manifest, sort_keys=True), encoding="utf-8")
        _fsync_tree(stage)
        target.parent.mkdir(parents=True, exist_ok=True)
        if target.exists():
            self._drop(target)
        os.replace(stage, target)
        fsync_dir(target.parent)
        for other in target.parent.iterdir():
            if other.name != key:
                self._drop(other)
        return Entry(slug, key, target, dict(record), files)

    def lookup(self, slug: str, key: str, verify_hashes: bool = False) -> Entry | None:
        """The entry for these inputs, or None; a damaged entry is removed, never trusted."""
        folder = self._entry_dir(slug, key)
        if not folder.is_dir():
            return None
        try:
            manifest = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
            files = manifest["files"]
            if manifest.get("key") != key or RECORD not in files:
                raise ValueError("manifest of another entry")
            for name, meta in files.items():
                _check_file(folder / name, meta, verify_hashes)
            record = json.loads((folder / RECORD).read_text(encoding="utf-8"))
            if not isinstance(record, dict):
                raise ValueError("record is not an object")
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            self._drop(folder)
            return None
        return Entry(slug, key, folder, record, files)

    def _drop(self, folder: Path) -> None:
        """Move a folder out of sight first (atomic), then delete it."""
        aside = self._staging()
        try:
            os.replace(folder, aside / "gone")
        except OSError:
            _remove(folder)
        _remove(aside)

    def last_run_seconds(self, slug: str) -> float:
        """How long the recipe's latest stored run took (0.0 when unknown), for scheduling."""
        base = self.root / "runs" / slug
        if not _SLUG.match(slug) or not base.is_dir():
            return 0.0
        manifests = sorted(base.glob(f"*/{MANIFEST}"), key=lambda p: p.stat().st_mtime_ns)
        for manifest in reversed(manifests):
            try:
                record = json.loads((manifest.parent / RECORD).read_text(encoding="utf-8"))
            except (OSError, ValueError):
                continue
            seconds = _find_duration(record)
            if seconds is not None:
                return seconds
        return 0.0

    # --- approved images ----------------------------------------------------------------
    def _image_path(self, exact_digest: str) -> Path:
        hexpart = exact_digest.removeprefix("sha256:")
        if not re.fullmatch(r"[0-9a-f]{64}", hexpart):
            raise ValueError(f"not an exact digest: {exact_digest!r}")
        return self.root / "images" / f"{hexpart}.png"

    def remember_image(self, png_path: Path, exact_digest: str) -> Path:
        """Keep a copy of an approved PNG under its exact digest (atomic; once per digest)."""
        target = self._image_path(exact_digest)
        if not target.is_file():
            target.parent.mkdir(parents=True, exist_ok=True)
            stage = self._staging()
            shutil.copyfile(png_path, stage / "image.png")
            os.replace(stage / "image.png", target)
            _remove(stage)
        return target

    def image_for(self, exact_digest: str) -> Path | None:
        """The remembered PNG with this exact digest, if any."""
        path = self._image_path(exact_digest)
        return path if path.is_file() else None


def _describe(folder: Path) -> dict[str, dict[str, Any]]:
    files: dict[str, dict[str, Any]] = {}
    for path in sorted(folder.rglob("*")):
        if path.is_file():
            st = path.stat()
            files[path.relative_to(folder).as_posix()] = {
                "size": st.st_size, "mtime_ns": st.st_mtime_ns, "sha256": hash_file(path)}
    return files


def _check_file(path: Path, meta: Mapping[str, Any], verify_hashes: bool) -> None:
    """Raise ValueError unless ``path`` matches its manifest row."""
    st = os.stat(path)
    if st.st_size != meta["size"]:
        raise ValueError(f"{path.name}: size {st.st_size}, manifest {meta['size']}")
    if verify_hashes or st.st_mtime_ns != meta["mtime_ns"]:
        if hash_file(path) != meta["sha256"]:
            raise ValueError(f"{path.name}: content differs from manifest")


def _fsync_tree(folder: Path) -> None:
    for path in folder.rglob("*"):
        if path.is_file():
            with open(path, "rb") as handle:
                os.fsync(handle.fileno())
    for sub in [folder, *[p for p in folder.rglob("*") if p.is_dir()]]:
        fsync_dir(sub)


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    else:
        with contextlib.suppress(FileNotFoundError):
            path.unlink()


def _renamed(source: Path, empty_target: Path) -> bool:
    """Rename ``source`` onto an empty folder; False when it cannot (another file system)."""
    try:
        os.replace(source, empty_target)
    except OSError:
        return False
    return True


def _find_duration(record: Mapping[str, Any]) -> float | None:
    """``duration`` at the top of the record, or inside one of its tables (e.g. 'result')."""
    candidates = [record, *[v for v in record.values() if isinstance(v, dict)]]
    for table in candidates:
        value = table.get("duration")
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
    return None
