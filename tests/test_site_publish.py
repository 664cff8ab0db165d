"""site.publish: pages, links, files, zips, atomic swap, overrides, incremental re-rendering."""
from __future__ import annotations

import io
import sys
import time
import zipfile
import zlib
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import numpy as np
import pytest
from sklearn.metrics import jaccard_score

sys.path.insert(0, str(Path(__file__).parent / "fixtures"))
import site_view  # noqa: E402

from figfolio.site import CSP, publish  # noqa: E402
from figfolio.site_files import SiteError, safe_parts  # noqa: E402
from figfolio.site_pages import related_map  # noqa: E402
from figfolio.site_search import build_index, tokenize  # noqa: E402


class Page(HTMLParser):
    """Start tags, attributes and script bodies of one page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.texts: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    handle_startendtag = handle_starttag

    def handle_data(self, data):
        self.texts.append(data)


def parse(path: Path) -> Page:
    page = Page()
    page.feed(path.read_text(encoding="utf-8"))
    return page


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("site")
    view, settings = site_view.make_view(tmp, xss=True)
    out = settings.site_path
    publish(view, settings, out)
    return view, settings, out


def html_pages(site: Path) -> list[Path]:
    return sorted(site.rglob("*.html"))


def test_every_page_exists(built):
    view, _, site = built
    names = {p.relative_to(site).as_posix() for p in html_pages(site)}
    assert {"index.html", "report.html", "contribute.html"} <= names
    for entry in view["recipes"]:
        assert f"r/{entry['slug']}/index.html" in names
    assert (site / "search-index.js").read_text().startswith("window.FIGFOLIO_INDEX=")
    assert not list(site.parent.glob(".site-tmp-*")) and not (site.parent / ".site-old").exists()


def test_csp_and_no_inline_code_or_style(built):
    # The policy text is the one the issue requires; CSP Level 3 (W3C) forbids inline script
    # and style attributes under script-src/style-src 'self' without 'unsafe-inline'.
    for path in html_pages(built[2]):
        page = parse(path)
        metas = [a for t, a in page.tags if t == "meta" and a.get("http-equiv")]
        assert [m["content"] for m in metas] == [CSP], path
        for tag, attrs in page.tags:
            assert tag != "style", path
            assert "style" not in attrs, (path, tag)
            assert not any(k.startswith("on") for k in attrs), (path, tag, attrs)
            if tag == "script":
                assert attrs.get("src"), f"inline script in {path}"


def test_every_link_is_relative_and_resolves(built):
    site = built[2]
    for path in html_pages(site):
        for tag, attrs in parse(path).tags:
            for key in ("href", "src", "srcset"):
                value = attrs.get(key)
                if not value:
                    continue
                targets = [v.strip().split(" ")[0] for v in value.split(",")] \
                    if key == "srcset" else [value]
                for target in targets:
                    parts = urlsplit(target)
                    if tag == "a" and parts.scheme in ("http", "https", "mailto"):
                        continue  # a link the reader may follow; the page itself fetches nothing
                    assert not parts.scheme and not parts.netloc and not target.startswith("/"), \
                        (path, target)
                    if not parts.path or (path.parent.name == "xss-payloads" and target == "x"):
                        continue  # the payload's own <img src=x>, harmless once sanitised
                    resolved = (path.parent / unquote(parts.path)).resolve()
                    assert resolved.exists(), (path, target)
                    assert site.resolve() in resolved.parents, (path, target)


def test_untrusted_text_is_escaped(built):
    site = built[2]
    page = site / "r" / "xss-payloads" / "index.html"
    raw = page.read_text(encoding="utf-8")
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in raw
    parsed = parse(page)
    assert all(t != "script" or a.get("src") for t, a in parsed.tags)
    assert not any(t == "img" and "onerror" in a for t, a in parsed.tags)
    assert "&lt;/pre&gt;&lt;script&gt;alert(10)&lt;/script&gt;" in raw    # stdout, as text
    assert "&#34;&gt;&lt;img src=x onerror=alert(1)&gt;" in raw  # the tag payload, as text
    assert "javascript:" not in " ".join(str(a.get("href")) for t, a in parsed.tags)
    # the odd file name is percent-encoded in the link and the file is really there
    links = [a["href"] for t, a in parsed.tags if t == "a" and "data/" in (a.get("href") or "")]
    assert any("we%3Cird%22%27.csv" in h for h in links), links
    assert (site / "r" / "xss-payloads" / "data" / "we<ird\"'.csv").is_file()


def test_restricted_data_is_not_published(built):
    site = built[2]
    folder = site / "r" / "bland-agreement"
    assert not (folder / "data").exists()
    text = folder.joinpath("index.html").read_text(encoding="utf-8")
    assert "Data withheld" in text and "First 5 rows" not in text
    assert "north" not in text.split("Data withheld")[1].split("</section>")[0]


def test_caution_on_pages_with_data(built):
    site = built[2]
    for entry in built[0]["recipes"]:
        text = (site / "r" / entry["slug"] / "index.html").read_text(encoding="utf-8")
        assert ("an aid, not a guarantee" in text) == bool(entry["data_files"])


def test_zip_is_reproducible_sorted_and_filtered(built, tmp_path):
    view, settings, site = built
    first = (site / "r" / "clinic-visits" / "clinic-visits.zip").read_bytes()
    publish(view, settings, tmp_path / "again")
    assert (tmp_path / "again" / "r" / "clinic-visits" / "clinic-visits.zip").read_bytes() == first
    # zipfile is the reference reader of the PKWARE APPNOTE format here.
    with zipfile.ZipFile(io.BytesIO(first)) as zf:
        names = zf.namelist()
        assert names == sorted(names)
        assert all(n.startswith("clinic-visits/") for n in names)
        assert "clinic-visits/notes.tmp" not in names  # not in entry["files"]
        assert set(names) == {f"clinic-visits/{f}" for f in view["recipes"][0]["files"]}
        assert {i.date_time for i in zf.infolist()} == {(1980, 1, 1, 0, 0, 0)}
        assert zf.testzip() is None
        # Deflate level 1 (site_files.ZIP_LEVEL): each entry's stored stream equals zlib's
        # raw deflate of the file at that level (zlib is the reference compressor; the local
        # header is 30 bytes plus name and extra field, APPNOTE 4.3.7).
        for info in zf.infolist():
            start = info.header_offset
            name_len = int.from_bytes(first[start + 26:start + 28], "little")
            extra_len = int.from_bytes(first[start + 28:start + 30], "little")
            body = start + 30 + name_len + extra_len
            stored = first[body:body + info.compress_size]
            packer = zlib.compressobj(1, zlib.DEFLATED, -15)
            assert stored == packer.compress(zf.read(info)) + packer.flush(), info.filename


def test_report_lists_outputs_diffs_and_broken(built):
    site = built[2]
    page = parse(site / "report.html")
    text = " ".join(page.texts)
    assert "Growth curves by cohort" in text and "ValueError: bad <value>" in text
    imgs = [a["src"] for t, a in page.tags if t == "img"]
    assert "r/forest-effects/diff-figure-1.png.png" in imgs
    assert "r/forest-effects/figure-1.png" in imgs
    rows = [t for t, _ in page.tags if t == "tr"]
    assert len(rows) - 2 == sum(len(e["outputs"]) for e in built[0]["recipes"]) + sum(
        len(e["audit"]["findings"]) for e in built[0]["recipes"])


def test_contribute_default_and_own_text(built, tmp_path):
    view, settings, site = built
    assert "fingerprints.json" in (site / "contribute.html").read_text(encoding="utf-8")
    own = dict(view, contribute_markdown="# Our way\n\n<script>alert(1)</script>Ask Ana.")
    publish(own, settings, tmp_path / "s")
    text = (tmp_path / "s" / "contribute.html").read_text(encoding="utf-8")
    assert "Our way" in text and "Ask Ana." in text and "<script>alert" not in text


def test_failed_build_leaves_old_site_whole(built, tmp_path):
    view, settings, _ = built
    out = tmp_path / "site"
    publish(view, settings, out)
    before = (out / "index.html").read_bytes()
    theme = settings.root / "site_template" / "layouts"
    theme.mkdir(parents=True)
    (theme / "report.html").write_text("{% extends 'layouts/base.html' %}{% block main %}"
                                       "{% for x in %}{% endblock %}", encoding="utf-8")
    try:
        with pytest.raises(SiteError) as err:
            publish(view, settings, out)
        assert "report.html" in err.value.render() and "site_template" in err.value.render()
    finally:
        (theme / "report.html").unlink()
    assert (out / "index.html").read_bytes() == before
    assert not list(tmp_path.glob(".site-tmp-*"))


def test_catalogue_theme_overrides_file_by_file(built, tmp_path):
    view, settings, _ = built
    theme = settings.root / "site_template"
    (theme / "static").mkdir(parents=True, exist_ok=True)
    (theme / "layouts").mkdir(parents=True, exist_ok=True)
    (theme / "static" / "style.css").write_text("/* our colours */\n", encoding="utf-8")
    (theme / "layouts" / "contribute.html").write_text(
        "{% extends 'layouts/base.html' %}{% block main %}<p>OWN-CONTRIBUTE</p>"
        "{% endblock %}", encoding="utf-8")
    try:
        publish(view, settings, tmp_path / "s")
    finally:
        (theme / "static" / "style.css").unlink()
        (theme / "layouts" / "contribute.html").unlink()
    s = tmp_path / "s"
    assert (s / "assets" / "style.css").read_text() == "/* our colours */\n"
    assert (s / "assets" / "app.js").stat().st_size > 1000          # default kept
    assert "OWN-CONTRIBUTE" in (s / "contribute.html").read_text()
    assert "Search recipes" in (s / "index.html").read_text()       # default kept


def test_incremental_rerenders_changed_and_neighbours_only(built, tmp_path):
    view, settings, _ = built
    out = tmp_path / "site"
    publish(view, settings, out)
    inode = {e["slug"]: (out / "r" / e["slug"] / "index.html").stat().st_ino
             for e in view["recipes"]}
    changed = [dict(e) for e in view["recipes"]]
    changed[0]["title"] = "Weekly clinic visits, renamed"   # clinic-visits
    publish(dict(view, recipes=changed), settings, out, changed_slugs={"clinic-visits"})
    after = {e["slug"]: (out / "r" / e["slug"] / "index.html").stat().st_ino for e in changed}
    # clinic-visits changed; forest-effects is its next page and bland-agreement shares the
    # tag "trend" (related), so both show the new title and must be re-rendered.
    assert after["clinic-visits"] != inode["clinic-visits"]
    for slug in ("forest-effects", "bland-agreement"):
        assert "Weekly clinic visits, renamed" in (out / "r" / slug / "index.html").read_text()
    # growth-curves neither shares a tag nor sits next to clinic-visits: reused by hard link.
    assert after["growth-curves"] == inode["growth-curves"]
    assert "Weekly clinic visits, renamed" in (out / "index.html").read_text()


def test_unsafe_names_are_refused():
    for bad in ("../x", "/etc/passwd", "a/../../b", "", "..", "a/b/.."):
        with pytest.raises(SiteError):
            safe_parts(bad)
    assert safe_parts("data/we<ird\"'.csv") == ["data", "we<ird\"'.csv"]


def test_related_matches_sklearn_jaccard():
    entries = site_view.fake_entries(60, seed=3)
    got = related_map(entries)
    vocab = sorted({t for e in entries for t in e["tags"]})
    vec = {e["slug"]: np.array([t in e["tags"] for t in vocab]) for e in entries}
    for i, e in enumerate(entries):
        # scikit-learn's jaccard_score on binary tag indicators is the reference similarity.
        scores = [(-jaccard_score(vec[e["slug"]], vec[o["slug"]]), j, o["slug"])
                  for j, o in enumerate(entries) if o is not e and set(o["tags"]) & set(e["tags"])]
        assert got[e["slug"]] == [s for _, _, s in sorted(scores)[:4]]


def test_search_index_postings_agree_with_brute_force():
    entries = site_view.fake_entries(200)
    index = build_index(entries)
    assert index["terms"] == sorted(index["terms"], key=lambda t: t.encode("utf-16-be"))
    term = index["terms"][len(index["terms"]) // 2]
    row = index["postings"][index["terms"].index(term)]
    docs = {int(row[i]) for i in range(0, len(row), 2)}
    assert docs == {i for i, e in enumerate(entries) if term in tokenize(e_text(e))}
    # Accents go (NFKD, Unicode Standard Annex #15), letters of other scripts stay.
    assert tokenize("Kaplan–Meier CURVES, Größe, Ωmega_2") == [
        "kaplan", "meier", "curves", "große", "ωmega", "2"]


def e_text(e):
    cols = [c["name"] for d in e["data_files"] for c in d["description"]["columns"]]
    return " ".join([e["title"], e["summary"], " ".join(e["tags"]), " ".join(e["methods"]),
                     " ".join(e["authors"]), e["readme_markdown"], " ".join(cols)])


def test_render_500_recipe_pages_timing(tmp_path, capsys):
    view, settings = site_view.make_bulk_view(tmp_path, 500)
    out = settings.site_path
    start = time.perf_counter()
    publish(view, settings, out)
    full = time.perf_counter() - start
    changed = {view["recipes"][10]["slug"]}
    start = time.perf_counter()
    publish(view, settings, out, changed_slugs=changed)
    incremental = time.perf_counter() - start
    with capsys.disabled():
        print(f"\n500 recipe pages: full publish {full:.2f} s, incremental {incremental:.2f} s")
    assert len(list((out / "r").iterdir())) == 500
    assert full < 60 and incremental < full


def _tree(site: Path) -> dict[str, bytes]:
    return {p.relative_to(site).as_posix(): p.read_bytes()
            for p in sorted(site.rglob("*")) if p.is_file()}


HELPER_CHECK = r"""
import json, os, sys
from pathlib import Path
sys.path.insert(0, sys.argv[2])
import site_view
from figfolio import site as site_module
from figfolio.site import publish
from figfolio.site_files import fork_helper
tmp = Path(sys.argv[1])
view, settings = site_view.make_bulk_view(tmp, 40)
forked = []
def counting(work):
    pid = fork_helper(work)
    forked.append(pid)
    return pid
site_module.fork_helper = counting
publish(view, settings, tmp / "two")
site_module.fork_helper = lambda work: None
publish(view, settings, tmp / "one")
def dying(work):
    pid = os.fork()
    if pid == 0:
        os._exit(3)          # dies before rendering anything
    return pid
site_module.fork_helper = dying
publish(view, settings, tmp / "rescued")
print(json.dumps({"forked": forked}))
"""


def test_helper_process_renders_the_same_site(tmp_path):
    """Many pages are rendered by this process and a forked helper (every other page); the
    site must be byte for byte what one process writes, and a helper that dies without doing
    its work is made good by the parent. Run in a fresh interpreter: the helper is only
    forked from a process with no other thread, and pytest's may have some."""
    import json
    import subprocess
    fixtures = str(Path(__file__).parent / "fixtures")
    run = subprocess.run([sys.executable, "-c", HELPER_CHECK, str(tmp_path), fixtures],
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr[-3000:]
    forked = json.loads(run.stdout.strip().splitlines()[-1])["forked"]
    assert forked and forked[0] is not None               # the helper really ran
    one = _tree(tmp_path / "one")
    assert len([k for k in one if k.endswith("index.html")]) == 41
    assert _tree(tmp_path / "two") == one
    assert _tree(tmp_path / "rescued") == one


def test_no_helper_while_other_threads_run():
    """A fork copies no thread but their locks: with a second thread alive (serve's web
    server) the pages are rendered in this process only."""
    import threading
    from figfolio.site_files import fork_helper
    stop = threading.Event()
    thread = threading.Thread(target=stop.wait, daemon=True)
    thread.start()
    try:
        assert fork_helper(lambda: None) is None
    finally:
        stop.set()
        thread.join()
