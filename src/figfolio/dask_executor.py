"""Run recipes on a Dask cluster (``--executor dask --scheduler ADDRESS``).

Why ship bytes, not paths: the group's cluster nodes need not share a file system with the
builder. Each task carries ``job.with_bundle()`` (script, data and every setting that changes
the output), runs it on the worker with ``figfolio.executor.run_isolated`` (a fresh process with
the same containment as a local run) and returns a picklable payload: the RunResult dict plus
the output files as bytes. The builder writes those files into ``work_root/<slug>/out/`` and
points ``Output.path`` at them, so remote results land in the same cache as local ones, with the
same digests when the worker's rendering stack matches the builder's.

Failures: a recipe that fails is a broken RunResult like anywhere else. A Dask worker that dies
mid-recipe is rescheduled by the scheduler itself (``distributed.scheduler.allowed-failures``
times); when the scheduler gives up it raises ``KilledWorker``, and this executor submits the job
again, at most ``retries`` more times, then reports it broken with the reason. ``on_result`` is
called in the thread that called ``run()``, as with the local executor.

Security: a task is code. Anyone who can reach the scheduler can run anything on the workers,
and the workers' results are trusted as pickles; keep the scheduler inside the group's network.
"""
from __future__ import annotations

import dataclasses
import os
import platform
import queue
import socket
import tempfile
import uuid
from pathlib import Path, PurePosixPath
from typing import Any, Callable

from figfolio.atomic import write_bytes
from figfolio.errors import ExecutorError
from figfolio.runner import Job, RunResult, broken

CONNECT_SECONDS = 10.0
WORKER_WAIT_SECONDS = 30.0
STALL_GRACE_SECONDS = 120.0  # beyond the longest recipe time-out: spawn, transfer, queueing
STACK = ("figfolio", "matplotlib", "numpy", "pandas", "pillow", "scipy")
FIX_SCHEDULER = ("start one with 'dask scheduler' on a host of your network and pass "
                 "--scheduler tcp://HOST:8786 (or set scheduler in the settings)")


def _distributed() -> Any:
    """Import ``distributed`` lazily: it is an optional extra, and slow to import."""
    try:
        import distributed
    except ImportError as exc:
        raise ExecutorError(f"the Dask executor needs the 'distributed' package ({exc})",
                            key="executor", hint="pip install 'figfolio[dask]' on the builder "
                                                 "and every worker") from None
    return distributed


def normalise_address(address: str) -> str:
    """``HOST:PORT`` or ``tcp://HOST:PORT`` -> a full address; junk -> ExecutorError."""
    from distributed.comm.addressing import parse_address, unparse_address

    text = (address or "").strip()
    try:
        scheme, loc = parse_address(text)
        if scheme in ("tcp", "tls"):
            from distributed.comm.addressing import get_address_host_port
            get_address_host_port(text)
    except ValueError as exc:
        raise ExecutorError(f"'{address}' is not a Dask scheduler address ({exc})",
                            key="scheduler", hint="write it as tcp://HOST:PORT, e.g. "
                                                  "tcp://10.0.0.5:8786") from None
    return unparse_address(scheme, loc)


def probe(address: str, timeout: float) -> None:
    """Fail fast, before building a Client, when nothing listens at a TCP/TLS address.

    Why: a Client that failed to connect still tries to close itself at exit and prints a
    traceback; a plain socket probe gives the user one clear message instead.
    """
    from distributed.comm.addressing import get_address_host_port, parse_address

    if parse_address(address)[0] not in ("tcp", "tls"):
        return
    host, port = get_address_host_port(address)
    try:
        with socket.create_connection((host, port), timeout=timeout):
            pass
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise ExecutorError(f"cannot reach the Dask scheduler at {address} ({reason})",
                            key="scheduler", hint=f"is it running and reachable from here? "
                                                  f"{FIX_SCHEDULER}") from None


def stack_versions() -> dict[str, str]:
    """Versions that decide the pixels; compared between the builder and every worker."""
    from importlib import metadata

    found = {"python": platform.python_version(), "platform": platform.platform()}
    for name in STACK:
        try:
            found[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            found[name] = "absent"
    return found


def mismatches(builder: dict[str, str], worker: dict[str, str]) -> list[str]:
    """Human-readable differences of the rendering stack ("matplotlib 3.8.0 here, 3.9.1 there")."""
    keys = ("python",) + STACK
    return [f"{k} {builder.get(k)} on the builder, {worker.get(k)} on the worker"
            for k in keys if builder.get(k) != worker.get(k)]


def run_remote(job: Job) -> dict[str, Any]:
    """The Dask task: unpack the bundled job into a scratch folder, run it, return bytes.

    Runs on the worker. The scratch folder lives in the worker's own local directory when
    there is one, so a worker that is killed leaves nothing that its restart does not purge.
    """
    from figfolio.executor import run_isolated

    base, address = None, ""
    try:
        from distributed import get_worker
        worker = get_worker()
        base, address = worker.local_directory, worker.address
    except (ImportError, ValueError):
        pass
    with tempfile.TemporaryDirectory(prefix="figfolio-", dir=base) as tmp:
        result = run_isolated(job, Path(tmp) / "job")
        files = {}
        for out in result.outputs:
            path = Path(out.path)
            files[out.name] = path.read_bytes() if path.is_file() else None
    return {"result": result.to_dict(), "files": files, "worker": address,
            "host": socket.gethostname(), "pid": os.getpid()}


def landing_dir(work_root: Path, slug: str) -> Path:
    """``work_root/<slug>``, or ``<slug>~2``... when a folder of that name is already there."""
    folder, k = work_root / slug, 2
    while folder.exists():
        folder, k = work_root / f"{slug}~{k}", k + 1
    return folder


def safe_name(name: str) -> bool:
    """An output name from a worker must be a plain file name: it becomes a path here."""
    pure = PurePosixPath(name)
    return bool(name) and pure.name == name and "\\" not in name and not name.startswith(".")


def land(payload: dict[str, Any], job: Job, work_root: Path) -> RunResult:
    """Write a worker's output bytes under ``work_root/<slug>/out/`` and repoint the paths."""
    result = RunResult.from_dict(payload["result"])
    if result.slug != job.slug:
        return broken(job.slug, f"the Dask worker returned the result of '{result.slug}'")
    out_dir = landing_dir(work_root, job.slug) / "out"
    out_dir.mkdir(parents=True)
    files: dict[str, bytes | None] = payload.get("files", {})
    kept = []
    for output in result.outputs:
        data = files.get(output.name)
        if not safe_name(output.name) or data is None:
            result.warnings.append(f"output {output.name!r} did not come back from the worker")
            continue
        target = out_dir / output.name
        write_bytes(target, data)
        kept.append(dataclasses.replace(output, path=str(target)))
    result.outputs = kept
    result.provenance.update({"executor": "dask", "dask_worker": payload.get("worker", ""),
                              "worker_host": payload.get("host", "")})
    return result


class DaskExecutor:
    """Executor protocol over a Dask scheduler; one task per recipe, results as bytes."""

    def __init__(self, address: str, retries: int = 2, *,
                 connect_timeout: float = CONNECT_SECONDS,
                 worker_wait: float = WORKER_WAIT_SECONDS) -> None:
        distributed = _distributed()
        self.address = normalise_address(address)
        self.retries = max(0, int(retries))
        probe(self.address, connect_timeout)
        try:
            self.client = distributed.Client(self.address, timeout=connect_timeout,
                                             set_as_default=False)
        except (OSError, TimeoutError, ValueError) as exc:
            raise ExecutorError(f"cannot connect to the Dask scheduler at {self.address} "
                                f"({exc})", key="scheduler", hint=FIX_SCHEDULER) from None
        try:
            self.worker_stacks = self._check_workers(worker_wait)
        except BaseException:
            self.client.close()
            raise
        self.builder_stack = stack_versions()

    def _check_workers(self, wait: float) -> dict[str, dict[str, str]]:
        """Wait for a worker, and ask every worker for its rendering stack.

        Why here: a worker without figfolio (or at another matplotlib) fails or draws other
        pixels; saying so at start is kinder than 40 broken recipes.
        """
        try:
            self.client.wait_for_workers(1, timeout=wait)
        except (TimeoutError, OSError):
            raise ExecutorError(f"no Dask worker joined the scheduler at {self.address} within "
                                f"{wait:g} s", key="scheduler",
                                hint=f"start workers with 'dask worker {self.address}' on "
                                     "nodes that have figfolio installed") from None
        try:
            return self.client.run(stack_versions)
        except Exception as exc:  # noqa: BLE001 - a remote ImportError arrives as itself
            raise ExecutorError(f"the Dask workers at {self.address} cannot run figfolio "
                                f"({type(exc).__name__}: {exc})", key="scheduler",
                                hint="install figfolio and the rendering stack at the "
                                     "builder's versions on every worker") from None

    def _submit(self, job: Job, attempt: int, done: "queue.Queue[tuple[Any, Job, int]]"
                ) -> Any:
        """Submit one attempt of a bundled job; when it ends, (future, job, attempt) goes
        onto ``done``."""
        future = self.client.submit(run_remote, job, pure=False,
                                    key=f"figfolio-{job.slug}-{uuid.uuid4().hex}",
                                    priority=int(job.expected_seconds * 1000))
        future.add_done_callback(lambda f: done.put((f, job, attempt)))
        return future

    def run(self, jobs: list[Job], work_root: Path, on_result: Callable[[RunResult], None]
            ) -> None:
        """Run every job on the cluster; ``on_result`` is called in this thread, once per job.

        Completions arrive through a queue fed by the futures' callbacks, so a wait can time
        out per completion: if nothing finishes for longer than the longest recipe time-out
        plus a grace period, the cluster is stuck and the remaining jobs are reported broken.
        """
        work_root = Path(work_root)
        work_root.mkdir(parents=True, exist_ok=True)
        done: queue.Queue[tuple[Any, Job, int]] = queue.Queue()
        pending: dict[str, tuple[Any, Job, int]] = {}
        for job in sorted(jobs, key=lambda j: -j.expected_seconds):
            future = self._submit(job.with_bundle(), 1, done)  # read the files once per job
            pending[future.key] = (future, job, 1)
        stall = max((j.timeout for j in jobs), default=0.0) + STALL_GRACE_SECONDS
        try:
            while pending:
                try:
                    future, job, attempt = done.get(timeout=stall)
                except queue.Empty:
                    self._give_up(list(pending.values()), stall, on_result)
                    pending.clear()
                    return
                pending.pop(future.key, None)
                result = self._collect(future, job, attempt, work_root)
                if result is None:
                    again = self._submit(job, attempt + 1, done)
                    pending[again.key] = (again, job, attempt + 1)
                else:
                    on_result(result)
        finally:
            for future, _, _ in pending.values():
                future.cancel()

    def _collect(self, future: Any, job: Job, attempt: int, work_root: Path
                 ) -> RunResult | None:
        """The job's RunResult, or None when it should be submitted again."""
        from distributed import KilledWorker

        try:
            payload = future.result()
        except KilledWorker as exc:
            if attempt <= self.retries:
                return None
            return broken(job.slug, f"worker died in each of {attempt} attempts "
                                    f"(KilledWorker: {exc})",
                          provenance={"executor": "dask", "dask_attempts": attempt})
        except Exception as exc:  # noqa: BLE001 - remote errors arrive as their own types
            return broken(job.slug, f"the Dask task failed on the worker: "
                                    f"{type(exc).__name__}: {exc}",
                          provenance={"executor": "dask", "dask_attempts": attempt})
        result = land(payload, job, work_root)
        result.provenance["dask_attempts"] = attempt
        stack = self.worker_stacks.get(payload.get("worker", ""))
        for problem in mismatches(self.builder_stack, stack) if stack else []:
            result.warnings.append(f"rendering stack differs: {problem}")
        return result

    def _give_up(self, stuck: list[tuple[Any, Job, int]], stall: float,
                 on_result: Callable[[RunResult], None]) -> None:
        workers = len(self.client.scheduler_info().get("workers", {}))
        for future, job, attempt in stuck:
            future.cancel()
            on_result(broken(job.slug, f"no result from the Dask cluster at {self.address} for "
                                       f"{stall:g} s ({workers} worker(s) connected)",
                             provenance={"executor": "dask", "dask_attempts": attempt}))

    def close(self) -> None:
        self.client.close()

    def __enter__(self) -> "DaskExecutor":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


__all__ = ["DaskExecutor", "run_remote", "land", "stack_versions", "mismatches"]
