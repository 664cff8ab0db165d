"""``figfolio serve``: build, serve the site on 127.0.0.1, rebuild when a recipe changes.

Why polling instead of file-system events: a scan of modification times once a second is
portable (no extra package, works on network drives and in containers) and cheap for a few
hundred recipes. The server is Python's own ``http.server`` in a thread, bound to loopback only,
so nothing on the network can reach a half-reviewed catalogue.
"""
from __future__ import annotations

import functools
import os
import threading
import time
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Callable

from figfolio.errors import FigfolioError, UsageError
from figfolio.settings import Settings

HOST = "127.0.0.1"


class _QuietHandler(SimpleHTTPRequestHandler):
    """Serve files without logging every request to the terminal (errors still show)."""

    def log_message(self, format: str, *args: object) -> None:  # noqa: A002 - stdlib name
        if len(args) > 1 and str(args[1])[:1] in ("4", "5"):
            super().log_message(format, *args)

    def end_headers(self) -> None:
        # A development server: always fetch the latest build.
        self.send_header("Cache-Control", "no-store")
        super().end_headers()


def start_server(site: Path, port: int) -> tuple[ThreadingHTTPServer, threading.Thread]:
    """Serve ``site`` on 127.0.0.1:port (0 = any free port) in a daemon thread."""
    handler = functools.partial(_QuietHandler, directory=str(site))
    try:
        httpd = ThreadingHTTPServer((HOST, port), handler)
    except OSError as exc:
        raise UsageError(f"cannot listen on {HOST}:{port} ({exc.strerror})", key="--port",
                         hint="choose another port, e.g. --port 8765, or 0 for any free port"
                         ) from None
    thread = threading.Thread(target=httpd.serve_forever, name="figfolio-serve", daemon=True)
    thread.start()
    return httpd, thread


def snapshot(folders: list[Path]) -> frozenset[tuple[str, int, int]]:
    """Every file's (path, mtime_ns, size) under the watched folders; a change means rebuild."""
    seen = []
    for folder in folders:
        if not folder.is_dir():
            continue
        for dirpath, dirnames, filenames in os.walk(folder):
            dirnames[:] = [d for d in dirnames if not d.startswith(".") and d != "__pycache__"]
            for name in filenames:
                path = os.path.join(dirpath, name)
                try:
                    st = os.stat(path)
                except OSError:
                    continue
                seen.append((path, st.st_mtime_ns, st.st_size))
    return frozenset(seen)


def watched(settings: Settings) -> list[Path]:
    """What a change in triggers a rebuild: recipes, the catalogue's theme, its settings file."""
    folders = [settings.recipes_path, settings.root / "site_template"]
    return folders


def serve(settings: Settings, port: int, rebuild: Callable[[], None], *,
          stop: threading.Event | None = None, poll_seconds: float = 1.0,
          max_seconds: float | None = None, say: Callable[[str], None] = print) -> None:
    """Build, serve, and rebuild on change until ``stop`` is set, Ctrl-C, or ``max_seconds``."""
    stop = stop or threading.Event()
    rebuild()
    httpd, thread = start_server(settings.site_path, port)
    say(f"serving {settings.site_path} at http://{HOST}:{httpd.server_address[1]}/index.html "
        f"(Ctrl-C to stop)")
    folders = watched(settings)
    files = [settings.source] if settings.source else []
    before = snapshot(folders) | snapshot_files(files)
    started = time.monotonic()
    try:
        while not stop.wait(poll_seconds):
            if max_seconds is not None and time.monotonic() - started > max_seconds:
                break
            now = snapshot(folders) | snapshot_files(files)
            if now != before:
                before = now
                say("change detected; rebuilding")
                try:
                    rebuild()
                    say("rebuilt")
                except FigfolioError as exc:
                    say(exc.render())
    except KeyboardInterrupt:
        say("stopped")
    finally:
        httpd.shutdown()
        httpd.server_close()
        thread.join(timeout=5)


def snapshot_files(paths: list[Path]) -> frozenset[tuple[str, int, int]]:
    out = []
    for path in paths:
        try:
            st = path.stat()
        except OSError:
            continue
        out.append((str(path), st.st_mtime_ns, st.st_size))
    return frozenset(out)
