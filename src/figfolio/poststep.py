"""After a recipe ran: stage its outputs and derive digests, thumbnails, audit and data summaries.

Why its own module: the same step runs in two places. Normally a warm worker forks a fresh child
for it right after the recipe's process ended (``run_forked``), so the work is spread over the
cores instead of queueing in the builder's main thread. When a result comes back from spawn
mode or a Dask cluster, the builder runs ``stage`` itself. Both paths call the same function on
the same bytes, so the cache receives identical records and digests either way.

Why a fresh fork and not the recipe's own process: the recipe may have changed global state
(numpy error settings, Pillow plugins, monkey-patched functions) that must not reach the
fingerprints; the worker's parent process never ran recipe code.
"""
from __future__ import annotations

import json
import os
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

RECORD_FILE = "post-record.json"
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


# --- in a warm worker: one fresh fork per recipe -----------------------------------------

def run_forked(result: dict[str, Any], spec: PostSpec, work: Path, on_start: Any,
               close: list[int]) -> dict[str, Any] | None:
    """Fork a clean child of the warm worker that stages ``result``; None when it failed.

    The child writes ``work/post-record.json`` (atomically) and exits; the parent waits at most
    ``POST_SECONDS``. A failure here is not the recipe's: the builder then stages the result
    itself and reports whatever went wrong in its own words.
    """
    staging = work / STAGE_DIR
    record_path = work / RECORD_FILE
    parent = os.getpid()
    pid = os.fork()
    if pid == 0:
        _child(result, spec, staging, record_path, close, parent)
    on_start(pid)
    if not _wait(pid, POST_SECONDS):
        return None
    try:
        record = json.loads(record_path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return {"dir": str(staging), "record": record}


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


def _child(result: dict[str, Any], spec: PostSpec, staging: Path, record_path: Path,
           close: list[int], parent: int) -> None:
    """In the forked child: own session, stage, write the record, _exit without cleanup.

    It dies with its worker (PR_SET_PDEATHSIG): a killed build must not leave a post step
    writing into the cache's staging area after the next build cleaned it.
    """
    code = 1
    try:
        os.setsid()
        from figfolio.containment import die_with_parent
        die_with_parent()
        if os.getppid() != parent:  # the worker died before the line above took effect
            os._exit(1)
        for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGPIPE):
            signal.signal(sig, signal.SIG_DFL)
        for fd in close:
            os.close(fd)
        record = stage(RunResult.from_dict(result), spec.recipe, spec.settings, staging,
                       spec.data)
        from figfolio.runner_capture import plain
        tmp = record_path.with_name(f".tmp-{record_path.name}")
        tmp.write_text(json.dumps(record, default=plain), encoding="utf-8")
        os.replace(tmp, record_path)
        code = 0
    except BaseException:  # noqa: BLE001 - the builder falls back to staging it itself
        traceback.print_exc()
    finally:
        os._exit(code)
