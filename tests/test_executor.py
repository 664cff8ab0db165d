"""The fork server and spawn mode: containment, isolation between recipes, scheduling, speed.

Recipes come from tests/hostile/; the ones that need a per-test file are copied to tmp first.
"""
from __future__ import annotations

import dataclasses
import hashlib
import os
import shutil
import socket
import time
from pathlib import Path
from typing import Iterator

import pytest
from PIL import Image

from figfolio.errors import ExecutorError
from figfolio.executor import LocalExecutor, make_executor, run_isolated
from figfolio.recipe import load_recipe
from figfolio.runner import Job, RunResult
from figfolio.settings import Settings

HOSTILE = Path(__file__).parent / "hostile"


def job_for(folder: Path, **changes: object) -> Job:
    settings = Settings(root=folder.parent)
    return dataclasses.replace(Job.from_recipe(load_recipe(folder, settings), settings), **changes)


def pixel_digest(path: str | Path) -> str:
    """sha256 of decoded RGBA pixels and size via Pillow (PRODUCT.md §5 exact digest)."""
    with Image.open(path) as img:
        rgba = img.convert("RGBA")
        return hashlib.sha256(f"{rgba.size}".encode() + rgba.tobytes()).hexdigest()


@pytest.fixture(scope="module")
def executors() -> Iterator[dict[int, LocalExecutor]]:
    """Warm fork servers shared by the tests of this file: one worker, and two."""
    pool = {1: LocalExecutor(jobs=1), 2: LocalExecutor(jobs=2)}
    yield pool
    for executor in pool.values():
        executor.close()


EXECUTORS: dict[int, LocalExecutor] = {}


@pytest.fixture(autouse=True)
def _shared(executors: dict[int, LocalExecutor]) -> None:
    EXECUTORS.update(executors)


def run_all(todo: list[Job], work: Path, jobs: int = 1, spawn: bool = False
            ) -> list[RunResult]:
    got: list[RunResult] = []
    if spawn:
        with LocalExecutor(jobs=jobs, spawn=True) as executor:
            executor.run(todo, work, got.append)
    else:
        EXECUTORS[jobs].run(todo, work, got.append)
    return got


def png(result: RunResult) -> Path:
    return next(Path(o.path) for o in result.outputs if o.name == "figure-1.png")


def process_gone(pid: int) -> bool:
    """True when ``pid`` no longer runs (absent, or a zombie waiting for its reaper): proc(5)."""
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return True
    return state in ("Z", "X")


def test_timeout_kills_the_recipe_and_its_children_while_another_succeeds(tmp_path: Path
                                                                          ) -> None:
    jobs = [job_for(HOSTILE / "sleeper", timeout=2.0), job_for(HOSTILE / "good")]
    start = time.monotonic()
    got = {r.slug: r for r in run_all(jobs, tmp_path, jobs=2)}
    assert time.monotonic() - start < 20
    assert got["sleeper"].status == "broken"
    assert got["sleeper"].reason == "timed out after 2 s"
    assert got["good"].status == "ok"
    child = int((tmp_path / "sleeper" / "recipe" / "child.pid").read_text())
    deadline = time.monotonic() + 5
    while not process_gone(child) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert process_gone(child), "the recipe's own child survived the time-out"


def test_unbounded_memory_is_broken_and_the_builder_carries_on(tmp_path: Path) -> None:
    jobs = [job_for(HOSTILE / "memory-hog", memory_mb=300, expected_seconds=9),
            job_for(HOSTILE / "good")]
    got = {r.slug: r for r in run_all(jobs, tmp_path, jobs=1)}
    hog = got["memory-hog"]
    assert hog.status == "broken"
    assert hog.reason in ("ran out of memory (limit 300 MB)", "killed (memory limit of 300 MB?)")
    assert got["good"].status == "ok"  # the same worker ran it afterwards


def test_a_dead_worker_is_replaced_and_its_job_reported(tmp_path: Path) -> None:
    jobs = [job_for(HOSTILE / "kills-worker", expected_seconds=9), job_for(HOSTILE / "good")]
    got = {r.slug: r for r in run_all(jobs, tmp_path, jobs=1)}
    assert got["kills-worker"].status == "broken"
    assert got["kills-worker"].reason.startswith(
        "the figfolio worker process died (signal SIGKILL)")
    assert got["good"].status == "ok"


def test_polluter_does_not_change_the_next_recipe_in_the_same_worker(tmp_path: Path) -> None:
    alone = run_all([job_for(HOSTILE / "innocent")], tmp_path / "alone", jobs=1)[0]
    after = run_all([job_for(HOSTILE / "polluter", expected_seconds=5),
                     job_for(HOSTILE / "innocent")], tmp_path / "after", jobs=1)
    assert [r.slug for r in after] == ["polluter", "innocent"]  # longest expected first
    assert after[0].status == "ok" and after[1].status == "ok", after[1].traceback
    assert alone.status == "ok"
    assert pixel_digest(png(after[1])) == pixel_digest(png(alone))
    # and the polluter's own style really did change its pixels (the test can fail)
    assert pixel_digest(png(after[0])) != pixel_digest(png(alone))


def test_writing_into_the_real_recipe_folder_is_reported(tmp_path: Path) -> None:
    folder = tmp_path / "abs-writer"
    shutil.copytree(HOSTILE / "abs-writer", folder)
    (folder / "target.txt").write_text(str(folder / "leaked.txt"))
    result = run_all([job_for(folder)], tmp_path / "work", jobs=1)[0]
    assert result.status == "ok", result.reason
    assert "tried to write into recipe folder: leaked.txt" in result.warnings


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0,
                    reason="network namespaces need root on Linux")
def test_network_is_cut_unless_the_job_allows_it(tmp_path: Path) -> None:
    folder = tmp_path / "network-probe"
    shutil.copytree(HOSTILE / "network-probe", folder)
    with socket.socket() as server:
        server.bind(("127.0.0.1", 0))
        server.listen(8)
        (folder / "port.txt").write_text(str(server.getsockname()[1]))
        cut = run_all([job_for(folder)], tmp_path / "cut", jobs=1)[0]
        allowed = run_all([job_for(folder, network=True)], tmp_path / "open", jobs=1)[0]
    if cut.provenance.get("network", "").startswith("network isolation unavailable"):
        pytest.skip(cut.provenance["network"])
    assert cut.status == "ok", cut.reason + cut.traceback
    assert cut.provenance["network"].startswith("isolated")
    assert allowed.status == "broken"
    assert allowed.reason == "raised RuntimeError: reached the builder's network"


def test_spawn_mode_and_run_isolated_contain_the_same_way(tmp_path: Path) -> None:
    jobs = [job_for(HOSTILE / "good"), job_for(HOSTILE / "raises"),
            job_for(HOSTILE / "sleeper", timeout=2.0)]
    got = {r.slug: r for r in run_all(jobs, tmp_path / "spawn", jobs=2, spawn=True)}
    assert got["good"].status == "ok"
    assert got["raises"].reason == "raised ValueError: column 'age' has no rows"
    assert got["sleeper"].reason == "timed out after 2 s"
    forked = run_all([job_for(HOSTILE / "good")], tmp_path / "fork", jobs=1)[0]
    assert pixel_digest(png(got["good"])) == pixel_digest(png(forked))
    bundled = run_isolated(job_for(HOSTILE / "good").with_bundle(), tmp_path / "one")
    assert bundled.status == "ok"
    assert Path(bundled.outputs[0].path).parent == tmp_path / "one" / "out"
    assert pixel_digest(png(bundled)) == pixel_digest(png(forked))


def test_longest_expected_job_starts_first(tmp_path: Path) -> None:
    folder = tmp_path / "sleeps-briefly"
    shutil.copytree(HOSTILE / "sleeps-briefly", folder)
    jobs = [dataclasses.replace(job_for(HOSTILE / "good"), slug=f"short-{i}",
                                expected_seconds=0.1 * i) for i in range(3)]
    jobs.append(job_for(folder, expected_seconds=30))
    order = [r.slug for r in run_all(jobs, tmp_path / "work", jobs=1)]
    assert order == ["sleeps-briefly", "short-2", "short-1", "short-0"]


def test_failing_callback_stops_the_run_at_once(tmp_path: Path) -> None:
    jobs = [job_for(HOSTILE / "sleeper", timeout=60.0, expected_seconds=9),
            job_for(HOSTILE / "good")]

    def refuse(result: RunResult) -> None:
        raise RuntimeError(f"callback refused {result.slug}")

    start = time.monotonic()
    with pytest.raises(RuntimeError, match="callback refused good"):
        EXECUTORS[2].run(jobs, tmp_path / "first", refuse)
    assert time.monotonic() - start < 15  # the 60 s sleeper was killed, not waited for
    again = run_all([job_for(HOSTILE / "good")], tmp_path / "again", jobs=2)
    assert again[0].status == "ok"  # workers were restarted


def test_make_executor_choices() -> None:
    settings = Settings(root=Path("."), jobs=3)
    local = make_executor(settings)
    assert isinstance(local, LocalExecutor) and local.jobs == 3
    assert make_executor(settings, jobs=1).jobs == 1  # type: ignore[attr-defined]
    with pytest.raises(ExecutorError):
        make_executor(settings, "no-such-executor")
    with pytest.raises(ExecutorError):
        make_executor(settings, "dask", "")  # no address (or no Dask executor module yet)


def test_fork_server_is_faster_than_spawning(tmp_path: Path, capsys: pytest.CaptureFixture
                                             ) -> None:
    """Measured cost per trivial recipe; run with -s to see the numbers."""
    count = 3
    jobs = [dataclasses.replace(job_for(HOSTILE / "good"), slug=f"g{i}") for i in range(count)]
    timings = {}
    for mode, spawn in (("fork server", False), ("spawn", True)):
        with LocalExecutor(jobs=1, spawn=spawn) as executor:
            executor.run(jobs[:1], tmp_path / f"{mode}-warm", lambda r: None)  # start workers
            start = time.monotonic()
            done: list[RunResult] = []
            executor.run(jobs, tmp_path / mode, done.append)
            timings[mode] = (time.monotonic() - start) / count
        assert all(r.status == "ok" for r in done)
    with capsys.disabled():
        print(f"\nper trivial recipe: fork server {timings['fork server']:.3f} s, "
              f"spawn {timings['spawn']:.3f} s")
    assert timings["fork server"] < timings["spawn"]


def parent_of(pid: int) -> int:
    """The PPid line of /proc/<pid>/status (proc(5))."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("PPid:"):
            return int(line.split()[1])
    raise AssertionError(f"no PPid for {pid}")


def test_warm_workers_share_one_warm_up_and_stay_isolated(tmp_path: Path) -> None:
    """warm(2) starts one process; the second worker is a twin it forked once warm."""
    import subprocess

    with LocalExecutor(jobs=2) as executor:
        executor.warm(2)
        first, second = executor._workers
        first.start()
        second.start()
        assert isinstance(first.proc, subprocess.Popen)
        assert second.proc is not None and second.proc.pid != first.proc.pid
        assert parent_of(second.proc.pid) == first.proc.pid
        assert second.warm_seconds == first.warm_seconds  # one warm-up, inherited
        alone = first.run(job_for(HOSTILE / "innocent"), tmp_path / "alone")
        polluted = second.run(job_for(HOSTILE / "polluter"), tmp_path / "polluter")
        after = second.run(job_for(HOSTILE / "innocent"), tmp_path / "after")
        assert alone.status == polluted.status == after.status == "ok", after.traceback
        assert pixel_digest(png(after)) == pixel_digest(png(alone))
        assert pixel_digest(png(polluted)) != pixel_digest(png(alone))
        pids = [first.proc.pid, second.proc.pid]
    deadline = time.monotonic() + 10
    while not all(process_gone(p) for p in pids) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert all(process_gone(p) for p in pids)


def test_a_dead_twin_is_replaced_by_a_worker_of_its_own(tmp_path: Path) -> None:
    import subprocess

    with LocalExecutor(jobs=2) as executor:
        executor.warm(2)
        twin = executor._workers[1]
        killed = twin.run(job_for(HOSTILE / "kills-worker"), tmp_path / "killed")
        assert killed.status == "broken"
        assert killed.reason.startswith("the figfolio worker process died while running")
        good = twin.run(job_for(HOSTILE / "good"), tmp_path / "good")
        assert good.status == "ok"
        assert isinstance(twin.proc, subprocess.Popen)


def test_a_twin_that_never_comes_up_is_started_on_its_own(tmp_path: Path) -> None:
    """The forking worker dies before it is warm: its twin's pipe closes, and the builder
    starts that worker the ordinary way instead of failing a recipe."""
    import signal
    import subprocess

    with LocalExecutor(jobs=2) as executor:
        executor.warm(2)
        first, twin = executor._workers
        assert first.proc is not None
        os.killpg(first.proc.pid, signal.SIGKILL)
        got = twin.run(job_for(HOSTILE / "good"), tmp_path / "good")
        assert got.status == "ok", got.reason
        assert isinstance(twin.proc, subprocess.Popen)
