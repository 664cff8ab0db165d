"""DaskExecutor on a loopback LocalCluster: same pixels as a local run, survives dead workers,
clear errors when there is no cluster.

Every cluster here listens on 127.0.0.1 only (host="127.0.0.1", no dashboard).
"""
from __future__ import annotations

import hashlib
import os
import shutil
import signal
import socket
import threading
import time
from pathlib import Path
from typing import Any

import pytest

distributed = pytest.importorskip("distributed", reason="the Dask extra is not installed")
import dask  # noqa: E402

from figfolio.dask_executor import DaskExecutor, land, mismatches, safe_name  # noqa: E402
from figfolio.errors import ExecutorError  # noqa: E402
from figfolio.executor import LocalExecutor, make_executor  # noqa: E402
from figfolio.recipe import load_recipe  # noqa: E402
from figfolio.runner import Job, RunResult  # noqa: E402
from figfolio.settings import load_settings  # noqa: E402

# dashboard_address=None still starts the scheduler's small HTTP server (on 127.0.0.1); a second
# cluster in the same run moves it to another port and says so.
pytestmark = pytest.mark.filterwarnings("ignore:Port 8787 is already in use")

ROOT = Path(__file__).resolve().parents[1]
R_RECIPE = ROOT / "recipes" / "assay-bias-by-laboratory"

TOML = 'title = "{t}"\nsummary = "A small test figure."\nalt = "A test figure."\n'
RECIPES = {
    "two-panels": """
import matplotlib.pyplot as plt
import numpy as np
rng = np.random.default_rng(7)
fig, (a, b) = plt.subplots(1, 2, figsize=(3, 1.6))
a.plot(np.cumsum(rng.normal(size=50)))
b.hist(rng.normal(size=300), bins=15, color="#0072B2")
""",
    "reads-data": """
import csv
import matplotlib.pyplot as plt
rows = list(csv.DictReader(open("data/points.csv")))
fig, ax = plt.subplots(figsize=(2, 2))
ax.scatter([float(r["x"]) for r in rows], [float(r["y"]) for r in rows], s=8)
fig2 = plt.figure(figsize=(1.5, 1))
fig2.text(0.1, 0.5, "second figure")
""",
    "sleepy": """
import time
import matplotlib.pyplot as plt
time.sleep(3)
fig, ax = plt.subplots(figsize=(2, 1.5))
ax.bar([1, 2, 3], [3, 1, 2])
""",
}


def make_catalogue(root: Path, slugs: list[str]) -> list[Job]:
    """Write small recipes into ``root/recipes`` and return their jobs (settings default)."""
    for slug in slugs:
        folder = root / "recipes" / slug
        (folder / "data").mkdir(parents=True)
        (folder / "recipe.toml").write_text(TOML.format(t=slug))
        (folder / "figure.py").write_text(RECIPES[slug])
        if slug == "reads-data":
            (folder / "data" / "points.csv").write_text("x,y\n1,2\n2,3\n3,1\n4,4\n")
    settings = load_settings(root)
    return [Job.from_recipe(load_recipe(root / "recipes" / s, settings), settings)
            for s in slugs]


def pixel_digest(path: str) -> str:
    """sha256 (FIPS 180-4, via hashlib) of the pixels as Pillow decodes them, plus the size:
    the exact digest defined in PRODUCT.md §5, computed here independently of figfolio."""
    from PIL import Image

    with Image.open(path) as img:
        rgba = img.convert("RGBA")
        return hashlib.sha256(repr(rgba.size).encode() + rgba.tobytes()).hexdigest()


def output_digests(results: list[RunResult]) -> dict[tuple[str, str], str]:
    found = {}
    for result in results:
        assert result.status == "ok", (result.slug, result.reason, result.traceback)
        for out in result.outputs:
            data = Path(out.path)
            digest = pixel_digest(out.path) if out.format == "png" else \
                hashlib.sha256(data.read_bytes()).hexdigest()
            found[(result.slug, out.name)] = digest
    return found


def new_cluster(**config: Any) -> Any:
    with dask.config.set(config):
        return distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                        host="127.0.0.1", dashboard_address=None)


@pytest.fixture(scope="module")
def cluster():
    with new_cluster() as running:
        yield running


def run_all(executor: Any, jobs: list[Job], work: Path) -> list[RunResult]:
    results: list[RunResult] = []
    executor.run(jobs, work, results.append)
    return results


# ---- pure parts: no cluster ------------------------------------------------------------------

def test_land_writes_outputs_and_rejects_unsafe_names(tmp_path: Path) -> None:
    job = Job(slug="demo", kind="python", folder=str(tmp_path), script="figure.py")
    payload = {"result": {"slug": "demo", "outputs": [
        {"name": "figure-1.png", "format": "png", "figure": 1, "path": "/remote/figure-1.png"},
        {"name": "../escape.png", "format": "png", "figure": None, "path": "/remote/x"},
        {"name": "figure-1.svg", "format": "svg", "figure": 1, "path": "/remote/figure-1.svg"}]},
        "files": {"figure-1.png": b"\x89PNG-bytes", "../escape.png": b"evil"},
        "worker": "tcp://10.0.0.9:4000", "host": "node9"}
    result = land(payload, job, tmp_path / "work")
    assert [o.name for o in result.outputs] == ["figure-1.png"]
    assert Path(result.outputs[0].path) == tmp_path / "work" / "demo" / "out" / "figure-1.png"
    assert Path(result.outputs[0].path).read_bytes() == b"\x89PNG-bytes"
    assert not (tmp_path / "work" / "demo" / "escape.png").exists()
    assert not (tmp_path / "work" / "escape.png").exists()
    assert any("escape.png" in w for w in result.warnings)
    assert any("figure-1.svg" in w for w in result.warnings)
    assert result.provenance["dask_worker"] == "tcp://10.0.0.9:4000"
    # A second landing of the same slug (e.g. a repeat round) must not overwrite the first.
    again = land(payload, job, tmp_path / "work")
    assert Path(again.outputs[0].path).parent.parent.name == "demo~2"


def test_land_refuses_a_result_for_another_recipe(tmp_path: Path) -> None:
    job = Job(slug="mine", kind="python", folder=str(tmp_path), script="figure.py")
    result = land({"result": {"slug": "theirs"}, "files": {}}, job, tmp_path)
    assert result.status == "broken" and "theirs" in result.reason


@pytest.mark.parametrize("name,ok", [("figure-1.png", True), ("a--b.svg", True), ("", False),
                                     ("../x.png", False), ("a/b.png", False), (".hidden", False),
                                     ("a\\b.png", False)])
def test_safe_name(name: str, ok: bool) -> None:
    assert safe_name(name) is ok


def test_mismatches_names_the_package_and_both_versions() -> None:
    here = {"python": "3.11.7", "matplotlib": "3.9.1", "numpy": "2.0.0"}
    there = {"python": "3.11.7", "matplotlib": "3.8.0", "numpy": "2.0.0"}
    assert mismatches(here, there) == ["matplotlib 3.9.1 on the builder, 3.8.0 on the worker"]
    assert mismatches(here, dict(here)) == []


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def test_no_scheduler_is_an_executor_error_naming_the_address() -> None:
    address = f"tcp://127.0.0.1:{_free_port()}"
    start = time.monotonic()
    with pytest.raises(ExecutorError) as caught:
        DaskExecutor(address, connect_timeout=2)
    assert address in caught.value.message
    assert "dask scheduler" in (caught.value.hint or "")
    assert caught.value.key == "scheduler"
    assert time.monotonic() - start < 5


@pytest.mark.parametrize("address", ["", "not an address", "tcp://host-without-port"])
def test_malformed_address_is_an_executor_error(address: str) -> None:
    with pytest.raises(ExecutorError) as caught:
        DaskExecutor(address)
    assert "tcp://HOST:PORT" in (caught.value.hint or "")


def test_make_executor_builds_the_dask_executor_and_reports_a_dead_address(tmp_path: Path
                                                                           ) -> None:
    (tmp_path / "recipes").mkdir()
    settings = load_settings(tmp_path)
    address = f"tcp://127.0.0.1:{_free_port()}"
    with pytest.raises(ExecutorError) as caught:
        make_executor(settings, "dask", address)
    assert address in caught.value.render()


def test_scheduler_without_workers_is_an_executor_error() -> None:
    with distributed.LocalCluster(n_workers=0, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as empty:
        with pytest.raises(ExecutorError) as caught:
            DaskExecutor(empty.scheduler_address, worker_wait=1)
    assert "no Dask worker" in caught.value.message
    assert "dask worker" in (caught.value.hint or "")


# ---- on a loopback cluster -------------------------------------------------------------------

def test_same_digests_as_the_local_executor(cluster: Any, tmp_path: Path) -> None:
    jobs = make_catalogue(tmp_path / "cat", ["two-panels", "reads-data"])
    if shutil.which("Rscript"):
        settings = load_settings(ROOT)
        jobs.append(Job.from_recipe(load_recipe(R_RECIPE, settings), settings))
    with LocalExecutor(jobs=2) as local:
        here = run_all(local, jobs, tmp_path / "local")
    with DaskExecutor(cluster.scheduler_address) as remote:
        there = run_all(remote, jobs, tmp_path / "dask")
    assert sorted(r.slug for r in there) == sorted(j.slug for j in jobs)
    local_digests, dask_digests = output_digests(here), output_digests(there)
    assert dask_digests == local_digests
    assert ("reads-data", "figure-2.png") in dask_digests  # both figures came back
    for result in there:
        assert result.provenance["executor"] == "dask"
        assert result.provenance["dask_worker"] in cluster.scheduler_info["workers"]
        assert not [w for w in result.warnings if "rendering stack differs" in w]
        for out in result.outputs:  # landed in the builder's work tree, not the worker's
            assert Path(out.path).parent == tmp_path / "dask" / result.slug / "out"


def _killer(client: Any, slug: str, times: int, stop: threading.Event, pids: list[int]) -> None:
    """Kill (SIGKILL) the worker process holding ``slug``'s task, once per distinct attempt."""
    seen: set[str] = set()
    while len(pids) < times and not stop.is_set():
        for address, keys in client.processing().items():
            fresh = [k for k in keys if slug in str(k) and str(k) not in seen]
            if fresh:
                time.sleep(0.7)  # let run_remote start the recipe
                pid = client.run(os.getpid, workers=[address])[address]
                os.kill(pid, signal.SIGKILL)
                seen.add(str(fresh[0]))
                pids.append(pid)
        time.sleep(0.05)


def _run_with_killer(executor: DaskExecutor, jobs: list[Job], work: Path, times: int
                     ) -> tuple[list[RunResult], list[int]]:
    stop, pids = threading.Event(), []
    thread = threading.Thread(target=_killer, args=(executor.client, "sleepy", times, stop, pids),
                              daemon=True)
    thread.start()
    try:
        results = run_all(executor, jobs, work)
    finally:
        stop.set()
        thread.join(timeout=10)
    return results, pids


def test_worker_killed_mid_recipe_is_rescheduled(cluster: Any, tmp_path: Path) -> None:
    jobs = make_catalogue(tmp_path / "cat", ["sleepy", "two-panels", "reads-data"])
    with DaskExecutor(cluster.scheduler_address) as executor:
        results, pids = _run_with_killer(executor, jobs, tmp_path / "work", times=1)
    assert len(pids) == 1, "the test did not manage to kill a worker"
    assert sorted(r.slug for r in results) == ["reads-data", "sleepy", "two-panels"]
    by_slug = {r.slug: r for r in results}
    assert by_slug["sleepy"].status == "ok", by_slug["sleepy"].reason
    assert [o.name for o in by_slug["sleepy"].outputs] == ["figure-1.png", "figure-1.svg",
                                                          "figure-1.pdf"]


def test_worker_dying_every_time_ends_broken_with_the_reason(tmp_path: Path) -> None:
    jobs = make_catalogue(tmp_path / "cat", ["sleepy", "two-panels"])
    # allowed-failures = 0: the scheduler raises KilledWorker at the first death, so the two
    # deaths below are figfolio's own first attempt and its one retry.
    with new_cluster(**{"distributed.scheduler.allowed-failures": 0}) as fragile:
        with DaskExecutor(fragile.scheduler_address, retries=1) as executor:
            results, pids = _run_with_killer(executor, jobs, tmp_path / "work", times=2)
    assert len(pids) == 2
    by_slug = {r.slug: r for r in results}
    assert sorted(by_slug) == ["sleepy", "two-panels"]
    assert by_slug["two-panels"].status == "ok"
    sleepy = by_slug["sleepy"]
    assert sleepy.status == "broken"
    assert "worker died in each of 2 attempts" in sleepy.reason
    assert "KilledWorker" in sleepy.reason
    assert sleepy.provenance["dask_attempts"] == 2
