"""Run many recipes: warm fork-server workers locally, or one fresh process per job.

``LocalExecutor(jobs=N)`` starts N ``python -m figfolio.worker`` processes (see worker.py) and
feeds them jobs, longest ``expected_seconds`` first, each to whichever worker is free. One
builder thread per worker talks to it over its pipes. ``on_result`` is always called in the
thread that called ``run()`` (results pass through a queue), so callers need no locks.

A worker that dies or stops answering is killed with its recipe's process group and started
again; the job it held is reported broken. ``spawn=True`` (automatic when ``os.fork`` is
missing) starts one ``python -m figfolio.worker --one`` per job instead: slower, since every
recipe pays for importing the rendering stack, but the containment is the same.

``run_isolated(job, work)`` is the spawn path for one job; the Dask executor calls it on
remote workers.
"""
from __future__ import annotations

import os
import pickle
import queue
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path
from typing import Callable, Protocol

from figfolio.errors import ExecutorError
from figfolio.poststep import POST_SECONDS
from figfolio.runner import Job, RunResult, broken

# Beyond the recipe's own time-out: fork, kill and report take a moment; a worker that has not
# answered by then is hung and gets replaced.
GRACE_SECONDS = 30.0
STOP_SECONDS = 0.05
START_SECONDS = 120.0
# One BLAS/OpenMP thread per recipe: N workers already use the cores, and a thread count that
# follows the machine would make floating-point sums (and so pixels) machine-dependent.
THREADS_ENV = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


class Executor(Protocol):
    def run(self, jobs: list[Job], work_root: Path, on_result: Callable[[RunResult], None]
            ) -> None: ...

    def close(self) -> None: ...


def warm(executor: object, count: int) -> None:
    """Let ``executor`` start ``count`` workers now, ahead of ``run`` (a no-op for executors
    without a ``warm`` method). Why: the builder screens data while the workers import their
    stack, instead of the two waiting on each other."""
    start = getattr(executor, "warm", None)
    if callable(start):
        start(count)


class Lent:
    """Someone else's executor (the warm pool ``figfolio serve`` keeps between rebuilds):
    jobs run on it, and ``close`` leaves it running for the next pass."""

    def __init__(self, inner: Executor) -> None:
        self.inner = inner

    def warm(self, count: int) -> None:
        warm(self.inner, count)

    def run(self, jobs: list[Job], work_root: Path, on_result: Callable[[RunResult], None]
            ) -> None:
        self.inner.run(jobs, work_root, on_result)

    def close(self) -> None:
        """The owner closes the pool when it is done with it."""


def worker_env(state_dir: Path | None = None) -> dict[str, str]:
    """Environment of a worker process: fixed hash seed and headless matplotlib.

    ``state_dir`` (the build cache): where a worker may keep the table of installed
    distributions between builds (runner_capture.distribution_owners), which saves each
    worker a few tenths of a second at start.
    """
    env = dict(os.environ)
    env.update({"PYTHONHASHSEED": "0", "MPLBACKEND": "Agg", **THREADS_ENV})
    if state_dir is not None:
        from figfolio.runner_capture import OWNERS_CACHE_ENV
        env[OWNERS_CACHE_ENV] = str(Path(state_dir) / "distribution-owners.json")
    return env


def _kill_group(pid: int | None) -> None:
    if pid is None:
        return
    try:
        os.killpg(pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError, OSError):
        pass


def run_isolated(job: Job, work: Path) -> RunResult:
    """Run ``job`` in a fresh ``python -m figfolio.worker --one`` process, fully contained.

    Same limits as the fork server (own process group, memory limit, no network, output cap,
    time-out kill); outputs land in ``work/out/``. Never raises for a recipe failure.
    """
    from figfolio.containment import finish, supervise
    from figfolio.runner_capture import snapshot

    work = Path(work)
    work.mkdir(parents=True, exist_ok=True)
    (work / "job.pickle").write_bytes(pickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL))
    before = snapshot(job.folder)
    try:
        proc = subprocess.Popen([sys.executable, "-m", "figfolio.worker", "--one", str(work)],
                                stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, env=worker_env(),
                                start_new_session=True)
    except OSError as exc:
        return broken(job.slug, f"could not start a Python process: {exc}")
    assert proc.stdout is not None and proc.stderr is not None
    fds = {"stdout": os.dup(proc.stdout.fileno()), "stderr": os.dup(proc.stderr.fileno())}
    proc.stdout.close()
    proc.stderr.close()
    outcome = supervise(proc.pid, fds, job.timeout, job.max_output_kb * 1024)
    proc.returncode = outcome.status  # reaped by supervise; keep Popen from waiting again
    return finish(job, work, outcome, before)


class _Twin:
    """The builder's handle on a twin server (worker.serve_twin): the little of
    ``subprocess.Popen`` that ``_Worker`` uses, for a process that is not the builder's child
    (its parent, the worker that forked it, reaps it).

    Its pid arrives with its 'ready' frame; until then it counts as running (if it never
    comes up, reading its pipe ends in EOF). Its exit status is unknown to the builder:
    ``poll`` says 0 once it has gone, ``wait`` None.
    """

    def __init__(self, to_twin: int, from_twin: int) -> None:
        self.stdin = os.fdopen(to_twin, "wb", buffering=0)
        self.stdout = os.fdopen(from_twin, "rb", buffering=0)
        self.pid: int | None = None

    def _gone(self, seconds: float) -> bool:
        """True once the twin has ended, waiting up to ``seconds``."""
        if self.pid is None:
            return False
        try:
            handle = os.pidfd_open(self.pid)  # type: ignore[attr-defined]
        except ProcessLookupError:
            return True
        except (AttributeError, OSError):
            until = time.monotonic() + seconds
            while True:
                try:
                    os.kill(self.pid, 0)
                except ProcessLookupError:
                    return True
                except OSError:
                    return False
                if time.monotonic() >= until:
                    return False
                time.sleep(0.005)
        try:
            import select
            return bool(select.select([handle], [], [], seconds)[0])
        finally:
            os.close(handle)

    def poll(self) -> int | None:
        return 0 if self._gone(0.0) else None

    def wait(self, timeout: float | None = None) -> None:
        if not self._gone(START_SECONDS if timeout is None else timeout):
            raise subprocess.TimeoutExpired("figfolio twin worker", timeout or START_SECONDS)


class _Worker:
    """One warm worker process and the pipes to it; used by one builder thread only."""

    def __init__(self, preload: tuple[str, ...] = (), state_dir: Path | None = None) -> None:
        self.proc: subprocess.Popen[bytes] | _Twin | None = None
        self.child: int | None = None
        self.preload = preload
        self.state_dir = state_dir
        self.ready = False

    def launch(self, twins: "list[_Worker] | None" = None) -> None:
        """Start the worker process without waiting for it to be warm (see ``start``).

        ``twins``: other workers that this one forks once it is warm (``worker.serve_twin``)
        instead of each starting and warming a process of its own.
        """
        args = ["--preload", ",".join(self.preload)] if self.preload else []
        passed: list[int] = []
        pairs = []
        for twin in twins or []:
            job_r, job_w = os.pipe()
            result_r, result_w = os.pipe()
            twin.proc, twin.ready = _Twin(job_w, result_r), False
            passed += [job_r, result_w]
            pairs.append(f"{job_r}:{result_w}")
        if pairs:
            args += ["--twins", ",".join(pairs)]
        self.ready = False
        try:
            self.proc = subprocess.Popen([sys.executable, "-m", "figfolio.worker", *args],
                                         stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                         stderr=subprocess.DEVNULL, pass_fds=passed,
                                         env=worker_env(self.state_dir), start_new_session=True)
        finally:
            for fd in passed:  # the worker holds them now (or nobody does: the twins see EOF)
                os.close(fd)

    def start(self) -> None:
        """Launch the worker unless it is running, and wait for its 'ready'."""
        from figfolio.worker import ProtocolEOF, recv_frame

        if self.proc is None or self.proc.poll() is not None:
            self.launch()
        if self.ready:
            return
        assert self.proc is not None and self.proc.stdout is not None
        try:
            kind, info = recv_frame(self.proc.stdout.fileno(), time.monotonic() + START_SECONDS)
        except ProtocolEOF:
            if not isinstance(self.proc, _Twin):
                raise
            self.stop()  # the twin never came up: start a worker of its own
            self.start()
            return
        if kind != "ready":
            raise ExecutorError(f"a figfolio worker answered {kind!r} instead of 'ready'")
        self.ready = True
        self.warm_seconds = float(info.get("warm_seconds", 0.0))
        if isinstance(self.proc, _Twin):
            self.proc.pid = int(info["pid"])

    def run(self, job: Job, work: Path) -> RunResult:
        """Send one job and wait for its result; a dead or hung worker is replaced."""
        from figfolio.worker import ProtocolEOF, recv_frame, send_frame

        if self.proc is None or self.proc.poll() is not None or not self.ready:
            self.start()
        assert self.proc is not None and self.proc.stdin and self.proc.stdout
        deadline = time.monotonic() + job.timeout + GRACE_SECONDS
        self.child = None
        try:
            send_frame(self.proc.stdin.fileno(), (job, str(work)))
            while True:
                kind, payload = recv_frame(self.proc.stdout.fileno(), deadline)
                if kind == "started":
                    self.child = int(payload)
                elif kind == "posting":  # the recipe is done; its post step has its own clock
                    self.child = int(payload)
                    deadline = time.monotonic() + POST_SECONDS + GRACE_SECONDS
                elif kind == "result":
                    self.child = None
                    return RunResult.from_dict(payload)
        except (ProtocolEOF, TimeoutError, OSError, pickle.UnpicklingError, EOFError) as exc:
            return broken(job.slug, self._lost(exc))

    def _lost(self, exc: BaseException) -> str:
        """Kill the worker and its recipe, say what happened; the next job restarts it."""
        hung = isinstance(exc, TimeoutError)
        _kill_group(self.child)
        code = self.stop()
        if hung:
            return "the figfolio worker stopped answering while running this recipe; " \
                   "it was restarted"
        how = f" (signal {signal.Signals(-code).name})" if code is not None and code < 0 \
            else f" (exit status {code})" if code is not None else ""
        return f"the figfolio worker process died{how} while running this recipe; " \
               "it was restarted"

    def stop(self) -> int | None:
        """End the worker (closing stdin first, so it leaves on its own when it can)."""
        if self.proc is None:
            return None
        proc, self.proc = self.proc, None
        self.ready = False
        for stream in (proc.stdin, proc.stdout):
            try:
                if stream:
                    stream.close()
            except OSError:
                pass
        try:
            # An idle worker holds nothing worth a clean exit, and tearing down an interpreter
            # with the rendering stack loaded takes 0.2 s: wait briefly, then kill it.
            return proc.wait(timeout=STOP_SECONDS)
        except subprocess.TimeoutExpired:
            _kill_group(proc.pid)
            try:
                return proc.wait(timeout=GRACE_SECONDS)
            except subprocess.TimeoutExpired:  # a twin that outlives SIGKILL: not ours to reap
                return None


class LocalExecutor:
    """N warm workers on this machine (or one process per job with ``spawn=True``).

    ``preload``: modules the recipes about to run import (e.g. ``scipy.cluster.hierarchy``);
    each worker imports them once while warming up instead of every recipe paying for it.
    Only packages in ``worker.PRELOADABLE`` are honoured.
    """

    def __init__(self, jobs: int = 1, spawn: bool | None = None,
                 preload: tuple[str, ...] | list[str] = (), state_dir: Path | None = None
                 ) -> None:
        self.jobs = max(1, int(jobs))
        self.spawn = (not hasattr(os, "fork")) if spawn is None else spawn
        self.preload = tuple(preload)
        self.state_dir = state_dir
        self._workers: list[_Worker] = []

    def _ensure_workers(self, count: int) -> list[_Worker]:
        """The first ``count`` workers, made (not started) where missing."""
        while len(self._workers) < count:
            self._workers.append(_Worker(self.preload, self.state_dir))
        return self._workers[:count]

    def warm(self, count: int) -> None:
        """Start up to ``count`` workers now; ``run`` waits for their 'ready' when it needs them.

        Only one process is started here (a few milliseconds); it imports the rendering
        stack while the caller does other work, then forks the other idle workers as its
        twins (``worker.serve_twin``), so the stack is imported once, not once per worker.
        """
        if self.spawn:
            return
        idle = [w for w in self._ensure_workers(min(self.jobs, max(count, 0)))
                if w.proc is None]
        if idle:
            try:
                idle[0].launch(twins=idle[1:])
            except OSError:  # run() starts them again and reports the failure per job
                for worker in idle:
                    worker.proc = None

    def run(self, jobs: list[Job], work_root: Path, on_result: Callable[[RunResult], None]
            ) -> None:
        """Run every job; ``on_result`` is called in this thread, once per job."""
        work_root = Path(work_root)
        work_root.mkdir(parents=True, exist_ok=True)
        todo: queue.Queue[tuple[Job, Path]] = queue.Queue()
        for job, work in _plan(jobs, work_root):
            todo.put((job, work))
        done: queue.Queue[RunResult] = queue.Queue()
        count = min(self.jobs, len(jobs))
        self._ensure_workers(count)
        threads = [threading.Thread(target=self._drain, args=(todo, done, self._workers[i]),
                                    name=f"figfolio-worker-{i}", daemon=True)
                   for i in range(count)]
        for thread in threads:
            thread.start()
        try:
            for _ in range(len(jobs)):
                on_result(done.get())
        except BaseException:  # Ctrl-C or a failing callback: stop everything now
            _empty(todo)
            self._abort(count)
            raise
        finally:
            for thread in threads:
                thread.join()

    def _drain(self, todo: queue.Queue[tuple[Job, Path]], done: queue.Queue[RunResult],
               worker: _Worker) -> None:
        while True:
            try:
                job, work = todo.get_nowait()
            except queue.Empty:
                return
            done.put(self._one(job, work, worker))

    def _one(self, job: Job, work: Path, worker: _Worker) -> RunResult:
        try:
            return run_isolated(job, work) if self.spawn else worker.run(job, work)
        except Exception as exc:  # a failure to start a worker must not hang run()
            worker.stop()
            return broken(job.slug, f"figfolio could not run this recipe: "
                                    f"{type(exc).__name__}: {exc}")

    def _abort(self, count: int) -> None:
        """Kill running recipes and their workers so the builder threads return at once."""
        for worker in reversed(self._workers[:count]):
            _kill_group(worker.child)
            worker.stop()

    def close(self) -> None:
        """Stop every worker, twins before the worker that forked them (it waits for them)."""
        for worker in reversed(self._workers):
            worker.stop()
        self._workers = []

    def __enter__(self) -> "LocalExecutor":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _empty(todo: queue.Queue[tuple[Job, Path]]) -> None:
    while True:
        try:
            todo.get_nowait()
        except queue.Empty:
            return


def _plan(jobs: list[Job], work_root: Path) -> list[tuple[Job, Path]]:
    """Longest expected first; each job gets a fresh ``work_root/<slug>`` (``<slug>~2``...)."""
    ordered = sorted(jobs, key=lambda j: -j.expected_seconds)
    planned: list[tuple[Job, Path]] = []
    for job in ordered:
        work = work_root / job.slug
        k = 2
        while work.exists() or any(work == w for _, w in planned):
            work = work_root / f"{job.slug}~{k}"
            k += 1
        planned.append((job, work))
    return planned


def make_executor(settings: object, name: str | None = None, scheduler: str | None = None,
                  jobs: int | None = None, preload: tuple[str, ...] | list[str] = ()
                  ) -> Executor:
    """The executor the settings (or the command line) ask for."""
    chosen = name or getattr(settings, "executor", "local") or "local"
    if chosen == "local":
        count = jobs or getattr(settings, "job_count", None) or (os.cpu_count() or 1)
        state = getattr(settings, "cache_path", None)
        return LocalExecutor(jobs=count, preload=preload,
                             state_dir=Path(state) if state is not None else None)
    if chosen == "dask":
        address = scheduler or getattr(settings, "scheduler", "") or ""
        try:
            from figfolio.dask_executor import DaskExecutor  # type: ignore[import-not-found]
        except ImportError as exc:
            raise ExecutorError(f"the Dask executor is not available ({exc})", key="executor",
                                hint="install figfolio[dask], or use executor = \"local\"") from exc
        if not address:
            raise ExecutorError("the Dask executor needs a scheduler address", key="scheduler",
                                hint="pass --scheduler tcp://HOST:8786 or set scheduler in the "
                                     "settings")
        return DaskExecutor(address)
    raise ExecutorError(f"unknown executor '{chosen}'", key="executor",
                        hint="use \"local\" or \"dask\"")

