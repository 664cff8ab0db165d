"""markup.py: untrusted Markdown becomes safe HTML; code is highlighted without inline styles.

Checks parse the output with Python's own HTML parser (html.parser, which follows the WHATWG
tokenizer closely enough for attribute extraction) rather than searching strings, so an escaped
``&lt;script&gt;`` in text is not mistaken for a tag.
"""
from __future__ import annotations

import json
import re
from html.parser import HTMLParser

from hypothesis import given, settings, strategies as st

from figfolio import markup


class Collect(HTMLParser):
    """Every start tag with its attributes (entities decoded, as a browser would)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    handle_startendtag = handle_starttag


def tags_of(html: str) -> list[tuple[str, dict[str, str | None]]]:
    parser = Collect()
    parser.feed(html)
    parser.close()
    return parser.tags


# Browsers strip ASCII tab/newline and leading C0 controls/space from URLs before reading the
# scheme (WHATWG URL standard, "basic URL parser": remove leading/trailing C0 control or space,
# remove all ASCII tab or newline), so "java\tscript:" is a javascript: URL too.
def url_scheme(value: str) -> str:
    cleaned = re.sub(r"[\t\n\r]", "", value).strip("\x00- ").lower()
    match = re.match(r"^([a-z][a-z0-9+.\-]*):", cleaned)
    return match.group(1) if match else ""


def assert_safe(html: str) -> None:
    for tag, attrs in tags_of(html):
        assert tag not in ("script", "iframe", "object", "embed", "style", "svg", "math", "form",
                           "base", "meta", "link"), html
        for name, value in attrs.items():
            assert not name.startswith("on"), html           # event handler attributes
            assert name != "style", html                      # CSP style-src without inline
            if name in ("href", "src", "action", "formaction", "xlink:href") and value:
                assert url_scheme(value) in ("", "http", "https", "mailto"), html
                if tag == "img":
                    assert url_scheme(value) == "" and not value.startswith("//"), html


def test_payloads_from_the_owasp_filter_evasion_list_are_removed():
    # Payload shapes from the OWASP XSS Filter Evasion Cheat Sheet (from memory).
    payloads = [
        "<script>alert(1)</script>", "[x](javascript:alert(1))", "[x](JaVaScRiPt:alert(1))",
        "[x](java\tscript:alert(1))", '<a href="jav&#x09;ascript:alert(1)">x</a>',
        '<a onclick="alert(1)" href="#">x</a>', "<img src=x onerror=alert(1)>",
        '<svg onload="alert(1)">', '<iframe src="javascript:alert(1)"></iframe>',
        '<p style="background:url(javascript:alert(1))">x</p>', "![i](javascript:alert(1))",
        '<a href="data:text/html;base64,PHNjcmlwdD4=">x</a>', "<math><mi xlink:href=x>",
        '<form action="javascript:alert(1)"><button>x</button></form>',
        '<img src="https://tracker.example/pixel.png">', "<base href=//evil.example/>",
    ]
    for p in payloads:
        assert_safe(markup.render_markdown(p))


def test_tables_code_and_links_survive():
    html = markup.render_markdown(
        "| a | b |\n|---|---|\n| 1 | 2 |\n\n```python\nx = 1\n```\n\n"
        "[docs](https://example.org) [data](files/data/a.csv) [mail](mailto:a@b.example)\n")
    names = [t for t, _ in tags_of(html)]
    assert {"table", "thead", "tbody", "td", "pre", "code", "a"} <= set(names)
    hrefs = [a["href"] for t, a in tags_of(html) if t == "a"]
    assert hrefs == ["https://example.org", "files/data/a.csv", "mailto:a@b.example"]
    assert 'class="fol-t-' in html  # the fence was highlighted


def test_highlighting_uses_classes_only_and_escapes():
    html = markup.highlight_code('s = "</code><script>"\n', "figure.py")
    assert "<script" not in html and "&lt;script&gt;" in html
    assert "style=" not in html and 'class="fol-t-' in html


def test_notebook_shows_code_cells_only():
    nb = {"cells": [{"cell_type": "markdown", "source": ["# title"]},
                    {"cell_type": "code", "source": ["import numpy\n", "x = 1"]}],
          "metadata": {}, "nbformat": 4, "nbformat_minor": 5}
    text = json.dumps(nb)
    assert markup.code_text(text, "figure.ipynb") == "import numpy\nx = 1\n"
    html = markup.highlight_code(text, "figure.ipynb")
    assert "nbformat" not in html and "numpy" in html and "# title" not in html


def test_r_script_gets_an_r_lexer():
    html = markup.highlight_code("x <- c(1, 2)\n", "figure.R")
    assert "fol-t-o" in html  # '<-' recognised as an operator, not plain text


# Hypothesis: text built from fragments that attackers combine, in any order.
FRAGMENTS = st.sampled_from([
    "<", ">", '"', "'", "=", "/", " ", "\n", "\t", "javascript:", "JAVASCRIPT:", "java\tscript:",
    "&#106;", "&#x6A;", "vbscript:", "data:", "script", "<script>", "</script>", "onerror",
    "onclick", " on", "href", "src", "<a ", "<img ", "<svg", "<iframe", "style", "[x](", ")",
    "![i](", "```", "<!--", "-->", "alert(1)", "http://x", "`", "*", "|", "-", "#", "<p ",
])


@settings(max_examples=300, deadline=None)
@given(st.lists(FRAGMENTS, max_size=30).map("".join) | st.text(max_size=200))
def test_property_rendered_markdown_is_always_safe(text):
    html = markup.render_markdown(text)
    assert "<script" not in html.lower()
    assert_safe(html)
