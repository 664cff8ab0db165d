"""Keystroke timing of the site's in-browser search over N invented recipes, in headless Chromium.

Run alone: ``.venv/bin/python benchmarks/search_timing.py [-n 5000]``; ``bench_build.py`` calls
``search_timing(n)``. Two figures, both medians over many keystrokes:

* ``search_keystroke_median_ms``: one call of the theme's search (``FigfolioSearch.run``) over
  the real ``search-index.js`` that figfolio writes for N recipes (target <= 16 ms: one frame
  at 60 Hz);
* ``index_keystroke_median_ms``: the whole keystroke on a real index page with N cards: input
  event, search, showing and hiding cards, forced style and layout.

Same approach as tests/browser/test_site_browser.py; Debian's Chromium driven by Playwright,
no browser download, nothing fetched from the network.
"""
from __future__ import annotations

import argparse
import json
import random
import shutil
import statistics
import tempfile
from pathlib import Path
from typing import Any

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
        "--disable-background-networking"]
WORDS = ("forest", "kaplan", "meier", "scatter", "dose", "response", "heat", "map", "cluster",
         "trend", "weekly", "clinic", "visits", "growth", "curve", "agreement", "bland",
         "survival", "hazard", "ratio", "odds", "funnel", "meta", "analysis", "small",
         "multiples", "histogram", "density", "violin", "box", "regression", "spline",
         "loess", "residual", "calibration", "roc", "lift", "waterfall", "sankey", "ridge",
         "panel", "cohort", "incidence", "prevalence", "district", "seasonal", "lag",
         "exposure", "biomarker", "assay", "titre", "plate", "batch", "effect", "pooled")
SEARCH_QUERIES = ["f", "fo", "for", "fore", "fores", "forest", "forest p", "forest pl",
                  "k", "ka", "kap", "kaplan", "kaplan m", "kaplan me", "s", "sc", "sca",
                  "scatter", "d", "do", "dose", "dose r", "dose res", "dose response",
                  "a", "au", "aut", "author", "author 1", "author 12"]


def fake_entries(count: int, seed: int = 5000) -> list[dict[str, Any]]:
    """Text-only view entries, invented and seeded: enough for the index and the cards."""
    rng = random.Random(seed)
    out = []
    for i in range(count):
        w = [rng.choice(WORDS) for _ in range(12)]
        out.append({"slug": f"r-{i:05d}", "title": f"{w[0]} {w[1]} {w[2]} {i}",
                    "summary": " ".join(w[3:9]), "tags": w[9:11], "methods": [w[11]],
                    "authors": [f"Author {i % 97}"], "readme_markdown": " ".join(w) * 3,
                    "data_files": [{"description": {"columns": [{"name": f"col_{w[4]}"}]}}],
                    "verdict": ["reproduced", "drifted", "changed"][i % 3],
                    "data_origin": "synthetic", "audit": {"findings": []}})
    return out


SEARCH_JS = """() => {
  const idx = window.FIGFOLIO_INDEX, S = window.FigfolioSearch, out = [];
  const queries = %s;
  for (let round = 0; round < 3; round++) {
    for (const q of queries) {
      const t0 = performance.now();
      S.run(idx, q, {tag: [], method: [], verdict: round === 2 ? ['drifted'] : [],
                     origin: [], audit: []});
      out.push(performance.now() - t0);
    }
  }
  return out;
}"""

INDEX_JS = """async () => {
  const input = document.getElementById('fol-q'), out = [];
  for (const q of ['f','fo','for','fore','fores','forest','k','ka','kap','kapl','kaplan',
                   's','sc','sca','d','do','dos','dose']) {
    const t0 = performance.now();
    input.value = q;
    input.dispatchEvent(new Event('input'));
    document.body.offsetHeight;            // force style and layout
    out.push(performance.now() - t0);
    await new Promise(r => requestAnimationFrame(() => setTimeout(r, 0)));
  }
  return out;
}"""


def _write_search_page(folder: Path, entries: list[dict[str, Any]]) -> Path:
    from figfolio.site_render import default_theme
    from figfolio.site_search import build_index, index_script

    (folder / "search-index.js").write_text(index_script(build_index(entries)), "utf-8")
    shutil.copy(default_theme() / "static" / "search.js", folder / "search.js")
    page = folder / "bench.html"
    page.write_text("<!DOCTYPE html><html lang=en><title>bench</title>"
                    "<script src=search-index.js></script><script src=search.js></script>",
                    "utf-8")
    return page


def _write_index_page(folder: Path, entries: list[dict[str, Any]]) -> Path:
    from figfolio.site import _common, _write_assets, _write_top_pages
    from figfolio.site_render import make_env

    view = {"title": "bench", "recipes": entries}
    _write_assets(folder, folder / "site" / "assets")
    _write_top_pages(make_env(folder), view, entries, _common(view), folder / "site")
    return folder / "site" / "index.html"


def search_timing(count: int = 5000) -> dict[str, Any]:
    """Median keystroke times over ``count`` recipes; raises when Chromium is missing."""
    from playwright.sync_api import sync_playwright

    if not Path(CHROMIUM).exists():
        raise RuntimeError(f"{CHROMIUM} is not installed")
    entries = fake_entries(count)
    tmp = Path(tempfile.mkdtemp(prefix="figfolio-search-"))
    try:
        search_page = _write_search_page(tmp, entries)
        index_page = _write_index_page(tmp, entries)
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
            try:
                page = browser.new_page()
                page.goto(search_page.as_uri())
                search = page.evaluate(SEARCH_JS % json.dumps(SEARCH_QUERIES))
                page.close()
                page = browser.new_page()
                page.goto(index_page.as_uri())
                page.wait_for_function(
                    "document.getElementById('fol-status').textContent.includes('first')")
                keystrokes = page.evaluate(INDEX_JS)
                page.close()
            finally:
                browser.close()
        size = (tmp / "search-index.js").stat().st_size
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return {"search_n": count,
            "search_keystroke_median_ms": statistics.median(search),
            "search_keystroke_max_ms": max(search),
            "index_keystroke_median_ms": statistics.median(keystrokes),
            "index_keystroke_max_ms": max(keystrokes),
            "search_index_mb": size / 1e6}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("-n", type=int, default=5000, help="recipes in the index")
    args = parser.parse_args()
    for key, value in search_timing(args.n).items():
        print(f"{key:30s} {value:.3f}" if isinstance(value, float) else f"{key:30s} {value}")


if __name__ == "__main__":
    main()
