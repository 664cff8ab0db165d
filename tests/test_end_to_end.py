"""The reproducibility core end to end, through the real command line (issue 2, "what must show").

Each test builds a small catalogue in a temporary folder and runs ``python -m figfolio`` in a
subprocess, exactly as a user or CI would.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from PIL import Image

BARS = '''
import csv
import matplotlib.pyplot as plt

with open("data/counts.csv", newline="") as f:
    rows = list(csv.DictReader(f))
fig, ax = plt.subplots(figsize=(4, 3))
ax.bar([r["group"] for r in rows], [float(r["count"]) for r in rows], color="#0072B2")
ax.set_xlabel("Group")
ax.set_ylabel("Count")
plt.show()
'''

LINE = '''
import matplotlib.pyplot as plt
fig, ax = plt.subplots(figsize=(4, 3))
ax.plot([0, 1, 2, 3], [1, 3, 2, 4], color="#D55E00")
ax.set_xlabel("Week")
ax.set_ylabel("Rate")
plt.show()
'''

HANG = "import time\nwhile True:\n    time.sleep(1)\n"
RAISE = "import matplotlib.pyplot as plt\nplt.figure()\nraise ValueError('the data column is gone')\n"


def toml(title: str, extra: str = "") -> str:
    return textwrap.dedent(f'''\
        title = "{title}"
        summary = "A small test figure."
        alt = "A bar chart of four invented groups with counts between 20 and 60."
        tags = ["test"]
        width_mm = 120
        ''') + extra


def add(root: Path, slug: str, script: str, extra: str = "", data: str | None = None) -> Path:
    folder = root / "recipes" / slug
    (folder / "data").mkdir(parents=True)
    (folder / "recipe.toml").write_text(toml(slug.replace("-", " "), extra))
    (folder / "figure.py").write_text(script)
    if data is not None:
        (folder / "data" / "counts.csv").write_text(data)
    return folder


def figfolio(root: Path, *args: str, timeout: float = 300) -> subprocess.CompletedProcess:
    env = dict(os.environ, CI="1")
    return subprocess.run([sys.executable, "-m", "figfolio", "-C", str(root), *args],
                          capture_output=True, text=True, timeout=timeout, env=env)


@pytest.fixture
def catalogue(tmp_path: Path) -> Path:
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    (root / "figfolio.toml").write_text('title = "Test catalogue"\njobs = 2\n')
    add(root, "bars", BARS, data="group,count\nA,20\nB,35\nC,60\nD,42\n")
    add(root, "line", LINE)
    return root


def verdicts(junit: Path) -> dict[str, str]:
    out = {}
    for case in ET.parse(junit).getroot().iter("testcase"):
        kind = "reproduced"
        for child in case:
            if child.tag in ("failure", "skipped", "error"):
                kind = child.get("type") or child.tag
        out[f"{case.get('classname')}/{case.get('name')}"] = kind
    return out


def test_build_approve_verify_then_change(catalogue: Path):
    first = figfolio(catalogue, "build")
    assert first.returncode in (0, 1), first.stderr
    assert (catalogue / "build" / "site" / "index.html").is_file()
    approved = figfolio(catalogue, "approve")
    assert approved.returncode == 0, approved.stdout + approved.stderr
    prints = json.loads((catalogue / "recipes" / "bars" / "fingerprints.json").read_text())
    assert set(prints["outputs"]) >= {"figure-1.png", "figure-1.svg", "figure-1.pdf"}
    ok = figfolio(catalogue, "verify", "--junit", str(catalogue / "v.xml"))
    assert ok.returncode == 0, ok.stdout + ok.stderr
    assert set(verdicts(catalogue / "v.xml").values()) == {"reproduced"}

    # Change one number in one recipe's data: verify exits 1 and names that output 'changed'.
    data = catalogue / "recipes" / "bars" / "data" / "counts.csv"
    data.write_text(data.read_text().replace("C,60", "C,25"))
    bad = figfolio(catalogue, "verify", "--junit", str(catalogue / "v2.xml"))
    assert bad.returncode == 1, bad.stdout + bad.stderr
    assert "changed" in bad.stdout and "bars" in bad.stdout
    v = verdicts(catalogue / "v2.xml")
    assert v["bars/figure-1.png"] == "changed"
    assert v["line/figure-1.png"] == "reproduced"
    diffs = list((catalogue / "build").rglob("diff/figure-1.png"))
    assert diffs, "a difference image is written for a changed output"
    with Image.open(diffs[0]) as img:  # three panels side by side: wider than tall
        assert img.width > img.height


def test_recompressed_png_keeps_exact_digest(tmp_path: Path):
    # PNG is lossless (W3C PNG specification): re-saving with another zlib level changes the
    # bytes, not the decoded pixels, so the exact digest must not change.
    from figfolio.fingerprint import decode, exact_digest

    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots()
    ax.plot([1, 2, 3])
    a = tmp_path / "a.png"
    fig.savefig(a)
    plt.close(fig)
    b = tmp_path / "b.png"
    with Image.open(a) as img:
        img.save(b, compress_level=0)
    assert a.read_bytes() != b.read_bytes()
    assert exact_digest(decode(a)) == exact_digest(decode(b))


def test_hang_and_raise_are_broken_others_build(catalogue: Path):
    add(catalogue, "hangs", HANG, extra="timeout = 3\n")
    add(catalogue, "raises", RAISE)
    run = figfolio(catalogue, "build")
    assert run.returncode == 1, run.stdout + run.stderr
    assert "Traceback (most recent call last)" not in run.stderr
    lines = run.stdout
    assert "hangs" in lines and "timed out" in lines
    assert "raises" in lines and "ValueError" in lines and "the data column is gone" in lines
    site = catalogue / "build" / "site"
    assert (site / "r" / "bars" / "index.html").is_file()
    assert "the data column is gone" in (site / "report.html").read_text()


def test_second_build_runs_nothing_and_one_change_reruns_one(catalogue: Path):
    assert figfolio(catalogue, "build").returncode in (0, 1)
    again = figfolio(catalogue, "build")
    assert "0 run, 2 from cache" in again.stdout, again.stdout
    data = catalogue / "recipes" / "bars" / "data" / "counts.csv"
    data.write_text(data.read_text() + "E,30\n")
    third = figfolio(catalogue, "build")
    assert "1 run, 1 from cache" in third.stdout, third.stdout


def test_metadata_error_exit_2_no_traceback(catalogue: Path):
    (catalogue / "recipes" / "line" / "recipe.toml").write_text('title = "x"\ncolour = 1\n')
    run = figfolio(catalogue, "lint")
    assert run.returncode == 2
    assert "recipe.toml" in run.stderr and "colour" in run.stderr
    assert "Traceback" not in run.stderr


def test_new_and_copy_run(catalogue: Path):
    made = figfolio(catalogue, "new", "fresh-one")
    assert made.returncode == 0, made.stderr
    copy = figfolio(catalogue, "new", "bars-copy", "--from", "bars")
    assert copy.returncode == 0, copy.stderr
    assert "(copy)" in (catalogue / "recipes" / "bars-copy" / "recipe.toml").read_text()
    assert not (catalogue / "recipes" / "bars-copy" / "fingerprints.json").exists()
    for slug in ("fresh-one", "bars-copy"):  # a scaffold or a copy runs by hand
        hand = subprocess.run([sys.executable, "figure.py"], cwd=catalogue / "recipes" / slug,
                              env=dict(os.environ, MPLBACKEND="Agg"), capture_output=True,
                              text=True, timeout=120)
        assert hand.returncode == 0, hand.stderr
    assert figfolio(catalogue, "lint").returncode == 0
    dup = figfolio(catalogue, "new", "bars")
    assert dup.returncode == 2 and "already exists" in dup.stderr


def test_unstable_under_repeat(catalogue: Path):
    add(catalogue, "unseeded", "import numpy as np\nimport matplotlib.pyplot as plt\n"
        "fig, ax = plt.subplots()\nax.plot(np.random.default_rng().normal(size=20))\n"
        "ax.set_xlabel('i')\nax.set_ylabel('value')\n")
    run = figfolio(catalogue, "verify", "--repeat", "2", "--junit", str(catalogue / "r.xml"))
    assert run.returncode == 1, run.stdout + run.stderr
    v = verdicts(catalogue / "r.xml")
    assert v["unseeded/figure-1.png"] == "unstable"
    assert v["bars/figure-1.png"] != "unstable" and v["line/figure-1.png"] != "unstable"


def test_write_into_another_recipe_is_reported(catalogue: Path):
    # A recipe that writes outside its scratch copy, into another recipe's folder, is named.
    target = catalogue / "recipes" / "bars" / "data" / "planted.csv"
    add(catalogue, "vandal", f"open({str(target)!r}, 'w').write('x\\n')\n" + LINE)
    run = figfolio(catalogue, "build")
    assert "the catalogue changed while recipes ran" in run.stdout, run.stdout
    assert "recipes/bars/data/planted.csv" in run.stdout
