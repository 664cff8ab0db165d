"""Write files so that a reader never sees half of one.

Why: a build can be killed at any moment (Ctrl-C, CI time-out, out of memory). Every file
figfolio writes goes to a temporary name in the same folder, is flushed to disk, and is then
renamed over the target with ``os.replace``, which POSIX makes atomic within one file system.
A crash leaves either the old file or the new one, plus at worst a stray ``.tmp-*`` file.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable


def fsync_dir(folder: Path) -> None:
    """Flush a folder's entry list, so a rename inside it survives a power cut."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_with(path: Path, writer: Callable[[Path], object], *, durable: bool = False) -> None:
    """Call ``writer(tmp_path)``, then rename the result onto ``path``.

    ``durable`` also fsyncs the file and its folder (cache entries, fingerprints.json); site
    files and thumbnails skip it because they can always be rebuilt.
    """
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".tmp-{path.name}.", dir=path.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        writer(tmp)
        if durable:
            with open(tmp, "rb+") as handle:
                os.fsync(handle.fileno())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    if durable:
        fsync_dir(path.parent)


def write_bytes(path: Path, data: bytes, *, durable: bool = False) -> None:
    """Atomically replace ``path`` with ``data``."""
    write_with(path, lambda tmp: tmp.write_bytes(data), durable=durable)


def write_text(path: Path, text: str, *, durable: bool = False) -> None:
    """Atomically replace ``path`` with UTF-8 ``text`` (newlines written as given)."""
    write_bytes(path, text.encode("utf-8"), durable=durable)
