"""run_job through the fork server: what one recipe produces, and how each failure reads.

The recipes live in tests/hostile/ (one folder each); notebooks are written here with nbformat.
All recipes of this file run once, together, in a module fixture (two warm workers), so the
whole file takes a few seconds.
"""
from __future__ import annotations

import dataclasses
import hashlib
import re
import shutil
import subprocess
import sys
from pathlib import Path

import nbformat
import pytest
from nbformat.v4 import new_code_cell, new_notebook
from PIL import Image

from figfolio.executor import LocalExecutor
from figfolio.recipe import load_recipe
from figfolio.runner import Job, RunResult
from figfolio.settings import Settings

HOSTILE = Path(__file__).parent / "hostile"
DPI = 150


def job_for(folder: Path, **changes: object) -> Job:
    settings = Settings(root=folder.parent, dpi=DPI)
    return dataclasses.replace(Job.from_recipe(load_recipe(folder, settings), settings), **changes)


def pixel_digest(path: str | Path) -> str:
    """sha256 of decoded RGBA pixels and size, so file metadata does not matter (PRODUCT.md §5)."""
    with Image.open(path) as img:
        rgba = img.convert("RGBA")
        return hashlib.sha256(f"{rgba.size}".encode() + rgba.tobytes()).hexdigest()


def write_notebook(folder: Path, cells: list[str]) -> Path:
    folder.mkdir(parents=True)
    nb = new_notebook(cells=[new_code_cell(src) for src in cells])
    nbformat.validate(nb)  # the notebook is valid per the nbformat JSON schema
    nbformat.write(nb, str(folder / "figure.ipynb"))
    (folder / "recipe.toml").write_text(
        'title = "Notebook"\nsummary = "A notebook recipe."\nalt = "Test notebook figure."\n')
    return folder


NOTEBOOK_GOOD = [
    "import io\nimport matplotlib.pyplot as plt\nfrom IPython.display import Image, display",
    "side, ax = plt.subplots(figsize=(3, 2))\nax.plot([1, 3, 2])\nbuf = io.BytesIO()\n"
    "side.savefig(buf, format='png', dpi=100)\nplt.close(side)\n"
    "display(Image(data=buf.getvalue()))",
    "import numpy as np\nfig, ax = plt.subplots(figsize=(4, 3))\n"
    "ax.bar(['a', 'b'], np.array([1, 2]))\nplt.show()",
]
NOTEBOOK_BROKEN = ["import matplotlib.pyplot as plt\nplt.plot([1, 2])", "rate = 1 / 0"]


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> dict[str, RunResult]:
    base = tmp_path_factory.mktemp("runner")
    nb_good = write_notebook(base / "nb-good", NOTEBOOK_GOOD)
    nb_broken = write_notebook(base / "nb-broken", NOTEBOOK_BROKEN)
    nb_invalid = base / "nb-invalid"
    nb_invalid.mkdir()
    shutil.copy(nb_good / "recipe.toml", nb_invalid)
    (nb_invalid / "figure.ipynb").write_text('{"cells": 5, "nbformat": 4, "nbformat_minor": 5,'
                                             ' "metadata": {}}')
    jobs = [job_for(HOSTILE / name) for name in (
        "good", "raises", "no-figure", "huge-canvas", "writes-image", "command-draw",
        "missing-program", "loud", "exit-code", "self-kill")]
    jobs.append(dataclasses.replace(job_for(HOSTILE / "good"), slug="good-again"))
    jobs += [job_for(nb_good), job_for(nb_broken), job_for(nb_invalid)]
    got: dict[str, RunResult] = {}
    with LocalExecutor(jobs=2) as executor:
        executor.run(jobs, base / "work", lambda r: got.setdefault(r.slug, r))
    assert len(got) == len(jobs)
    return got


def outputs(result: RunResult) -> dict[str, Path]:
    return {o.name: Path(o.path) for o in result.outputs}


def test_good_recipe_gives_three_formats_at_the_asked_size(results: dict[str, RunResult]) -> None:
    good = results["good"]
    assert good.status == "ok", good.reason + good.traceback
    files = outputs(good)
    assert sorted(files) == ["figure-1.pdf", "figure-1.png", "figure-1.svg"]
    with Image.open(files["figure-1.png"]) as img:
        # PNG IHDR width/height (ISO/IEC 15948) as decoded by Pillow: figsize inches x dpi.
        assert img.size == (4 * DPI, 3 * DPI)
    svg = files["figure-1.svg"].read_text()
    # SVG 1.1 length units: 4 x 3 in at 72 pt per inch (from memory: 1 in = 72 pt, PostScript).
    assert re.search(r'width="288pt" height="216pt"', svg)
    pdf = files["figure-1.pdf"].read_bytes()
    assert pdf.startswith(b"%PDF-")  # ISO 32000-1 §7.5.2 file header
    # ISO 32000-1 §14.11.2 MediaBox in default user space units of 1/72 inch.
    assert re.search(rb"/MediaBox \[ ?0 0 288 216 ?\]", pdf)
    assert b"/CreationDate" not in pdf and b"<dc:date>" not in svg.encode()
    assert good.provenance["packages"]["numpy"]  # imported by the recipe itself
    assert good.provenance["python"] == ".".join(map(str, sys.version_info[:3]))


def test_vector_and_pixel_outputs_repeat_exactly(results: dict[str, RunResult]) -> None:
    first, second = outputs(results["good"]), outputs(results["good-again"])
    for name in ("figure-1.svg", "figure-1.pdf"):
        assert first[name].read_bytes() == second[name].read_bytes(), name
    assert pixel_digest(first["figure-1.png"]) == pixel_digest(second["figure-1.png"])


def test_saving_one_figure_twice_gives_identical_bytes(tmp_path: Path) -> None:
    """In a fresh interpreter: save_open_figures twice on the same open figure."""
    code = (
        "import sys, pathlib\n"
        "from figfolio.runner_capture import prepare_matplotlib, save_open_figures\n"
        "prepare_matplotlib(10**8)\n"
        "import matplotlib.pyplot as plt\n"
        "plt.plot([1, 2, 3]); plt.title('twice')\n"
        "for d in sys.argv[1:]: save_open_figures(pathlib.Path(d), ['png', 'svg', 'pdf'], 72)\n")
    env = {"SOURCE_DATE_EPOCH": "946684800", "PATH": "/usr/bin:/bin"}
    subprocess.run([sys.executable, "-c", code, str(tmp_path / "a"), str(tmp_path / "b")],
                   check=True, env=env, timeout=60)
    for fmt in ("png", "svg", "pdf"):
        assert (tmp_path / "a" / f"figure-1.{fmt}").read_bytes() == \
            (tmp_path / "b" / f"figure-1.{fmt}").read_bytes(), fmt


def test_exception_is_broken_with_the_recipes_own_frames(results: dict[str, RunResult]) -> None:
    failed = results["raises"]
    assert failed.status == "broken"
    assert failed.reason == "raised ValueError: column 'age' has no rows"
    assert "check_column" in failed.traceback and 'File "figure.py"' in failed.traceback
    assert failed.traceback.strip().endswith("ValueError: column 'age' has no rows")
    assert "runpy" not in failed.traceback and failed.outputs == []


def test_no_figure_and_huge_canvas_are_broken(results: dict[str, RunResult]) -> None:
    assert results["no-figure"].status == "broken"
    assert results["no-figure"].reason.startswith("no figure")
    assert "total 45" in results["no-figure"].stdout_tail
    huge = results["huge-canvas"]
    assert huge.status == "broken"
    # 400 x 300 in at 150 dpi = 60,000 x 45,000 px (arithmetic), over the 60,000,000 default.
    assert huge.reason.startswith("figure 1 would be 60,000 x 45,000 px")


def test_image_written_by_the_script_is_collected(results: dict[str, RunResult]) -> None:
    result = results["writes-image"]
    assert result.status == "ok", result.reason
    files = outputs(result)
    assert list(files) == ["plots--scatter.png"]
    with Image.open(files["plots--scatter.png"]) as img:
        assert img.size == (100, 100)  # 2 x 2 in at 50 dpi
    assert result.outputs[0].figure is None and result.outputs[0].format == "png"


def test_command_recipe_and_missing_program(results: dict[str, RunResult]) -> None:
    done = results["command-draw"]
    assert done.status == "ok", done.reason + done.stderr_tail
    with Image.open(outputs(done)["out.png"]) as img:
        assert img.size == (300, 200)  # 3 x 2 in at 100 dpi
    assert "drew out.png" in done.stdout_tail
    assert done.provenance["program"]["version"].startswith("Python 3")
    missing = results["missing-program"]
    assert missing.status == "broken"
    assert missing.reason.startswith("program 'figfolio-test-no-such-program' not found")


def test_fifty_megabytes_of_stdout_are_capped(results: dict[str, RunResult]) -> None:
    loud = results["loud"]
    cap = 1024 * 1024
    assert loud.status == "ok"
    assert len(loud.stdout_tail.encode()) <= cap and len(loud.stdout_head.encode()) <= cap
    assert loud.stdout_tail.endswith("END-OF-OUTPUT\n")
    assert loud.stdout_head.startswith("x" * 1023 + "\n")
    # 51,199 lines of 1,024 bytes + one of 1,024 bytes = 50 MiB (arithmetic).
    assert "stdout: 52,428,800 bytes, kept first 1 MB and last 1 MB" in loud.warnings
    assert loud.provenance["stdout_bytes"] == 52_428_800


def test_abrupt_exits_name_the_code_or_signal(results: dict[str, RunResult]) -> None:
    assert results["exit-code"].status == "broken"
    assert "exited with status 3" in results["exit-code"].reason
    assert results["self-kill"].status == "broken"
    # signal(7): SIGKILL is signal 9; Python's signal.Signals names it.
    assert results["self-kill"].reason == "killed by signal SIGKILL"


def test_notebook_gives_display_png_and_open_figure(results: dict[str, RunResult]) -> None:
    nb = results["nb-good"]
    assert nb.status == "ok", nb.reason + nb.traceback + nb.stderr_tail
    files = outputs(nb)
    assert sorted(files) == ["display-1.png", "figure-1.pdf", "figure-1.png", "figure-1.svg"]
    with Image.open(files["display-1.png"]) as img:
        assert img.size == (300, 200)
    with Image.open(files["figure-1.png"]) as img:
        assert img.size == (4 * DPI, 3 * DPI)
    assert nb.provenance["kernel"] == "python3"
    assert "numpy" in nb.provenance["packages"]


def test_broken_and_invalid_notebooks(results: dict[str, RunResult]) -> None:
    broken = results["nb-broken"]
    assert broken.status == "broken"
    assert broken.reason == "cell 2 raised ZeroDivisionError: division by zero"
    assert "rate = 1 / 0" in broken.traceback
    invalid = results["nb-invalid"]
    assert invalid.status == "broken" and invalid.reason.startswith("invalid notebook")


def test_result_round_trips_through_json(results: dict[str, RunResult]) -> None:
    import json
    for result in results.values():
        again = RunResult.from_dict(json.loads(json.dumps(result.to_dict())))
        assert again == result
