"""After a recipe ran: stage its outputs and derive digests, thumbnails, audit and data summaries.

Why its own module: the same step runs in two places. Normally each warm worker hands its
results to its ``PostServer``, a clean fork of the worker made before any staging, so the work
is spread over the cores instead of queueing in the builder's main thread. When a result comes
back from spawn mode or a Dask cluster, the builder runs ``stage`` itself. Both paths call the
same function on the same bytes, so the cache receives identical records and digests either way.

Why not in the recipe's own process: the recipe may have changed global state (numpy error
settings, Pillow plugins, monkey-patched functions) that must not reach the fingerprints; the
worker the server is forked from never ran recipe code.
"""
from __future__ import annotations

import json
import os
import pickle
import signal
import time
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from figfolio.errors import FigfolioError
from figfolio.recipe import Recipe
from figfolio.runner import Output, RunResult
from figfolio.settings import Settings

STAGE_DIR = "stage"
POST_SECONDS = 300.0  # digests, thumbnails and data summaries of one recipe; generous


@dataclass(frozen=True)
class PostSpec:
    """What the post step needs besides the run result: the recipe and the catalogue settings,
    and the recipe's data description when the builder already made it (``describe_data``,
    right after the data screen read the same files); None: the post step makes it.

    All plain data, so the spec travels in the job frame to the worker.
    """

    recipe: Recipe
    settings: Settings
    data: list[dict[str, Any]] | None = None


def describe_data(recipe: Recipe, settings: Settings) -> list[dict[str, Any]]:
    """Name, size and (when the data is published) summary of each of the recipe's data files."""
    from figfolio import data

    described = []
    for path in recipe.data:
        desc = data.describe_file(path, recipe, settings) if recipe.publishes_data else None
        described.append({"name": recipe.rel(path), "size": path.stat().st_size,
                          "description": desc})
    return described


def _place(result: RunResult, staging: Path) -> list[Output]:
    """Hard-link (or copy) each output into ``staging``; the originals stay for a fallback."""
    placed: list[Output] = []
    for out in result.outputs:
        target = staging / out.name
        try:
            os.link(out.path, target)
        except OSError:
            import shutil
            shutil.copyfile(out.path, target)
        placed.append(Output(out.name, out.format, out.figure, str(target)))
    return placed


def _image_facts(outputs: list[Output], staging: Path, result: RunResult, max_pixels: int
                 ) -> dict[str, dict[str, Any]]:
    """Digests of every output; thumbnails of the first PNG. Unreadable PNG -> broken."""
    from figfolio import fingerprint

    images: dict[str, dict[str, Any]] = {}
    thumbs_done = False
    for out in outputs:
        path = Path(out.path)
        try:
            if out.format == "png":
                facts = fingerprint.analyse_png(path, None if thumbs_done else staging / "thumbs",
                                                max_pixels=max_pixels, keep_decoded=True)
                thumbs = {str(k): Path(v).relative_to(staging).as_posix()
                          for k, v in facts.thumbs.items()}
                thumbs_done = thumbs_done or bool(thumbs)
                images[out.name] = {"format": "png", "exact": facts.exact,
                                    "perceptual": facts.perceptual, "width": facts.width,
                                    "height": facts.height, "thumbs": thumbs}
            else:
                images[out.name] = {"format": out.format,
                                    "exact": fingerprint.vector_digest(path)}
        except FigfolioError as exc:
            result.status = "broken"
            result.reason = f"{out.name}: {exc.message}"
    return images


def stage(result: RunResult, recipe: Recipe, settings: Settings, staging: Path,
          described: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """Place a run's outputs in ``staging`` and return the cache record describing them.

    ``result`` is updated in place: its outputs point into ``staging``, and it becomes broken
    when an output image cannot be read. The record's ``timings`` say where the time went.
    ``described``: the recipe's data description if already made (``describe_data``).
    """
    from figfolio import audit, fingerprint

    staging.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    result.outputs = _place(result, staging)
    try:
        images = _image_facts(result.outputs, staging, result, settings.max_pixels)
        t1 = time.perf_counter()
        audit_dir = staging / "audit"
        audit_dir.mkdir(exist_ok=True)
        findings = audit.audit_recipe(recipe, settings, [o.to_dict() for o in result.outputs],
                                      result.facts, audit_dir)
    finally:
        fingerprint.forget_decoded()
    t2 = time.perf_counter()
    findings["images"] = {fig: {kind: Path(p).relative_to(staging).as_posix()
                                for kind, p in kinds.items()}
                          for fig, kinds in findings.get("images", {}).items()}
    if described is None:
        described = describe_data(recipe, settings)
    run = result.to_dict()
    for out in run["outputs"]:
        out["path"] = out["name"]
    timings = {"digests": t1 - t0, "audit": t2 - t1, "data": time.perf_counter() - t2}
    return {"run": run, "images": images, "audit": findings, "data": described,
            "timings": timings}


# --- in a warm worker: one clean fork that stages every result ----------------------------

class PostServer:
    """A fork of the warm worker, made before it stages anything, that stages results one
    after another (``stage``) until the worker closes it.

    Why one process and not a fork per result: the fork, the copy-on-write of the pages it
    touches and its exit cost about 13 ms a recipe, for a step that runs only figfolio's own
    code on files. What keeps the old guarantee: the server is forked from the worker, which
    never runs recipe code, so nothing a recipe did reaches the digests. A server that fails,
    dies or overruns ``POST_SECONDS`` is killed; that result is staged by the builder, and the
    next result gets a new server.
    """

    def __init__(self, close: list[int]) -> None:
        self.close_in_child = close
        self.pid: int | None = None
        self.to_server = self.from_server = -1

    def stage(self, result: dict[str, Any], spec: PostSpec, work: Path, on_start: Any
              ) -> dict[str, Any] | None:
        """Stage ``result`` in the server: {"dir": staging folder, "record"}; None on failure."""
        from figfolio.worker import ProtocolEOF, recv_frame, send_frame

        try:
            on_start(self.pid if self.pid is not None else self._start())
            send_frame(self.to_server, (result, spec, str(work)))
            return recv_frame(self.from_server, time.monotonic() + POST_SECONDS)
        except (ProtocolEOF, TimeoutError, OSError, EOFError, ValueError, TypeError,
                pickle.UnpicklingError):
            self.stop()
            return None

    def _start(self) -> int:
        jobs_r, jobs_w = os.pipe()
        back_r, back_w = os.pipe()
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:
            code = 1
            try:
                os.setsid()
                from figfolio.containment import die_with_parent
                die_with_parent()
                if os.getppid() != parent:
                    os._exit(1)
                for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGPIPE):
                    signal.signal(sig, signal.SIG_DFL)
                for fd in (*self.close_in_child, jobs_w, back_r):
                    os.close(fd)
                code = _serve(jobs_r, back_w)
            except BaseException:  # noqa: BLE001 - the worker sees the pipe close
                traceback.print_exc()
            finally:
                os._exit(code)
        os.close(jobs_r)
        os.close(back_w)
        self.pid, self.to_server, self.from_server = pid, jobs_w, back_r
        return pid

    def fds(self) -> list[int]:
        """The worker's ends of the server's pipes: a recipe's process must close them, or it
        could talk to the server in the worker's name."""
        return [fd for fd in (self.to_server, self.from_server) if fd >= 0]

    def stop(self) -> None:
        """Close the pipes, so the server leaves; kill it if it has not after a moment."""
        if self.pid is None:
            return
        for fd in (self.to_server, self.from_server):
            try:
                os.close(fd)
            except OSError:
                pass
        _wait(self.pid, 1.0)  # reaps it, killing it at the deadline
        self.pid, self.to_server, self.from_server = None, -1, -1


def _serve(jobs_in: int, answers_out: int) -> int:
    """The server's loop: stage each (result, spec, work) received; answer with the staged
    folder and the record (through JSON, as the cache will store it), or None."""
    from figfolio.runner_capture import plain
    from figfolio.worker import ProtocolEOF, recv_frame, send_frame

    while True:
        try:
            result, spec, work = recv_frame(jobs_in)
        except ProtocolEOF:
            return 0
        staging = Path(work) / STAGE_DIR
        try:
            record = stage(RunResult.from_dict(result), spec.recipe, spec.settings, staging,
                           spec.data)
            answer: dict[str, Any] | None = {
                "dir": str(staging), "record": json.loads(json.dumps(record, default=plain))}
        except Exception:  # noqa: BLE001 - the builder stages this one itself
            traceback.print_exc()
            answer = None
        send_frame(answers_out, answer)


def _wait(pid: int, seconds: float) -> bool:
    """Wait for the post child; kill it at the deadline. True when it exited with status 0."""
    import select

    try:
        handle: int | None = os.pidfd_open(pid)  # type: ignore[attr-defined]
    except (AttributeError, OSError):
        handle = None
    deadline = time.monotonic() + seconds
    try:
        while True:
            got, status = os.waitpid(pid, os.WNOHANG)
            if got == pid:
                return os.WIFEXITED(status) and os.WEXITSTATUS(status) == 0
            left = deadline - time.monotonic()
            if left <= 0:
                try:
                    os.killpg(pid, signal.SIGKILL)
                except OSError:
                    pass
                os.waitpid(pid, 0)
                return False
            if handle is not None:
                select.select([handle], [], [], left)
            else:
                time.sleep(min(left, 0.005))
    finally:
        if handle is not None:
            os.close(handle)
