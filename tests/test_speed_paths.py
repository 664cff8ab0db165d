"""The fast paths (issue 6) do the same work as the slow ones: functional checks, no timings.

* the post step (digests, thumbnails, audit, data summaries) run by a warm worker in a fresh
  fork gives the same record as the builder staging the same outputs itself (the Dask and
  spawn path), and a recipe that tampers with hashing in its own process cannot reach it;
* thumbnails are lossless and the audit's previews reuse the decoded image correctly;
* a build where nothing changed publishes nothing and imports no rendering stack; a change
  re-renders only the pages that show it; the data screen is not repeated for unchanged data;
* workers preload what the scripts import, and the distribution table cache is exact.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import re
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from PIL import Image

from figfolio import build, fingerprint, poststep, site_state
from figfolio.audit_pixels import load_rgb
from figfolio.build import Options, run_pass
from figfolio.executor import LocalExecutor
from figfolio.recipe import discover, load_recipe
from figfolio.runner import Job, RunResult
from figfolio.settings import load_settings

LINE = '''
import matplotlib.pyplot as plt
import pandas as pd

d = pd.read_csv("data/values.csv")
fig, ax = plt.subplots(figsize=(4, 3))
ax.plot(d["week"], d["rate"], color="#D55E00")
ax.set_xlabel("Week")
ax.set_ylabel("Rate")
plt.show()
'''

# Replaces hashlib.sha256 and Pillow's tobytes in the recipe's own process: if the post step
# ran in that process, the digests would come out wrong.
TAMPER = '''
import hashlib
import matplotlib.pyplot as plt
from PIL import Image

class Fake:
    def __init__(self, *a, **k): pass
    def update(self, *a): pass
    def hexdigest(self): return "0" * 64

hashlib.sha256 = Fake
Image.Image.tobytes = lambda self, *a, **k: b""
fig, ax = plt.subplots(figsize=(3, 2))
ax.bar(["a", "b"], [2, 3], color="#0072B2")
ax.set_xlabel("Group")
ax.set_ylabel("Count")
plt.show()
'''

PRELOADED = '''
import sys
print("preloaded:", "scipy.cluster.hierarchy" in sys.modules)
from scipy.cluster.hierarchy import linkage  # noqa: F401
import matplotlib.pyplot as plt
fig, ax = plt.subplots(figsize=(3, 2))
ax.plot([0, 1], [0, 1])
ax.set_xlabel("x")
ax.set_ylabel("y")
plt.show()
'''


def add(root: Path, slug: str, script: str, rows: int = 6) -> Path:
    folder = root / "recipes" / slug
    (folder / "data").mkdir(parents=True)
    (folder / "recipe.toml").write_text(textwrap.dedent(f'''\
        title = "{slug.replace('-', ' ')}"
        summary = "A small test figure."
        alt = "A line chart of an invented weekly rate over {rows} weeks."
        tags = ["test"]
        width_mm = 120
        data_origin = "synthetic"
        '''))
    (folder / "figure.py").write_text(script)
    lines = ["week,rate"] + [f"{w},{(w * 7) % 11 + 0.5}" for w in range(rows)]
    (folder / "data" / "values.csv").write_text("\n".join(lines) + "\n")
    return folder


@pytest.fixture
def catalogue(tmp_path: Path) -> Path:
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    (root / "figfolio.toml").write_text('title = "Speed paths"\njobs = 2\nformats = ["png"]\n')
    for k in range(3):
        add(root, f"line-{k}", LINE, rows=6 + k)
    return root


def reference_exact(path: Path) -> str:
    """PRODUCT.md §5 exact digest recomputed with Pillow and hashlib only."""
    with Image.open(path) as img:
        rgba = img.convert("RGBA")
        head = f"RGBA|{rgba.width}|{rgba.height}|".encode("ascii")
        return "sha256:" + hashlib.sha256(head + rgba.tobytes()).hexdigest()


def reference_perceptual(path: Path) -> str:
    """Reference library from PyPI: imagehash.phash with hash_size=16 (what figfolio mirrors)."""
    imagehash = pytest.importorskip("imagehash")
    with Image.open(path) as img:
        return str(imagehash.phash(img, hash_size=16))


def run_with_post(folder: Path, work: Path) -> RunResult:
    settings = load_settings(folder.parent.parent)
    recipe = load_recipe(folder, settings)
    job = dataclasses.replace(Job.from_recipe(recipe, settings),
                              post=poststep.PostSpec(recipe, settings))
    got: list[RunResult] = []
    with LocalExecutor(jobs=1) as executor:
        executor.run([job], work, got.append)
    return got[0]


def test_worker_post_step_equals_builder_staging_and_references(catalogue: Path, tmp_path: Path
                                                                 ) -> None:
    folder = catalogue / "recipes" / "line-0"
    result = run_with_post(folder, tmp_path / "work")
    assert result.status == "ok" and result.staged is not None
    record = result.staged["record"]
    # The builder's own path (spawn mode, Dask) on the very same raw outputs.
    settings = load_settings(catalogue)
    raw = RunResult.from_dict(result.to_dict())
    assert "staged" not in result.to_dict()        # transport only, never stored
    mine = build._stage(raw, load_recipe(folder, settings), settings, tmp_path / "again")
    assert mine["images"] == record["images"]
    assert mine["audit"]["findings"] == record["audit"]["findings"]
    assert mine["data"] == record["data"]
    png = Path(result.staged["dir"]) / "figure-1.png"
    assert record["images"]["figure-1.png"]["exact"] == reference_exact(png)
    assert record["images"]["figure-1.png"]["perceptual"] == reference_perceptual(png)
    for kind in ("protan", "deutan", "tritan", "grayscale"):
        assert (Path(result.staged["dir"]) / record["audit"]["images"]["1"][kind]).is_file()


def test_recipe_cannot_tamper_with_its_own_fingerprints(catalogue: Path, tmp_path: Path
                                                        ) -> None:
    folder = add(catalogue, "tamper", TAMPER)
    result = run_with_post(folder, tmp_path / "work")
    assert result.status == "ok", result.reason
    png = Path(result.staged["dir"]) / "figure-1.png"
    digest = result.staged["record"]["images"]["figure-1.png"]["exact"]
    assert digest == reference_exact(png) and digest != "sha256:" + "0" * 64


def test_thumbnails_are_lossless_lanczos_of_the_figure(tmp_path: Path) -> None:
    # Reference: Pillow's own Lanczos resize; WebP lossless (RFC 9649 §3) must decode to the
    # very same pixels.
    img = Image.linear_gradient("L").resize((1000, 700)).convert("RGB")
    img.putpixel((10, 10), (200, 0, 60))
    src = tmp_path / "figure-1.png"
    img.save(src)
    facts = fingerprint.analyse_png(src, tmp_path / "thumbs")
    big = img.resize((640, 448), Image.Resampling.LANCZOS, reducing_gap=3.0)
    small = big.resize((320, 224), Image.Resampling.LANCZOS, reducing_gap=3.0)
    for size, expected in ((640, big), (320, small)):
        with Image.open(facts.thumbs[size]) as thumb:
            assert thumb.size == expected.size
            assert thumb.convert("RGB").tobytes() == expected.tobytes()


def test_transparent_figures_keep_their_alpha_in_thumbnails(tmp_path: Path) -> None:
    img = Image.new("RGBA", (800, 400), (0, 0, 0, 0))
    img.paste((0, 114, 178, 255), (100, 100, 300, 200))
    src = tmp_path / "figure-1.png"
    img.save(src)
    facts = fingerprint.analyse_png(src, tmp_path / "thumbs", sizes=(320,))
    with Image.open(facts.thumbs[320]) as thumb:
        assert thumb.mode == "RGBA" and thumb.getextrema()[3][0] == 0


def test_audit_previews_reuse_the_decoded_image_only_while_the_file_is_unchanged(
        tmp_path: Path) -> None:
    src = tmp_path / "figure-1.png"
    Image.new("RGB", (500, 300), (230, 159, 0)).save(src)
    plain = load_rgb(src, 360)
    fingerprint.analyse_png(src, None, keep_decoded=True)
    try:
        assert fingerprint.recall(src) is not None
        assert (load_rgb(src, 360) == plain).all()          # same pixels either way
        Image.new("RGB", (500, 300), (86, 180, 233)).save(src)
        os.utime(src, ns=(1, 1))                             # a different file on disk
        assert fingerprint.recall(src) is None
        assert tuple(load_rgb(src)[0, 0]) == (86, 180, 233)
    finally:
        fingerprint.forget_decoded()


def _inode(path: Path) -> int:
    return path.stat().st_ino


def test_noop_publishes_nothing_and_a_change_renders_only_its_page(catalogue: Path) -> None:
    settings = load_settings(catalogue)
    first = run_pass(settings, Options(quiet=True))
    assert first.ran == 3
    site = settings.site_path
    before = {p.name: _inode(p / "index.html") for p in (site / "r").iterdir()}
    index = _inode(site / "index.html")
    second = run_pass(settings, Options(quiet=True))
    assert second.ran == 0 and "site_unchanged" in second.timings
    assert _inode(site / "index.html") == index            # the site was not swapped
    data = catalogue / "recipes" / "line-1" / "data" / "values.csv"
    data.write_text(data.read_text() + "99,1.5\n")
    third = run_pass(settings, Options(quiet=True))
    assert third.ran == 1
    after = {p.name: _inode(p / "index.html") for p in (site / "r").iterdir()}
    assert after["line-1"] != before["line-1"]
    # The neighbours' pages show line-1's title and summary only, which did not change: they
    # are the previous site's files (hard links, same inode), not rendered again.
    assert after["line-0"] == before["line-0"] and after["line-2"] == before["line-2"]
    assert _inode(site / "index.html") != index            # the index shows every recipe


def test_readme_edit_republishes_without_running(catalogue: Path) -> None:
    settings = load_settings(catalogue)
    run_pass(settings, Options(quiet=True))
    old = site_state.read_state(settings.site_path)
    (catalogue / "recipes" / "line-2" / "README.md").write_text("# Notes\n\nA new paragraph.\n")
    again = run_pass(settings, Options(quiet=True))
    assert again.ran == 0 and "site_unchanged" not in again.timings
    new = site_state.read_state(settings.site_path)
    assert old is not None and new is not None
    changed = {s for s in new["pages"] if new["pages"][s] != old["pages"][s]}
    assert changed == {"line-2"}
    page = (settings.site_path / "r" / "line-2" / "index.html").read_text(encoding="utf-8")
    assert "A new paragraph." in page


def test_noop_build_imports_no_rendering_stack(catalogue: Path) -> None:
    settings = load_settings(catalogue)
    run_pass(settings, Options(quiet=True))
    code = textwrap.dedent(f'''
        import json, sys
        from pathlib import Path
        from figfolio.build import Options, run_pass
        from figfolio.settings import load_settings
        report = run_pass(load_settings(Path({str(catalogue)!r})), Options(quiet=True))
        heavy = sorted(m for m in sys.modules
                       if m.split(".")[0] in ("numpy", "pandas", "matplotlib", "PIL", "scipy"))
        print(json.dumps({{"ran": report.ran, "heavy": heavy}}))
        ''')
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=dict(os.environ, CI="1"), timeout=120)
    assert run.returncode == 0, run.stderr
    got = json.loads(run.stdout.strip().splitlines()[-1])
    assert got == {"ran": 0, "heavy": []}


def test_screen_is_not_repeated_for_unchanged_data(catalogue: Path, monkeypatch: pytest.MonkeyPatch
                                                   ) -> None:
    from figfolio import screen

    settings = load_settings(catalogue)
    recipes, _ = discover(settings)
    calls: list[str] = []
    real = screen.screen_recipe

    def counting(recipe, settings):  # type: ignore[no-untyped-def]
        calls.append(recipe.slug)
        return real(recipe, settings)

    monkeypatch.setattr(screen, "screen_recipe", counting)
    from figfolio.cache import Cache
    cache = Cache(settings.cache_path)
    keys = {r.slug: cache.input_key(r, settings) for r in recipes}
    assert build.screen_all(recipes, settings, cache, keys) == ""
    assert sorted(calls) == ["line-0", "line-1", "line-2"]
    calls.clear()
    assert build.screen_all(recipes, settings, cache, keys) == ""
    assert calls == []
    keys["line-1"] = "0" * 64                       # its files changed
    build.screen_all(recipes, settings, cache, keys)
    assert calls == ["line-1"]
    calls.clear()
    stricter = dataclasses.replace(settings, screen=dataclasses.replace(settings.screen,
                                                                        small_cell=3))
    build.screen_all(recipes, stricter, cache, keys)
    assert sorted(calls) == ["line-0", "line-1", "line-2"]


def test_imported_modules_reads_imports_without_running(catalogue: Path) -> None:
    folder = add(catalogue, "imports", textwrap.dedent('''
        import os, scipy.stats
        from scipy.cluster.hierarchy import linkage, leaves_list
        from statsmodels import api as sm
        from . import helper
        import seaborn
        raise SystemExit("never run")
        '''))
    settings = load_settings(catalogue)
    got = build.imported_modules([load_recipe(folder, settings)])
    # Expected from the Python language reference, "The import statement" (common practice
    # for what each form binds); seaborn and os are not preloadable, relative imports skipped.
    assert got == ["scipy.cluster.hierarchy", "scipy.cluster.hierarchy.leaves_list",
                   "scipy.cluster.hierarchy.linkage", "scipy.stats", "statsmodels",
                   "statsmodels.api"]


def test_worker_preloads_what_the_scripts_import(catalogue: Path, tmp_path: Path) -> None:
    folder = add(catalogue, "preloaded", PRELOADED)
    settings = load_settings(catalogue)
    recipe = load_recipe(folder, settings)
    job = Job.from_recipe(recipe, settings)
    for preload, expected in ((build.imported_modules([recipe]), "True"), ((), "False")):
        got: list[RunResult] = []
        with LocalExecutor(jobs=1, preload=preload) as executor:
            executor.run([job], tmp_path / f"work-{expected}", got.append)
        assert got[0].status == "ok", got[0].reason
        assert f"preloaded: {expected}" in got[0].stdout_tail


def test_distribution_table_cache_matches_importlib_metadata(tmp_path: Path) -> None:
    # Reference: importlib.metadata.packages_distributions() from the standard library.
    cache = tmp_path / "owners.json"
    code = textwrap.dedent('''
        import json
        from importlib import metadata
        from figfolio.runner_capture import distribution_owners
        mine = distribution_owners()
        ref = {k: list(v) for k, v in metadata.packages_distributions().items()}
        print(json.dumps(mine == ref))
        ''')
    env = dict(os.environ, FIGFOLIO_OWNERS_CACHE=str(cache))
    for _ in range(2):  # computed and saved, then read back from the file
        run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             env=env, timeout=120)
        assert run.returncode == 0, run.stderr
        assert run.stdout.strip() == "true"
    assert json.loads(cache.read_text())["owners"]


def test_never_run_recipes_with_more_data_are_expected_to_take_longer(catalogue: Path) -> None:
    settings = load_settings(catalogue)
    add(catalogue, "big-data", LINE, rows=50_000)
    from figfolio.cache import Cache
    cache = Cache(settings.cache_path)
    recipes = {r.slug: r for r in discover(settings)[0]}
    assert build._expected_seconds(recipes["big-data"], cache) > \
        build._expected_seconds(recipes["line-0"], cache)


def test_a_page_deleted_by_hand_is_published_again(catalogue: Path) -> None:
    settings = load_settings(catalogue)
    run_pass(settings, Options(quiet=True))
    page = settings.site_path / "r" / "line-0" / "index.html"
    page.unlink()
    again = run_pass(settings, Options(quiet=True))
    assert again.ran == 0 and "site_unchanged" not in again.timings
    assert page.is_file()


def test_serve_pool_stays_warm_between_passes_and_is_not_closed(catalogue: Path) -> None:
    """``figfolio serve`` keeps its workers: a rebuild after an edit runs on the same worker
    processes (no second warm-up), and a pass never closes a pool it was lent."""
    settings = load_settings(catalogue)
    pool = build.warm_pool(settings, jobs=1)
    assert isinstance(pool, LocalExecutor)
    try:
        first = run_pass(settings, Options(quiet=True), pool=pool)
        assert first.ran == 3
        pids = [w.proc.pid for w in pool._workers if w.proc is not None]
        assert len(pids) == 1 and pool._workers[0].proc.poll() is None   # still running
        data = catalogue / "recipes" / "line-2" / "data" / "values.csv"
        data.write_text(data.read_text() + "99,1.5\n")
        second = run_pass(settings, Options(quiet=True), pool=pool)
        assert second.ran == 1 and second.outcomes
        assert [w.proc.pid for w in pool._workers if w.proc is not None] == pids
    finally:
        pool.close()
    assert all(w.proc is None for w in pool._workers) or not pool._workers


def test_workers_start_before_the_screen_and_stop_when_it_blocks(
        catalogue: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The workers warm up while the builder screens the data; a screen that stops the build
    leaves no worker behind."""
    started: list[LocalExecutor] = []
    real_warm = LocalExecutor.warm

    def spy(self: LocalExecutor, count: int) -> None:
        started.append(self)
        real_warm(self, count)

    def blocking(*args: object, **kwargs: object) -> str:
        assert started and started[0]._workers[0].proc is not None   # already launched
        return "recipes/line-0/data/values.csv: column 'name' looks like an identifier"

    monkeypatch.setattr(LocalExecutor, "warm", spy)
    monkeypatch.setattr(build, "screen_all", blocking)
    from figfolio.errors import DataScreenError
    with pytest.raises(DataScreenError):
        run_pass(load_settings(catalogue), Options(quiet=True))
    assert started and all(w.proc is None for w in started[0]._workers)


REHEARSAL_CHECK = r'''
import json, os, sys, tempfile
import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
fresh = {k: repr(v) for k, v in matplotlib.rcParams.items()}
cwd, env = os.getcwd(), dict(os.environ)
from figfolio import worker, runner_capture
worker.warm_up()
from importlib import metadata
print(json.dumps({
    "figures": plt.get_fignums(),
    "rc_changed": sorted(k for k, v in matplotlib.rcParams.items() if repr(v) != fresh[k]),
    "cwd_same": os.getcwd() == cwd, "env_same": dict(os.environ) == env,
    "left": [n for n in os.listdir(tempfile.gettempdir()) if n.startswith("figfolio-rehearsal-")],
    "versions_ok": all(metadata.version(d) == v
                       for d, v in runner_capture._LOADED_VERSIONS.items()),
    "versions": len(runner_capture._LOADED_VERSIONS),
}))
'''


def test_worker_rehearsal_leaves_no_trace(tmp_path: Path) -> None:
    """The warm worker stages its own tiny recipe once before forking (so the forks inherit
    the codecs and tables it set up); afterwards no figure is open, rcParams, the working
    folder and the environment are as before, no temporary folder is left, and the versions
    it remembered are what importlib.metadata (the reference) reports."""
    env = dict(os.environ, TMPDIR=str(tmp_path), MPLBACKEND="Agg")
    run = subprocess.run([sys.executable, "-c", REHEARSAL_CHECK], capture_output=True,
                         text=True, env=env, cwd=tmp_path, check=True)
    got = json.loads(run.stdout.strip().splitlines()[-1])
    # the one setting it changes on purpose: prepared for its forks (keep_prepared)
    assert got["figures"] == [] and got["rc_changed"] == ["svg.hashsalt"]
    assert got["cwd_same"] and got["env_same"] and got["left"] == []
    assert got["versions_ok"] and got["versions"] >= 3   # numpy, pandas, matplotlib at least


PREPARED_CHECK = r'''
import json
import matplotlib
matplotlib.use("Agg")
from figfolio import runner_capture
calls = []
real = matplotlib.rcdefaults
matplotlib.rcdefaults = lambda: (calls.append(1), real())[-1]
matplotlib.rcParams["lines.linewidth"] = 7.0   # a state the worker must undo once
runner_capture.keep_prepared(10**8)             # the warm worker, before it forks
kept = len(calls)
skip = ("svg.hashsalt", "backend", "backend_fallback", "interactive")
same = all(repr(matplotlib.rcParams[k]) == repr(v)
           for k, v in matplotlib.rcParamsDefault.items() if k not in skip)
runner_capture.prepare_matplotlib(10**8)        # a fork's recipe: trusts its parent
first = len(calls)
runner_capture.prepare_matplotlib(10**8)        # another recipe in the same process
print(json.dumps({"kept": kept, "first": first, "second": len(calls), "defaults": same,
                  "salt": matplotlib.rcParams["svg.hashsalt"] == runner_capture.SVG_SALT}))
'''


def test_forks_trust_the_worker_prepared_matplotlib_once(tmp_path: Path) -> None:
    """The warm worker resets matplotlib to its defaults once (``keep_prepared``) so a forked
    recipe skips ``rcdefaults``; the mark is used up by that recipe, so a second recipe in one
    process resets again. Reference for "defaults": matplotlib's own ``rcParamsDefault``."""
    run = subprocess.run([sys.executable, "-c", PREPARED_CHECK], capture_output=True,
                         text=True, env=dict(os.environ, MPLBACKEND="Agg"), cwd=tmp_path,
                         check=True)
    got = json.loads(run.stdout.strip().splitlines()[-1])
    assert got == {"kept": 1, "first": 1, "second": 2, "defaults": True, "salt": True}


def test_worker_freezes_its_heap_and_children_collect_garbage(tmp_path: Path) -> None:
    """Before forking, the warm worker moves its objects to the collector's permanent
    generation (gc.freeze, as Python's documentation advises for pre-fork servers) and turns
    collection back on, so a recipe's own reference cycles are still freed."""
    folder = tmp_path / "cat" / "recipes" / "cycles"
    (tmp_path / "cat" / "figfolio.toml").parent.mkdir(parents=True, exist_ok=True)
    (tmp_path / "cat" / "figfolio.toml").write_text('title = "gc"\nformats = ["png"]\n')
    add(tmp_path / "cat", "cycles", '''
import gc
import matplotlib.pyplot as plt
print("frozen", gc.get_freeze_count(), "enabled", gc.isenabled())
class Node:
    pass
gc.disable()  # so that the collection below, not an automatic one, frees the cycles
for _ in range(1000):
    a, b = Node(), Node()
    a.other, b.other = b, a
print("collected", gc.collect())
gc.enable()
fig, ax = plt.subplots(figsize=(3, 2))
ax.plot([1, 2, 3], color="#0072B2")
ax.set_xlabel("x")
ax.set_ylabel("y")
plt.show()
''', rows=3)
    settings = load_settings(tmp_path / "cat")
    recipe = load_recipe(folder, settings)
    got: list[RunResult] = []
    with LocalExecutor(jobs=1) as executor:
        executor.run([Job.from_recipe(recipe, settings)], tmp_path / "work", got.append)
    out = got[0].stdout_tail
    frozen = int(out.split("frozen ")[1].split()[0])
    assert got[0].status == "ok" and frozen > 100_000 and "enabled True" in out
    assert int(out.split("collected ")[1].split()[0]) >= 2000   # the recipe's cycles


def test_builder_describes_data_once_after_the_screen(catalogue: Path) -> None:
    """The data summary a cold build stores is the one made right after the screen; each
    recipe's columns are classified once (data.table_columns), and the summary's numbers
    agree with numpy's on the same column (reference: numpy.percentile / mean / std)."""
    import numpy as np

    from figfolio import data

    settings = load_settings(catalogue)
    recipes, _ = discover(settings)
    classified: list[str] = []
    real = data._build_columns

    def counting(table, recipe, path):  # type: ignore[no-untyped-def]
        classified.append(recipe.slug if recipe else "")
        return real(table, recipe, path)

    data._build_columns = counting
    try:
        described: dict[str, object] = {"line-1": None}
        assert build.screen_all(recipes, settings, described=described) == ""
    finally:
        data._build_columns = real
    assert sorted(classified) == ["line-0", "line-1", "line-2"]  # the screen, once each
    summary = described["line-1"]
    assert summary == poststep.describe_data(next(r for r in recipes if r.slug == "line-1"),
                                             settings)
    rate = next(c for c in summary[0]["description"]["columns"] if c["name"] == "rate")
    values = np.array([(w * 7) % 11 + 0.5 for w in range(7)])
    assert rate["mean"] == pytest.approx(values.mean(), rel=1e-5)
    assert rate["sd"] == pytest.approx(values.std(ddof=1), rel=1e-5)
    assert rate["median"] == pytest.approx(np.percentile(values, 50), rel=1e-5)

    run_pass(settings, Options(quiet=True))
    from figfolio.cache import Cache
    cache = Cache(settings.cache_path)
    for recipe in recipes:
        entry = cache.lookup(recipe.slug, cache.input_key(recipe, settings))
        assert entry is not None
        assert entry.record["data"] == poststep.describe_data(recipe, settings)


def test_post_step_keeps_a_description_it_was_given(catalogue: Path, tmp_path: Path) -> None:
    settings = load_settings(catalogue)
    recipe = load_recipe(catalogue / "recipes" / "line-0", settings)
    given = [{"name": "data/values.csv", "size": 1, "description": None}]
    record = poststep.stage(RunResult(slug="line-0"), recipe, settings, tmp_path / "stage",
                            given)
    assert record["data"] == given
    fresh = poststep.stage(RunResult(slug="line-0"), recipe, settings, tmp_path / "again")
    assert fresh["data"] == poststep.describe_data(recipe, settings) != given


def test_site_work_done_ahead_is_what_the_pages_use(catalogue: Path) -> None:
    """site.prepare compiles the theme into build/cache/templates and highlights the code
    the pages then show; a script edited afterwards is highlighted afresh, not from the memo.
    Reference: the highlighted HTML, tags stripped and entities decoded (html.unescape, the
    HTML standard's character references), is the script's text."""
    import html

    from figfolio import markup, site

    settings = load_settings(catalogue)
    recipes, _ = discover(settings)
    markup._HIGHLIGHTED.clear()
    site.prepare(settings, recipes)
    assert any((Path(settings.cache_path) / "templates").iterdir())
    assert list(markup._HIGHLIGHTED) == [("figure.py", LINE)]  # three recipes, one text
    shown = markup._HIGHLIGHTED[("figure.py", LINE)]
    assert html.unescape(re.sub(r"<[^>]+>", "", shown)).strip() == LINE.strip()
    run_pass(settings, Options(quiet=True))
    page = (catalogue / "build" / "site" / "r" / "line-0" / "index.html").read_text()
    assert shown in page
    edited = LINE.replace('"Week"', '"Week number"')
    (catalogue / "recipes" / "line-0" / "figure.py").write_text(edited)
    run_pass(settings, Options(quiet=True))
    page = (catalogue / "build" / "site" / "r" / "line-0" / "index.html").read_text()
    assert markup.highlight_code(edited, "figure.py") in page and shown not in page


# Lists what the recipe's process has open: every pipe and socket beside stdout and stderr.
FDS = '''
import os
import matplotlib.pyplot as plt
for fd in sorted(int(n) for n in os.listdir("/proc/self/fd")):
    try:
        target = os.readlink(f"/proc/self/fd/{fd}")
    except OSError:
        continue
    if fd > 2 and target.startswith(("pipe:", "socket:")):
        print("open:", fd, target)
fig, ax = plt.subplots(figsize=(3, 2))
ax.plot([0, 1], [1, 0], color="#0072B2")
ax.set_xlabel("x")
ax.set_ylabel("y")
plt.show()
'''


@pytest.fixture
def posting(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """The pids the workers name in their "posting" frames (the post server of each job)."""
    from figfolio import worker

    seen: list[int] = []
    real = worker.recv_frame

    def spying(fd, deadline=None):  # type: ignore[no-untyped-def]
        frame = real(fd, deadline)
        if isinstance(frame, tuple) and frame and frame[0] == "posting":
            seen.append(int(frame[1]))
        return frame
    monkeypatch.setattr(worker, "recv_frame", spying)
    return seen


def test_one_post_server_stages_every_result_and_recipes_cannot_reach_it(
        catalogue: Path, tmp_path: Path, posting: list[int]) -> None:
    """Each worker stages all its results in one post server (the same pid for every job),
    forked from the worker, which reaps it when it stops; a recipe's process holds no pipe
    besides its stdout and stderr (proc(5): /proc/self/fd), so it cannot talk to the server.
    """
    folders = [add(catalogue, f"fds-{k}", FDS) for k in range(3)]
    settings = load_settings(catalogue)
    jobs = [dataclasses.replace(Job.from_recipe(load_recipe(f, settings), settings),
                                post=poststep.PostSpec(load_recipe(f, settings), settings))
            for f in folders]
    got: list[RunResult] = []
    executor = LocalExecutor(jobs=1)
    try:
        executor.run(jobs, tmp_path / "work", got.append)
        owner = executor._workers[0].proc.pid  # type: ignore[union-attr]
        assert len(posting) == 3 and len(set(posting)) == 1
        server = posting[0]
        status = Path(f"/proc/{server}/status").read_text()
        assert f"PPid:\t{owner}" in status
    finally:
        executor.close()
    assert all(r.status == "ok" and r.staged is not None for r in got), [r.reason for r in got]
    assert all("open:" not in r.stdout_tail for r in got), [r.stdout_tail for r in got]
    assert not Path(f"/proc/{server}").exists()  # reaped by its worker, not left a zombie


def test_a_dead_post_server_is_replaced(catalogue: Path, tmp_path: Path,
                                        posting: list[int]) -> None:
    """Killed between two results: the next result comes back unstaged (the builder stages
    it itself, as for Dask), and the one after is staged by a new server."""
    import signal

    settings = load_settings(catalogue)
    recipe = load_recipe(catalogue / "recipes" / "line-0", settings)
    job = dataclasses.replace(Job.from_recipe(recipe, settings),
                              post=poststep.PostSpec(recipe, settings))
    with LocalExecutor(jobs=1) as executor:
        runner = executor._ensure_workers(1)[0]
        first = runner.run(job, tmp_path / "a")
        assert first.staged is not None
        os.kill(posting[-1], signal.SIGKILL)
        second = runner.run(job, tmp_path / "b")
        third = runner.run(job, tmp_path / "c")
    assert second.status == "ok" and second.staged is None
    assert third.staged is not None and posting[-1] != posting[0]
    assert third.staged["record"]["images"] == first.staged["record"]["images"]
