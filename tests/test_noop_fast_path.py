"""The catalogue-level no-op check (noop.py, issue 6): a pass where nothing changed is
answered from build/cache/noop.json, prints what the full path prints and exits the same way;
any change to what a pass reads or writes sends it down the full path.

The reference for "the same" is the full path itself, run on the same catalogue state (the
noop.json file is deleted to force it), and PRODUCT.md §4 for exit statuses. Stat semantics
relied on: a write or ``os.utime`` changes a file's mtime, a directory entry removed or added is
seen by ``scandir`` (POSIX.1-2017 <sys/stat.h> and readdir(); from memory).
"""
from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import textwrap
import time
from pathlib import Path
from typing import Callable

import pytest

from figfolio import build, cli, noop
from figfolio.build import Options, Report, run_pass
from figfolio.settings import load_settings

BARS = '''
import matplotlib.pyplot as plt
import pandas as pd

d = pd.read_csv("data/counts.csv")
fig, ax = plt.subplots(figsize=(4, 3))
ax.bar(d["group"], d["count"], color="#0072B2")
ax.set_xlabel("Group")
ax.set_ylabel("Count")
plt.show()
'''

BROKEN = "import matplotlib.pyplot as plt\nplt.figure()\nraise ValueError('column gone')\n"


def add(root: Path, slug: str, script: str, counts: tuple[int, ...] = (20, 35, 60)) -> Path:
    folder = root / "recipes" / slug
    (folder / "data").mkdir(parents=True)
    (folder / "recipe.toml").write_text(textwrap.dedent(f'''\
        title = "{slug.replace('-', ' ')}"
        summary = "A small test figure."
        alt = "A bar chart of three invented groups."
        tags = ["test"]
        width_mm = 120
        data_origin = "synthetic"
        '''))
    (folder / "figure.py").write_text(script)
    write_counts(folder, counts)
    return folder


def write_counts(folder: Path, counts: tuple[int, ...]) -> None:
    rows = ["group,count"] + [f"{chr(65 + k)},{c}" for k, c in enumerate(counts)]
    (folder / "data" / "counts.csv").write_text("\n".join(rows) + "\n")


def settle(root: Path) -> None:
    """Date inputs edited in the last 10 s 30 s back (a new time on every call).

    Why: noop.py, like the cache's stat table, does not trust a stat younger than
    cache.RACY_SECONDS (the clock tick may hide a second edit), so tests age their edits.
    Older files keep their stat, so a test sees what its own edit changed and nothing else.
    """
    now = time.time_ns()
    stamp = now - 30 * 10**9
    for path in [root / "figfolio.toml", *(root / "recipes").rglob("*"),
                 *(root / "site_template").rglob("*")]:
        if path.is_file() and path.stat().st_mtime_ns > now - 10 * 10**9:
            os.utime(path, ns=(stamp, stamp))


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("noop") / "cat"
    (root / "recipes").mkdir(parents=True)
    (root / "figfolio.toml").write_text('title = "No-op checks"\njobs = 2\nformats = ["png"]\n')
    add(root, "bars-a", BARS)
    add(root, "bars-b", BARS, counts=(12, 48, 30))
    settle(root)
    assert cli.main(["-C", str(root), "approve", "-q"]) == 0
    settle(root)  # fingerprints.json was just written
    return root


@pytest.fixture
def cat(built: Path, tmp_path: Path) -> Path:
    """A private copy of the approved catalogue, with a current noop.json."""
    root = tmp_path / "cat"
    shutil.copytree(built, root, symlinks=True)  # copy2: mtimes kept to the nanosecond
    first = run_pass(load_settings(root), Options(quiet=True))   # new root: full path
    assert not first.fast and first.ran == 0
    return root


def again(root: Path, **kw: object) -> Report:
    return run_pass(load_settings(root), Options(quiet=True, **kw))  # type: ignore[arg-type]


class Spy:
    """Keeps the Report of every run_pass the CLI makes."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.reports: list[Report] = []
        real = build.run_pass

        def spy(settings, options):  # type: ignore[no-untyped-def]
            self.reports.append(real(settings, options))
            return self.reports[-1]

        monkeypatch.setattr(build, "run_pass", spy)


def cli_run(root: Path, capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    """Exit status, stdout without the pass's duration, stderr."""
    code = cli.main(["-C", str(root), *args])
    out, err = capsys.readouterr()
    return code, re.sub(r"; [0-9.]+ s\n", "; N s\n", out), err


@pytest.mark.parametrize("command", ["build", "verify"])
def test_noop_is_replayed_and_prints_what_the_full_path_prints(
        cat: Path, command: str, capsys: pytest.CaptureFixture[str],
        monkeypatch: pytest.MonkeyPatch) -> None:
    add(cat, "broken", BROKEN)  # a failure tail in the table and a failing exit status
    settle(cat)
    spy = Spy(monkeypatch)
    full = cli_run(cat, capsys, command)          # inputs changed: full path, runs 'broken'
    noop.forget(load_settings(cat))               # the full path once more, nothing to run
    full_again = cli_run(cat, capsys, command)
    fast = cli_run(cat, capsys, command)
    assert [r.fast for r in spy.reports] == [False, False, True]
    assert spy.reports[1].fast_miss == "no noop.json"
    # Reference: the full path on the same catalogue state (full_again); its table, its
    # progress lines and its exit status (PRODUCT.md §4: 1 for a broken recipe).
    assert fast == full_again
    assert fast[0] == full[0] == 1
    assert "column gone" in fast[1] and "0 run, 3 from cache" in fast[1]
    assert "1 run, 2 from cache" in full[1]
    assert spy.reports[2].timings.get("discover") is None       # nothing was loaded


def test_exit_status_of_a_changed_figure_is_the_same_on_both_paths(
        cat: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    spy = Spy(monkeypatch)
    calm = cli_run(cat, capsys, "verify")
    calm_fast = cli_run(cat, capsys, "verify")
    write_counts(cat / "recipes" / "bars-a", (60, 15, 33))     # a different picture
    settle(cat)
    junit = cat / "junit.xml"
    changed = cli_run(cat, capsys, "verify", "--junit", str(junit))
    junit_full = re.sub(r'timestamp="[^"]*"', "", junit.read_text())
    changed_fast = cli_run(cat, capsys, "verify", "--junit", str(junit))
    junit_fast = re.sub(r'timestamp="[^"]*"', "", junit.read_text())
    assert [r.fast for r in spy.reports] == [False, True, False, True]
    # PRODUCT.md §4: exit 0 when all good, 1 when a recipe is `changed`; §5 for the verdict.
    assert calm[0] == calm_fast[0] == 0 and calm == calm_fast
    assert changed[0] == changed_fast[0] == 1
    assert re.search(r"bars-a\s+figure-1\.png\s+changed", changed_fast[1])
    assert changed_fast[1] == changed[1].replace("1 run, 1 from cache", "0 run, 2 from cache")
    # The JUnit report (its schema as CI systems read it; the full path is the reference) is
    # the same file, apart from its timestamp.
    assert junit_fast == junit_full and 'type="changed"' in junit_fast
    rc = subprocess.run([sys.executable, "-m", "figfolio", "-C", str(cat), "verify", "-q"],
                        capture_output=True, text=True, env=dict(os.environ, CI="1"))
    assert rc.returncode == 1, rc.stderr                   # the real command, fast path too


def _touch_data(root: Path) -> None:
    path = root / "recipes" / "bars-a" / "data" / "counts.csv"
    stamp = time.time_ns() - 20 * 10**9
    os.utime(path, ns=(stamp, stamp))


def _edit_toml(root: Path) -> None:
    path = root / "recipes" / "bars-b" / "recipe.toml"
    path.write_text(path.read_text() + 'authors = ["A. Tester"]\n')


def _edit_fingerprints(root: Path) -> None:
    path = root / "recipes" / "bars-a" / "fingerprints.json"
    path.write_text(path.read_text() + "\n")


def _delete_index(root: Path) -> None:
    (root / "build" / "site" / "index.html").unlink()


def _edit_settings(root: Path) -> None:
    path = root / "figfolio.toml"
    path.write_text(path.read_text().replace("No-op checks", "No-op checks, renamed"))


def _delete_entry(root: Path) -> None:
    (entry,) = (root / "build" / "cache" / "runs" / "bars-b").iterdir()
    shutil.rmtree(entry)


def _damage_entry(root: Path) -> None:
    (entry,) = (root / "build" / "cache" / "runs" / "bars-b").iterdir()
    (entry / "record.json").write_text("{}")


def _new_folder(root: Path) -> None:
    (root / "recipes" / "half-made").mkdir()


def _own_theme(root: Path) -> None:
    (root / "site_template" / "static").mkdir(parents=True)
    (root / "site_template" / "static" / "extra.css").write_text("body { margin: 0 }\n")


CHANGES: dict[str, tuple[Callable[[Path], None], str]] = {
    "touch a data file": (_touch_data, "inputs changed"),
    "edit recipe.toml": (_edit_toml, "inputs changed"),
    "edit fingerprints.json": (_edit_fingerprints, "inputs changed"),
    "delete build/site/index.html": (_delete_index, "cache or site changed"),
    "change figfolio.toml": (_edit_settings, "inputs changed"),
    "delete a cache entry": (_delete_entry, "cache or site changed"),
    "damage a cache entry": (_damage_entry, "cache or site changed"),
    "add a folder under recipes/": (_new_folder, "inputs changed"),
    "add a site_template file": (_own_theme, "inputs changed"),
}


@pytest.mark.parametrize("name", list(CHANGES))
def test_any_change_takes_the_full_path(cat: Path, name: str) -> None:
    change, why = CHANGES[name]
    assert again(cat).fast
    change(cat)
    if why == "inputs changed":
        settle(cat)   # an edit is racy for a moment; a stat change is still a change
    report = again(cat)
    assert not report.fast and report.fast_miss == why
    assert "discover" in report.timings                       # the recipes were loaded
    # Expected from the full path's own rules (cache.py, site_state.py): a deleted or damaged
    # entry is run again, and recipe.toml is part of the input key; a deleted index is
    # published again, a folder without recipe.toml is a problem; nothing else runs.
    rerun = name in ("delete a cache entry", "damage a cache entry", "edit recipe.toml")
    assert report.ran == (1 if rerun else 0)
    assert (cat / "build" / "site" / "index.html").is_file()
    assert [p.key for p in report.problems] == ([] if name != "add a folder under recipes/"
                                                else [None])
    follow = again(cat)                                       # recorded again: fast once more
    assert follow.fast and follow.problems.__len__() == len(report.problems)


def test_force_never_replays(cat: Path) -> None:
    assert again(cat).fast
    forced = again(cat, force=True)
    assert not forced.fast and forced.fast_miss == "--force" and forced.ran == 2
    assert again(cat).fast


def test_other_options_are_other_passes(cat: Path) -> None:
    assert again(cat).fast
    partial = again(cat, slugs=["bars-a"])
    assert not partial.fast and [o.recipe.slug for o in partial.outcomes] == ["bars-a"]
    replayed = again(cat, slugs=["bars-a"])
    assert replayed.fast and [o.recipe.slug for o in replayed.outcomes] == ["bars-a"]
    assert not again(cat).fast                                   # all recipes: not the same
    repeat = again(cat, repeat=2)
    assert not repeat.fast and repeat.ran == 2
    assert not again(cat).fast                                   # --repeat records nothing
    out = cat / "elsewhere"
    assert not again(cat, out=out).fast and (out / "index.html").is_file()


def test_fresh_edits_are_not_trusted(cat: Path) -> None:
    """An input younger than RACY_SECONDS: the pass writes no noop.json (cache.py's rule)."""
    settings = load_settings(cat)
    _edit_toml(cat)                                              # mtime: now
    report = again(cat)
    assert not report.fast and not noop.path_of(settings).exists()
    assert not again(cat).fast


@pytest.mark.parametrize("damage", ["garbage", "truncated", "outcomes"])
def test_damaged_noop_json_takes_the_full_path(cat: Path, damage: str) -> None:
    path = noop.path_of(load_settings(cat))
    text = path.read_text()
    if damage == "garbage":
        path.write_text("not json")
    elif damage == "truncated":
        path.write_text(text[: len(text) // 2])
    else:  # digests still right, summary damaged
        raw = json.loads(text)
        raw["outcomes"] = [{"recipe": {"slug": "bars-a"}}]
        path.write_text(json.dumps(raw))
    report = again(cat)
    assert not report.fast and report.fast_miss in ("noop.json unreadable", "noop.json damaged")
    assert [o.recipe.slug for o in report.outcomes] == ["bars-a", "bars-b"]
    assert again(cat).fast


def test_metadata_problems_are_replayed_with_exit_2(
        cat: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    folder = add(cat, "bad-one", BARS)
    (folder / "recipe.toml").write_text('title = "no summary"\ncolour = 1\n')
    settle(cat)
    spy = Spy(monkeypatch)
    full = cli_run(cat, capsys, "build")
    fast = cli_run(cat, capsys, "build")
    assert [r.fast for r in spy.reports] == [False, True]
    # PRODUCT.md §3-4: a metadata error names the file and key, exit status 2, no traceback.
    assert full == fast and fast[0] == 2
    assert "bad-one/recipe.toml [colour]" in fast[2] and "Traceback" not in fast[2]


def test_fast_cli_imports_no_rendering_stack(cat: Path) -> None:
    code = textwrap.dedent(f'''
        import json, sys
        from figfolio import build, cli
        seen = []
        real = build.run_pass
        build.run_pass = lambda s, o: seen.append(real(s, o)) or seen[-1]
        code = cli.main(["-C", {str(cat)!r}, "build", "-q"])
        heavy = sorted(m for m in sys.modules
                       if m.split(".")[0] in ("numpy", "pandas", "matplotlib", "PIL", "scipy",
                                              "jinja2"))
        print(json.dumps({{"code": code, "fast": seen[0].fast, "heavy": heavy}}))
        ''')
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=dict(os.environ, CI="1"), timeout=120)
    assert run.returncode == 0, run.stderr
    assert json.loads(run.stdout.strip().splitlines()[-1]) == {"code": 0, "fast": True,
                                                                "heavy": []}
