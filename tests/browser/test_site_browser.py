"""The built site in headless Chromium: search, facets, URL state, recipe page, zip, safety.

Every check runs twice: opened from disk (file://) and served by a local HTTP server under a
path prefix (/team/figs/), because the site promises to work in both. Chromium is Debian's
(/usr/bin/chromium), driven by Playwright for Python; no browser is downloaded. Accessibility
is checked with axe-core from the npm registry (tests/browser/package.json; `npm ci` there).
"""
from __future__ import annotations

import functools
import json
import shutil
import statistics
import subprocess
import sys
import threading
import zipfile
from http.server import ThreadingHTTPServer
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "fixtures"))
import site_view  # noqa: E402

from figfolio.site import publish  # noqa: E402
from figfolio.site_search import entry_fields, tokenize  # noqa: E402
from site_watch import Quiet, new_page  # noqa: E402  (shared with the demo-site tests)

sys.path.insert(0, str(HERE.parents[1] / "benchmarks"))
from search_timing import INDEX_JS, SEARCH_JS, SEARCH_QUERIES  # noqa: E402  (same as the benchmark)

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
        "--disable-background-networking"]
AXE = HERE / "node_modules" / "axe-core" / "axe.min.js"
PREFIX = "/team/figs/"

pytestmark = [pytest.mark.browser,
              pytest.mark.skipif(not CHROMIUM.exists(),
                                 reason="Debian chromium is not installed at /usr/bin/chromium")]


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("browser")
    view, settings = site_view.make_view(tmp, xss=True)
    publish(view, settings, settings.site_path)
    www = tmp / "www"
    shutil.copytree(settings.site_path, www / PREFIX.strip("/"))
    httpd = ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(Quiet, directory=str(www)))
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    yield {"view": view, "path": settings.site_path,
           "file": settings.site_path.as_uri() + "/",
           "http": f"http://127.0.0.1:{httpd.server_address[1]}{PREFIX}"}
    httpd.shutdown()
    httpd.server_close()


@pytest.fixture(scope="module")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield b
        b.close()



def visible_slugs(page) -> list[str]:
    return page.eval_on_selector_all(
        "#fol-cards li[data-doc]:not([hidden]) a.fol-card-link",
        "els => els.map(e => e.getAttribute('href').split('/')[1])")


def expected_for(view, query: str) -> set[str]:
    """Recipes whose words start with every query word (the search's promise)."""
    words = tokenize(query)
    hits = set()
    for e in view["recipes"]:
        tokens = set(tokenize(" ".join(entry_fields(e).values())))
        if all(any(t.startswith(w) for t in tokens) for w in words):
            hits.add(e["slug"])
    return hits


@pytest.mark.parametrize("mode", ["file", "http"])
def test_search_facets_and_url_state(site, browser, mode):
    base = site[mode]
    context, page, watch = new_page(browser, base)
    page.goto(base + "index.html")
    assert len(visible_slugs(page)) == len(site["view"]["recipes"])
    page.keyboard.press("/")
    assert page.evaluate("document.activeElement.id") == "fol-q"
    page.keyboard.type("forest")
    assert set(visible_slugs(page)) == expected_for(site["view"], "forest") == {"forest-effects"}
    page.fill("#fol-q", "tre")   # a prefix: trend, treatment
    assert set(visible_slugs(page)) == expected_for(site["view"], "tre")
    assert len(expected_for(site["view"], "tre")) >= 3
    page.fill("#fol-q", "")
    page.check("input[data-facet=verdict][value=drifted]")
    assert set(visible_slugs(page)) == {"forest-effects", "xss-payloads"}
    page.fill("#fol-q", "weekly")
    assert visible_slugs(page) == ["xss-payloads"] or set(visible_slugs(page)) == {
        e["slug"] for e in site["view"]["recipes"] if e["verdict"] == "drifted"} & \
        expected_for(site["view"], "weekly")
    shared = page.url
    assert "q=weekly" in shared and "verdict=drifted" in shared
    # a fresh page restores the search from the URL
    other = context.new_page()
    other.goto(shared)
    assert other.input_value("#fol-q") == "weekly"
    assert other.is_checked("input[data-facet=verdict][value=drifted]")
    assert visible_slugs(other) == visible_slugs(page)
    other.goto(base + "index.html#tag=trend")
    assert set(visible_slugs(other)) == {e["slug"] for e in site["view"]["recipes"]
                                         if "trend" in e["tags"]}
    assert watch.errors == [] and watch.outside() == []
    assert page.evaluate("window.__violations") == []
    context.close()


@pytest.mark.parametrize("mode", ["file", "http"])
def test_recipe_page_figure_code_data_and_zip(site, browser, mode, tmp_path):
    base = site[mode]
    context, page, watch = new_page(browser, base)
    page.goto(base + "r/clinic-visits/index.html")
    img = page.locator(".fol-figure img").first
    assert img.get_attribute("alt").startswith("Line chart of value by week")
    assert page.evaluate("document.querySelector('.fol-figure img').naturalWidth") > 100
    assert "def main()" in page.inner_text("#fol-code-text")
    assert page.locator("pre.fol-code .fol-t-k").count() > 0           # highlighted
    rows = page.locator("table.fol-preview tbody tr")
    assert rows.count() == 5 and "north" in rows.first.inner_text()
    assert page.locator("table.fol-columns svg.fol-spark").count() >= 2
    page.click("button[data-copy=fol-copy-line]")
    page.wait_for_function(
        "document.querySelector('button[data-copy=fol-copy-line] .fol-copy-label')"
        ".textContent !== 'Copy'")
    with page.expect_download() as info:
        page.click("a[href='clinic-visits.zip']")
    saved = tmp_path / "recipe.zip"
    info.value.save_as(saved)
    with zipfile.ZipFile(saved) as zf:
        zf.extractall(tmp_path / "unpacked")
    folder = tmp_path / "unpacked" / "clinic-visits"
    run = subprocess.run([sys.executable, "figure.py"], cwd=folder, capture_output=True,
                         text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert (folder / "figure-1.png").stat().st_size > 1000
    # navigate on to the other pages; nothing may break on any of them
    for path in ("r/forest-effects/index.html", "r/bland-agreement/index.html",
                 "r/growth-curves/index.html", "report.html", "contribute.html"):
        page.goto(base + path)
        page.wait_for_load_state("load")
        assert page.evaluate("window.__violations") == [], path
    assert watch.errors == [], watch.errors
    assert watch.outside() == [], watch.outside()
    context.close()


@pytest.mark.parametrize("mode", ["file", "http"])
def test_script_injection_payloads_do_nothing(site, browser, mode):
    base = site[mode]
    context, page, watch = new_page(browser, base)
    for path in ("r/xss-payloads/index.html", "index.html", "report.html"):
        page.goto(base + path)
        page.wait_for_load_state("load")
        page.mouse.move(200, 300)
        for link in page.locator(".fol-prose a").all():
            link.hover()
        assert page.evaluate("window.__violations") == [], path
    page.goto(base + "index.html")
    page.fill("#fol-q", "alert")
    assert watch.dialogs == []
    assert watch.outside() == []
    # the only failed load allowed is the payload's own harmless <img src="x">
    assert all("Failed to load resource" in e for e in watch.errors), watch.errors
    context.close()


@pytest.mark.skipif(not AXE.exists(), reason="axe-core missing: run `npm ci` in tests/browser")
@pytest.mark.parametrize("scheme", ["light", "dark"])
def test_no_serious_accessibility_violations(site, browser, scheme):
    # axe-core is injected as a script tag, which the site's CSP would rightly block, so this
    # context alone bypasses CSP.
    context = browser.new_context(bypass_csp=True, color_scheme=scheme)
    page = context.new_page()
    problems = {}
    for path in ("index.html", "r/forest-effects/index.html", "r/bland-agreement/index.html",
                 "report.html", "contribute.html"):
        page.goto(site["file"] + path)
        page.add_script_tag(path=str(AXE))
        result = page.evaluate("axe.run(document, {resultTypes: ['violations']})")
        bad = [f"{v['id']}: {v['help']} ({len(v['nodes'])})" for v in result["violations"]
               if v["impact"] in ("serious", "critical")]
        if bad:
            problems[path] = bad
    assert problems == {}
    context.close()


def test_search_keystroke_over_5000_recipes(browser, tmp_path):
    """Median time of one keystroke's search over 5,000 recipes, in Chromium (target ≤ 16 ms)."""
    from figfolio.site_search import build_index, index_script

    entries = site_view.fake_entries(5000)
    (tmp_path / "search-index.js").write_text(index_script(build_index(entries)), "utf-8")
    theme = Path(__file__).resolve().parents[2] / "site_template" / "static" / "search.js"
    shutil.copy(theme, tmp_path / "search.js")
    (tmp_path / "bench.html").write_text(
        "<!DOCTYPE html><html lang=en><title>bench</title><script src=search-index.js></script>"
        "<script src=search.js></script>", "utf-8")
    page = browser.new_page()
    page.goto((tmp_path / "bench.html").as_uri())
    times = page.evaluate(SEARCH_JS % json.dumps(SEARCH_QUERIES))
    median = statistics.median(times)
    print(f"\nsearch over 5,000 recipes: median {median:.2f} ms, max {max(times):.2f} ms "
          f"(index {len((tmp_path / 'search-index.js').read_bytes()) / 1e6:.1f} MB)")
    assert median <= 16.0
    page.close()


def test_index_page_keystroke_with_5000_cards(browser, tmp_path):
    """The whole keystroke on a real index page of 5,000 cards: search, show, forced layout."""
    from figfolio.site import _common, _write_assets, _write_top_pages
    from figfolio.site_render import make_env

    entries = site_view.fake_entries(5000)
    view = {"title": "bench", "recipes": entries}
    _write_assets(tmp_path, tmp_path / "site" / "assets")
    _write_top_pages(make_env(tmp_path), view, entries, _common(view), tmp_path / "site")
    page = browser.new_page()
    page.goto((tmp_path / "site" / "index.html").as_uri())
    page.wait_for_function("document.getElementById('fol-status').textContent.includes('first')")
    assert page.locator("#fol-cards li:not([hidden])").count() == 120
    times = page.evaluate(INDEX_JS)
    median = statistics.median(times)
    print(f"\nindex keystroke with 5,000 cards (search + DOM + layout): median {median:.1f} ms, "
          f"max {max(times):.1f} ms")
    page.click("#fol-more")
    assert page.locator("#fol-cards li:not([hidden])").count() > 120 or \
        page.locator("#fol-more").is_hidden()
    assert median <= 50.0   # generous: a 2-core CI machine; the search itself is checked above
    page.close()
