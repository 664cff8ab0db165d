"""File work for the site: safe names, URLs, copies, the reproducible zip, the atomic swap.

Why separate from rendering: these are the parts where a bug loses or leaks files (a name with
``..`` escaping the site folder, a half-written site after a killed build, a zip that differs on
every build), so they are small and tested on their own.
"""
from __future__ import annotations

import os
import shutil
import signal
import stat
import uuid
import zipfile
from pathlib import Path, PurePosixPath
from typing import Callable
from urllib.parse import quote

from figfolio.errors import SiteError

ZIP_EPOCH = (1980, 1, 1, 0, 0, 0)  # the earliest time a zip entry can hold: fixed, so bytes repeat


def safe_parts(name: str, *, where: Path | str | None = None, key: str = "files") -> list[str]:
    """Split a relative POSIX name into parts, refusing anything that could leave its folder.

    Why: names come from pull requests; ``../../index.html`` must never overwrite a site page.
    """
    pure = PurePosixPath(name.replace("\\", "/"))
    parts = list(pure.parts)
    if not parts or pure.is_absolute() or any(p in ("", ".", "..") for p in parts) or \
            any("\x00" in p for p in parts):
        raise SiteError(f"unsafe file name {name!r}", path=where, key=key,
                        hint="use a plain relative path inside the recipe folder")
    return parts


def url(*segments: str) -> str:
    """A relative URL from path segments, each percent-encoded (``/`` inside a segment too)."""
    return "/".join(quote(s, safe="") for s in segments)


def url_path(name: str) -> str:
    """Percent-encode a relative POSIX path, keeping its ``/`` separators."""
    return "/".join(quote(p, safe="") for p in safe_parts(name))


def copy_file(src: Path, dst: Path) -> None:
    """Copy one file, creating parents; errors name the file."""
    try:
        dst.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(src, dst)
    except OSError as exc:
        raise SiteError(f"cannot copy into the site ({exc.strerror})", path=src,
                        hint="check that the file exists and the build folder is writable") from None


def link_tree(src: Path, dst: Path) -> None:
    """Reuse an unchanged folder of the previous site: hard links, or copies across devices."""
    def link(s: str, d: str) -> None:
        try:
            os.link(s, d)
        except OSError:
            shutil.copy2(s, d)
    shutil.copytree(src, dst, copy_function=link, dirs_exist_ok=True)


def fork_helper(work: Callable[[], None]) -> int | None:
    """Run ``work`` in a forked copy of this process; its pid, or None where that is unwise.

    Why: rendering pages and writing zips is CPU work in one thread, and at the end of a
    build the other cores are idle. Not forked: without fork, on one core, or when other
    threads run (``figfolio serve``'s web server): a fork copies no thread but their locks.
    The helper writes only files of its own pages and exits at once (``os._exit``).
    """
    import threading

    if not hasattr(os, "fork") or (os.cpu_count() or 1) < 2 or threading.active_count() > 1:
        return None
    try:
        pid = os.fork()
    except OSError:
        return None
    if pid == 0:
        code = 1
        try:
            work()
            code = 0
        except BaseException:  # noqa: BLE001 - the parent renders these pages again itself
            pass
        finally:
            os._exit(code)
    return pid


def helper_succeeded(pid: int) -> bool:
    """Wait for the helper; True when it finished all its work."""
    _, status = os.waitpid(pid, 0)
    return os.WIFEXITED(status) and os.WEXITSTATUS(status) == 0


def stop_helper(pid: int | None) -> None:
    """Kill and reap a helper whose work is no longer wanted (the parent failed)."""
    if pid is None:
        return
    try:
        os.kill(pid, signal.SIGKILL)
    except OSError:
        pass
    try:
        os.waitpid(pid, 0)
    except ChildProcessError:
        pass


def write_text(path: Path, text: str) -> None:
    """Write a text file inside the (already temporary) site folder."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


ZIP_LEVEL = 1


def write_zip(folder: Path, files: list[str], slug: str, out: Path) -> None:
    """The recipe as one reproducible zip: ``<slug>/...``, sorted, fixed times and modes.

    Why fixed: the same recipe gives the same bytes on every build, so a site diff or a
    checksum shows real changes only. Deflate level 1: on the 13.5 MB of demo and benchmark
    data it took 0.14 s against 1.08 s at zlib's default level 6, for files 19% larger
    (47% of the data against 40%); the zips are written on the build's critical path, and
    they are downloads from the group's own server.
    """
    entries = sorted({"/".join(safe_parts(f, where=folder)) for f in files})
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".tmp")
    with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=ZIP_LEVEL
                         ) as zf:
        for rel in entries:
            source = folder / rel
            try:
                data = source.read_bytes()
            except OSError as exc:
                raise SiteError(f"cannot read a recipe file for the zip ({exc.strerror})",
                                path=source, key="files") from None
            info = zipfile.ZipInfo(f"{slug}/{rel}", date_time=ZIP_EPOCH)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.create_system = 3  # unix, so the mode below is honoured
            info.external_attr = (stat.S_IFREG | 0o644) << 16
            zf.writestr(info, data, compresslevel=ZIP_LEVEL)  # a ZipInfo ignores the default
    os.replace(tmp, out)


def temp_site_folder(site: Path) -> Path:
    """A fresh ``.site-tmp-XXXX`` sibling of the site; stale ones from killed builds go first."""
    site.parent.mkdir(parents=True, exist_ok=True)
    for stale in site.parent.glob(".site-tmp-*"):
        shutil.rmtree(stale, ignore_errors=True)
    tmp = site.parent / f".site-tmp-{uuid.uuid4().hex[:8]}"
    tmp.mkdir()
    return tmp


def swap_in(tmp: Path, site: Path) -> None:
    """Replace ``site`` by ``tmp`` with renames: a reader sees the old or the new site, whole."""
    old = site.parent / ".site-old"
    if old.exists():
        shutil.rmtree(old)
    if site.exists():
        os.rename(site, old)
    os.rename(tmp, site)
    shutil.rmtree(old, ignore_errors=True)
