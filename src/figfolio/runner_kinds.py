"""The two non-script recipe kinds: Jupyter notebooks and external commands (R, ...).

Both run in the recipe's disposable child process after ``runner.run_job`` has made the
scratch copy and set the environment; both fill the same RunResult as a Python script.
"""
from __future__ import annotations

import base64
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

from figfolio.runner import Job, RecipeFailure, RunResult, finish_outputs

KERNEL_NAME = "python3"
KERNEL_PID_FILE = "kernel.pid"
ANSI = re.compile(r"\x1b\[[0-9;]*[A-Za-z]")
# What to install when a command recipe's program is missing (Debian package names).
INSTALL_HINTS = {"Rscript": "apt-get install r-base-core", "R": "apt-get install r-base-core",
                 "python3": "apt-get install python3", "julia": "see https://julialang.org",
                 "gnuplot": "apt-get install gnuplot", "octave": "apt-get install octave"}
VERSION_COMMAND = {"Rscript": ["R", "--version"]}


# --- notebooks ----------------------------------------------------------------------------

def _setup_source(job: Job, work: Path) -> str:
    """The cell figfolio runs first in the kernel: Agg, the canvas cap, and the memory limit.

    The memory limit is set here, inside the kernel, because the kernel is a new process whose
    own threads and libraries need room that the forked recipe process's limit does not allow.
    """
    pid_file = str(work / KERNEL_PID_FILE)
    return ("import os as _ff_os, matplotlib as _ff_mpl\n"
            "_ff_mpl.use('Agg')\n"
            "import figfolio.runner_capture as _ff\n"
            f"open({pid_file!r}, 'w').write(str(_ff_os.getpid()))\n"
            "import figfolio.containment as _ff_limits\n"
            f"_ff_limits.set_memory_limit({job.memory_mb})\n"
            f"_ff_state = _ff.kernel_setup({job.max_pixels}, {str(work / 'recipe')!r})\n")


def _finish_source(job: Job, out: Path, record: Path) -> str:
    return (f"_ff.kernel_finish({str(out)!r}, {list(job.formats)!r}, {job.dpi}, "
            f"{str(record)!r}, _ff_state)\n")


def load_notebook(path: Path) -> Any:
    """Read and validate the notebook; a bad one is a RecipeFailure with nbformat's words.

    Validation comes before conversion: converting a malformed notebook fails with a Python
    error that says nothing useful, whereas the schema names the bad field.
    """
    import nbformat

    try:
        raw = json.loads(path.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError) as exc:
        raise RecipeFailure(f"not a readable notebook: not JSON ({exc})") from None
    if not isinstance(raw, dict) or not isinstance(raw.get("nbformat"), int):
        raise RecipeFailure("invalid notebook: no 'nbformat' version number at the top")
    problem = schema_problem(raw)
    if problem:
        raise RecipeFailure(f"invalid notebook: {problem}")
    try:
        nb = nbformat.reads(json.dumps(raw), as_version=4)
        nbformat.validate(nb)
    except nbformat.ValidationError as exc:
        text = str(getattr(exc, "message", exc))
        raise RecipeFailure(f"invalid notebook: {text.splitlines()[0][:300]}", str(exc)) \
            from None
    except Exception as exc:  # nbformat could not convert an old or odd notebook
        raise RecipeFailure(f"not a readable notebook: {exc}".splitlines()[0]) from None
    return nb


def schema_problem(raw: dict[str, Any]) -> str | None:
    """First message of nbformat's JSON-schema validator for the notebook's own version.

    Why the validator and not nbformat.validate(): the latter crashes with a TypeError on some
    malformed notebooks (e.g. "cells": 5) instead of naming the bad field.
    """
    from nbformat.validator import get_validator

    try:
        validator = get_validator(version=raw["nbformat"],
                                  version_minor=raw.get("nbformat_minor", 0))
    except ImportError:
        return f"nbformat version {raw['nbformat']} is not known to this nbformat"
    if validator is None:
        return None
    for error in validator.iter_errors(raw):
        return str(error.message).splitlines()[0][:300]
    return None


def run_notebook(job: Job, recipe_dir: Path, out: Path, result: RunResult) -> None:
    """Execute with a real kernel; keep display images and the figures left open."""
    import nbformat
    from nbclient import NotebookClient
    from nbclient.exceptions import CellExecutionError

    work = recipe_dir.parent
    nb = load_notebook(recipe_dir / job.script)
    record = work / "notebook-result.json"
    nb.cells.insert(0, nbformat.v4.new_code_cell(_setup_source(job, work)))
    nb.cells.append(nbformat.v4.new_code_cell(_finish_source(job, out, record)))
    client = NotebookClient(nb, timeout=int(max(1, job.timeout)), kernel_name=KERNEL_NAME,
                            resources={"metadata": {"path": str(recipe_dir)}},
                            allow_errors=False)
    try:
        client.execute()
    except CellExecutionError as exc:
        raise _cell_failure(nb, exc) from None
    outputs = display_outputs(nb.cells[1:-1], out)
    data = json.loads(record.read_text(encoding="utf-8"))
    result.provenance["kernel"] = KERNEL_NAME
    result.provenance["packages"] = data.get("packages", {})
    language = nb.metadata.get("language_info", {})
    if language.get("version"):
        result.provenance["kernel_language"] = f"{language.get('name')} {language['version']}"
    finish_outputs(result, outputs + data["outputs"], data["facts"], data["warnings"])


def _cell_failure(nb: Any, exc: Exception) -> RecipeFailure:
    """'cell 3 raised ZeroDivisionError: division by zero', counting the user's cells from 1."""
    index = next((i for i, cell in enumerate(nb.cells) if any(
        o.get("output_type") == "error" for o in cell.get("outputs", []))), None)
    where = f"cell {index}" if index else "a cell"  # index 0 is figfolio's setup cell
    ename = getattr(exc, "ename", type(exc).__name__)
    evalue = str(getattr(exc, "evalue", "")).strip().splitlines()
    message = f"{where} raised {ename}" + (f": {evalue[0][:300]}" if evalue else "")
    details = ANSI.sub("", str(exc)).strip().splitlines()
    return RecipeFailure(message, "\n".join(details[-40:]))


def display_outputs(cells: list[Any], out: Path) -> list[dict[str, Any]]:
    """PNG and SVG display outputs as ``display-<k>.png|svg`` (k from 1 in notebook order)."""
    outputs: list[dict[str, Any]] = []
    k = 0
    for cell in cells:
        for item in cell.get("outputs", []):
            data = item.get("data", {}) if item.get("output_type") in (
                "display_data", "execute_result") else {}
            images = [(fmt, data[mime]) for fmt, mime in (("png", "image/png"),
                                                           ("svg", "image/svg+xml"))
                      if mime in data]
            if not images:
                continue
            k += 1
            for fmt, payload in images:
                outputs.append(_write_display(out, k, fmt, payload))
    return outputs


def _write_display(out: Path, k: int, fmt: str, payload: Any) -> dict[str, Any]:
    text = "".join(payload) if isinstance(payload, list) else str(payload)
    data = base64.b64decode(text) if fmt == "png" else text.encode("utf-8")
    out.mkdir(parents=True, exist_ok=True)
    path = out / f"display-{k}.{fmt}"
    tmp = path.with_name(f".tmp-{path.name}")
    tmp.write_bytes(data)
    os.replace(tmp, path)
    return {"name": path.name, "format": fmt, "figure": None, "path": str(path)}


# --- commands -----------------------------------------------------------------------------

def command_path() -> str:
    """PATH for commands: this Python's bin folder first, so 'python3' means the catalogue's."""
    here = str(Path(sys.executable).parent)
    return os.pathsep.join([here, os.environ.get("PATH", os.defpath)])


def program_version(program: str, path: str) -> str:
    """First line of '<program> --version' ('R --version' for Rscript), or '' if it fails."""
    argv = VERSION_COMMAND.get(program, [path, "--version"])
    exe = shutil.which(argv[0], path=command_path()) or argv[0]
    try:
        done = subprocess.run([exe, *argv[1:]], capture_output=True, timeout=20,
                              stdin=subprocess.DEVNULL)
    except (OSError, subprocess.SubprocessError):
        return ""
    for stream in (done.stdout, done.stderr):
        lines = stream.decode("utf-8", "replace").strip().splitlines()
        if lines:
            return lines[0].strip()
    return ""


def run_command(job: Job, recipe_dir: Path, out: Path, result: RunResult) -> None:
    """Run the program in the recipe folder, then collect the outputs it declares."""
    from figfolio.runner_capture import copy_output, snapshot

    program = job.command[0]
    os.environ["PATH"] = command_path()
    exe = shutil.which(program)
    if exe is None:
        hint = INSTALL_HINTS.get(program)
        how = f"install it (e.g. {hint})" if hint else "install it and make sure it is on PATH"
        raise RecipeFailure(f"program '{program}' not found: {how}")
    result.provenance["program"] = {"name": program, "path": exe,
                                    "version": program_version(program, exe)}
    before = snapshot(recipe_dir)
    session = _r_session_file(program, recipe_dir.parent)
    sys.stdout.flush()
    sys.stderr.flush()
    done = subprocess.run([exe, *job.command[1:]], cwd=recipe_dir, stdin=subprocess.DEVNULL)
    if session is not None:
        result.provenance["r_session"] = _read_r_session(session)
    if done.returncode != 0:
        raise RecipeFailure(f"'{' '.join(job.command)}' exited with status {done.returncode}")
    after = snapshot(recipe_dir)
    outputs = []
    for rel in job.outputs:
        if rel in after and after[rel] != before.get(rel):
            outputs.append(copy_output(recipe_dir / rel, out, rel))
        else:
            result.warnings.append(f"declared output '{rel}' was not produced")
    finish_outputs(result, outputs, [], [])


R_PROFILE = r"""# figfolio: record the R session of a command recipe (attached and loaded packages).
local({
  out <- Sys.getenv("FIGFOLIO_R_SESSION")
  if (nzchar(out)) {
    invisible(reg.finalizer(globalenv(), function(e) {
      si <- utils::sessionInfo()
      attached <- names(si$otherPkgs)
      loaded <- names(si$loadedOnly)
      ver <- function(p) as.character(utils::packageVersion(p))
      lines <- c(paste0("R\t", si$R.version$version.string),
                 paste0("base\t", si$basePkgs),
                 if (length(attached)) paste0("attached\t", attached, "\t", vapply(attached, ver, "")),
                 if (length(loaded)) paste0("loaded\t", loaded, "\t", vapply(loaded, ver, "")))
      writeLines(lines, out)
    }, onexit = TRUE))
  }
})
"""


def _r_session_file(program: str, work: Path) -> Path | None:
    """For R programs: a user profile that writes sessionInfo() at exit; None otherwise.

    Why a profile and not a wrapper: the recipe's own command line stays exactly what a user
    types by hand, and the profile records what the script attached, however it ended.
    """
    if program not in ("Rscript", "R"):
        return None
    profile = work / "figfolio.Rprofile"
    profile.write_text(R_PROFILE, encoding="utf-8")
    target = work / "r-session.tsv"
    os.environ["R_PROFILE_USER"] = str(profile)
    os.environ["FIGFOLIO_R_SESSION"] = str(target)
    return target


def _read_r_session(path: Path) -> dict[str, Any]:
    """Parse the tab-separated session file into {"R": ..., "base": [...], "attached": {...}}."""
    out: dict[str, Any] = {"base": [], "attached": {}, "loaded": {}}
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except OSError:
        return {}
    for line in lines:
        parts = line.split("\t")
        if parts[0] == "R" and len(parts) > 1:
            out["R"] = parts[1]
        elif parts[0] == "base" and len(parts) > 1:
            out["base"].append(parts[1])
        elif parts[0] in ("attached", "loaded") and len(parts) > 2:
            out[parts[0]][parts[1]] = parts[2]
    return out
