"""Execute ONE recipe in the current process and capture what it draws.

This module holds the job description (`Job`), the result (`RunResult`) and `run_job`, which
the executor calls in a fresh child process (forked from a warm worker, spawned, or on a remote
Dask worker). Why a plain-data Job: the same job must run locally or on a cluster, so it carries
everything it needs, optionally the recipe's files as bytes.
"""
from __future__ import annotations

import dataclasses
import os
import platform
import runpy
import shutil
import sys
import tempfile
import time
import traceback
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any, Callable

from figfolio.recipe import Recipe
from figfolio.settings import Settings

SOURCE_DATE_EPOCH = 946684800  # 2000-01-01T00:00:00Z: a fixed date for every vector output


@dataclass
class Job:
    """Everything needed to run one recipe, picklable and free of live objects."""

    slug: str
    kind: str                      # "python" | "notebook" | "command"
    folder: str                    # absolute recipe folder on the builder's machine
    script: str                    # script path relative to the folder
    command: tuple[str, ...] = ()
    outputs: tuple[str, ...] = ()
    formats: tuple[str, ...] = ("png", "svg", "pdf")
    dpi: int = 150
    timeout: float = 120.0
    memory_mb: int = 4096
    max_output_kb: int = 1024
    max_pixels: int = 60_000_000
    network: bool = False
    expected_seconds: float = 0.0  # from the cache; the executor runs long jobs first
    bundle: dict[str, bytes] | None = None  # relative path -> bytes, for remote workers
    # poststep.PostSpec: a warm local worker stages the outputs (digests, thumbnails, audit,
    # data summaries) in a fresh fork right after the run. None: the builder does it.
    post: Any = None

    @classmethod
    def from_recipe(cls, recipe: Recipe, settings: Settings, expected_seconds: float = 0.0
                    ) -> "Job":
        return cls(slug=recipe.slug, kind=recipe.kind, folder=str(recipe.folder),
                   script=recipe.rel(recipe.script), command=recipe.command,
                   outputs=recipe.outputs, formats=recipe.formats, dpi=settings.dpi,
                   timeout=recipe.timeout, memory_mb=settings.memory_mb,
                   max_output_kb=settings.max_output_kb, max_pixels=settings.max_pixels,
                   network=settings.network, expected_seconds=expected_seconds)

    def with_bundle(self) -> "Job":
        """A copy that carries every file of the recipe folder as bytes (and no post step:
        a remote worker returns the raw outputs, and the builder stages them)."""
        root = Path(self.folder)
        files: dict[str, bytes] = {}
        for path in sorted(root.rglob("*")):
            rel = path.relative_to(root)
            if path.is_file() and not path.is_symlink() and "__pycache__" not in rel.parts \
                    and rel.as_posix() != "fingerprints.json":
                files[rel.as_posix()] = path.read_bytes()
        return dataclasses.replace(self, bundle=files, post=None)


@dataclass
class Output:
    """One file the recipe produced, in ``work/out/``."""

    name: str                      # e.g. "figure-1.png"
    format: str                    # "png" | "svg" | "pdf"
    figure: int | None             # figure number for captured figures, None for written files
    path: str                      # absolute path of the file

    def to_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)


@dataclass
class RunResult:
    """What happened when one recipe ran. Never an exception: failures are data."""

    slug: str
    status: str = "ok"             # "ok" | "broken"
    reason: str = ""               # one line for people: "timed out after 120 s", ...
    outputs: list[Output] = field(default_factory=list)
    facts: list[dict[str, Any]] = field(default_factory=list)
    stdout_tail: str = ""
    stderr_tail: str = ""
    traceback: str = ""
    duration: float = 0.0
    provenance: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    # When the output exceeded job.max_output_kb: its first KBs (the *_tail fields keep the
    # last KBs); empty when everything fit in the tail.
    stdout_head: str = ""
    stderr_head: str = ""
    # Set by a warm worker that already ran the post step: {"dir": staging folder, "record":
    # cache record}. Transport only: never part of to_dict(), so never stored in a record.
    staged: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        out = dataclasses.asdict(self)
        out.pop("staged", None)
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "RunResult":
        data = dict(data)
        data["outputs"] = [Output(**o) for o in data.get("outputs", [])]
        known = {f.name for f in dataclasses.fields(cls)}
        return cls(**{k: v for k, v in data.items() if k in known})


def broken(slug: str, reason: str, **extra: Any) -> RunResult:
    return RunResult(slug=slug, status="broken", reason=reason, **extra)


def now() -> float:
    return time.perf_counter()


def run_job(job: Job, work: Path) -> RunResult:
    """Run one recipe in THIS process (a disposable child) and describe what happened.

    Never raises for a recipe failure: errors, SystemExit, MemoryError and refused canvases
    all become a broken RunResult. The process may be left in any state; it dies afterwards.
    """
    start = now()
    result = RunResult(slug=job.slug)
    recipe_dir = Path(work) / "recipe"
    try:
        recipe_dir = prepare_scratch(job, Path(work))
        apply_environment(Path(work), recipe_dir)
        RUNNERS[job.kind](job, recipe_dir, Path(work) / "out", result)
    except BaseException as exc:  # noqa: BLE001 - failures are data, see docstring
        record_failure(result, exc, job, recipe_dir)
    result.duration = round(now() - start, 4)
    result.provenance = {**base_provenance(job), **result.provenance,
                         "run_seconds": result.duration}
    return result


def prepare_scratch(job: Job, work: Path) -> Path:
    """Copy the recipe into ``work/recipe``: real copies, so a write never reaches the source."""
    recipe_dir = work / "recipe"
    for sub in ("home", "tmp", "out", "mplconfig"):
        (work / sub).mkdir(parents=True, exist_ok=True)
    if job.bundle is not None:
        for rel, data in job.bundle.items():
            if _skipped(PurePosixPath(rel)) or ".." in PurePosixPath(rel).parts \
                    or PurePosixPath(rel).is_absolute():
                continue
            target = recipe_dir / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
    else:
        shutil.copytree(job.folder, recipe_dir, symlinks=False,
                        ignore=_ignore_for_copy(Path(job.folder)))
    recipe_dir.mkdir(parents=True, exist_ok=True)
    return recipe_dir


def _skipped(rel: PurePosixPath) -> bool:
    return "__pycache__" in rel.parts or rel.as_posix() == "fingerprints.json"


def _ignore_for_copy(root: Path):
    def ignore(directory: str, names: list[str]) -> set[str]:
        skip = {"__pycache__"}
        if Path(directory) == root:
            skip.add("fingerprints.json")
        return skip & set(names)
    return ignore


def environment(work: Path) -> dict[str, str]:
    """The variables every recipe runs with: private home and temp, fixed seeds and dates."""
    return {"HOME": str(work / "home"), "TMPDIR": str(work / "tmp"), "PYTHONHASHSEED": "0",
            "SOURCE_DATE_EPOCH": str(SOURCE_DATE_EPOCH), "MPLBACKEND": "Agg",
            "MPLCONFIGDIR": str(work / "mplconfig")}


def apply_environment(work: Path, recipe_dir: Path) -> None:
    """Set the environment and cwd of this (disposable) process for the recipe."""
    os.environ.update(environment(work))
    tempfile.tempdir = None  # re-read TMPDIR on next use
    os.chdir(recipe_dir)


def run_python(job: Job, recipe_dir: Path, out: Path, result: RunResult) -> None:
    """Run a script with runpy as ``__main__``, then save its open figures and written images."""
    from figfolio import runner_capture as capture

    script = recipe_dir / job.script
    before_files = capture.snapshot(recipe_dir)
    before_modules = set(sys.modules)
    capture.prepare_matplotlib(job.max_pixels)
    sys.argv = [str(script)]
    sys.path.insert(0, str(recipe_dir))
    recorder = capture.ImportRecorder(recipe_dir)
    recorder.install()
    try:
        runpy.run_path(str(script), run_name="__main__")
    except SystemExit as exc:
        if exc.code not in (None, 0):
            raise
    finally:
        recorder.remove()
    outputs, facts, warnings = capture.save_open_figures(out, job.formats, job.dpi)
    outputs += capture.collect_written(recipe_dir, before_files, out)
    imported = recorder.names | capture.top_level(set(sys.modules) - before_modules)
    result.provenance["packages"] = capture.package_versions(imported | {"matplotlib"})
    finish_outputs(result, outputs, facts, warnings)


def finish_outputs(result: RunResult, outputs: list[dict[str, Any]],
                   facts: list[dict[str, Any]], warnings: list[str]) -> None:
    """Store what a recipe produced; no image at all makes it broken."""
    result.outputs = [Output(**o) for o in outputs]
    result.facts = facts
    result.warnings += warnings
    if not outputs:
        result.status = "broken"
        result.reason = NO_FIGURE


def record_failure(result: RunResult, exc: BaseException, job: Job, recipe_dir: Path) -> None:
    """Turn an exception from the recipe into a broken result with a readable reason."""
    if isinstance(exc, MemoryError):
        relax_memory_limit()  # room to format the report; the process dies right after
    result.status = "broken"
    result.reason = failure_reason(exc, job)
    result.traceback = recipe_traceback(exc, recipe_dir)
    result.outputs = []


def failure_reason(exc: BaseException, job: Job) -> str:
    """One line for people: what went wrong, in the recipe's terms."""
    from figfolio.runner_capture import CanvasTooLarge

    if isinstance(exc, MemoryError):
        return f"ran out of memory (limit {job.memory_mb:,} MB)"
    if isinstance(exc, CanvasTooLarge):
        return str(exc)
    if isinstance(exc, SystemExit):
        return f"exited with status {exc.code}"
    if isinstance(exc, KeyboardInterrupt):
        return "interrupted"
    if isinstance(exc, RecipeFailure):
        return str(exc)
    message = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    if len(message) > 300:
        message = message[:297] + "..."
    return f"raised {type(exc).__name__}: {message}" if message else \
        f"raised {type(exc).__name__}"


def recipe_traceback(exc: BaseException, recipe_dir: Path) -> str:
    """The traceback from the recipe's first own frame on, last 40 lines, scratch path removed."""
    if isinstance(exc, RecipeFailure):
        return exc.details
    tb = exc.__traceback__
    prefix = str(recipe_dir) + os.sep
    walk = tb
    while walk is not None and not walk.tb_frame.f_code.co_filename.startswith(prefix):
        walk = walk.tb_next
    lines = "".join(traceback.format_exception(type(exc), exc, walk or tb)).splitlines()
    return "\n".join(lines[-TRACEBACK_LINES:]).replace(prefix, "")


def relax_memory_limit() -> None:
    """Raise the soft address-space limit to the hard one (see containment.memory_limit)."""
    try:
        import resource
        soft, hard = resource.getrlimit(resource.RLIMIT_AS)
        resource.setrlimit(resource.RLIMIT_AS, (hard, hard))
    except (ImportError, ValueError, OSError):
        pass


def base_provenance(job: Job) -> dict[str, Any]:
    """Facts about the machine and interpreter, recorded with every run."""
    import figfolio

    return {"python": platform.python_version(), "implementation":
            platform.python_implementation(), "figfolio": figfolio.__version__,
            "platform": platform.platform(), "machine": platform.machine(), "kind": job.kind,
            "hash_seed_fixed": sys.flags.hash_randomization == 0}


class RecipeFailure(Exception):
    """A failure already explained in figfolio's words (notebook cell error, missing program)."""

    def __init__(self, reason: str, details: str = "") -> None:
        super().__init__(reason)
        self.details = details


def _run_notebook(job: Job, recipe_dir: Path, out: Path, result: RunResult) -> None:
    from figfolio.runner_kinds import run_notebook
    run_notebook(job, recipe_dir, out, result)


def _run_command(job: Job, recipe_dir: Path, out: Path, result: RunResult) -> None:
    from figfolio.runner_kinds import run_command
    run_command(job, recipe_dir, out, result)


RUNNERS: dict[str, Callable[[Job, Path, Path, RunResult], None]] = {
    "python": run_python, "notebook": _run_notebook, "command": _run_command}
NO_FIGURE = "no figure: the script ended without an open figure or an image file"
TRACEBACK_LINES = 40


__all__ = ["Job", "Output", "RunResult", "broken", "run_job", "SOURCE_DATE_EPOCH",
           "RecipeFailure", "environment"]
