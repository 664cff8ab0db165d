"""serve.py: serves the built site on loopback and rebuilds when a recipe file changes."""
from __future__ import annotations

import threading
import time
import urllib.request

from figfolio.serve import serve, snapshot
from figfolio.settings import Settings


def test_serves_and_rebuilds_on_change(tmp_path):
    root = tmp_path / "cat"
    (root / "recipes" / "a").mkdir(parents=True)
    (root / "recipes" / "a" / "figure.py").write_text("x = 1\n")
    settings = Settings(root=root)
    builds: list[float] = []

    def rebuild() -> None:
        settings.site_path.mkdir(parents=True, exist_ok=True)
        (settings.site_path / "index.html").write_text(f"build {len(builds)}")
        builds.append(time.monotonic())

    lines: list[str] = []
    stop = threading.Event()
    worker = threading.Thread(target=serve, args=(settings, 0, rebuild),
                              kwargs={"stop": stop, "poll_seconds": 0.1, "max_seconds": 20,
                                      "say": lines.append})
    worker.start()
    try:
        deadline = time.monotonic() + 10
        while not lines and time.monotonic() < deadline:
            time.sleep(0.05)
        address = lines[0].split(" at ")[1].split(" ")[0]
        assert address.startswith("http://127.0.0.1:")
        # urllib is the reference HTTP client here (stdlib).
        assert urllib.request.urlopen(address, timeout=5).read() == b"build 0"
        time.sleep(0.2)
        (root / "recipes" / "a" / "figure.py").write_text("x = 22\n")
        while len(builds) < 2 and time.monotonic() < deadline:
            time.sleep(0.05)
        assert len(builds) == 2
        assert urllib.request.urlopen(address, timeout=5).read() == b"build 1"
    finally:
        stop.set()
        worker.join(timeout=10)
    assert not worker.is_alive()


def test_snapshot_sees_new_and_changed_files(tmp_path):
    (tmp_path / "r").mkdir()
    before = snapshot([tmp_path / "r"])
    (tmp_path / "r" / "x.csv").write_text("a\n")
    assert snapshot([tmp_path / "r"]) != before
    assert snapshot([tmp_path / "missing"]) == frozenset()
