"""Markdown -> sanitised HTML, and code highlighting, for the catalogue site.

Why a module of its own: every README and every script shown on the site comes from a pull
request, so it is untrusted. Markdown is rendered with markdown-it (CommonMark + tables) and the
result is *always* passed through nh3 with a short allow-list: no script, no event attributes,
no ``style``, links only to http/https/mailto or relative targets, images only from inside the
site (the site must never make a request elsewhere). Code is highlighted with Pygments into
class-only spans (no inline styles), so the strict Content-Security-Policy holds.
"""
from __future__ import annotations

import json
import re
from functools import lru_cache
from urllib.parse import urlsplit

import nh3
from markdown_it import MarkdownIt
from pygments import highlight
from pygments.formatters import HtmlFormatter
from pygments.lexers import PythonLexer, TextLexer, get_lexer_for_filename
from pygments.token import STANDARD_TYPES
from pygments.util import ClassNotFound

TOKEN_PREFIX = "fol-t-"

ALLOWED_TAGS = {
    "a", "abbr", "b", "blockquote", "br", "caption", "code", "dd", "del", "details", "dl", "dt",
    "em", "h1", "h2", "h3", "h4", "h5", "h6", "hr", "i", "img", "kbd", "li", "ol", "p", "pre",
    "q", "s", "samp", "span", "strong", "sub", "summary", "sup", "table", "tbody", "td", "tfoot",
    "th", "thead", "tr", "ul", "var",
}
ALLOWED_ATTRIBUTES = {
    "a": {"href", "title"},
    "img": {"src", "alt", "title", "width", "height"},
    "th": {"align", "colspan", "rowspan"},
    "td": {"align", "colspan", "rowspan"},
    "ol": {"start"},
    "abbr": {"title"},
}
URL_SCHEMES = {"http", "https", "mailto"}


def _token_classes() -> set[str]:
    """Every class name Pygments may emit with our prefix (the only classes README HTML may keep)."""
    return {TOKEN_PREFIX + short for short in STANDARD_TYPES.values() if short}


def _attribute_filter(tag: str, attr: str, value: str) -> str | None:
    """Drop image sources that would leave the site; nh3 already removed bad URL schemes.

    Why: a README image from another host would make the page fetch from the internet (and
    break the CSP ``img-src 'self'``), so only relative image paths survive.
    """
    if tag == "img" and attr == "src":
        parts = urlsplit(value.strip())
        if parts.scheme or parts.netloc or value.strip().startswith("//"):
            return None
    return value


# One start tag of an anchor as nh3 (html5ever) serialises it: attribute values are always
# double-quoted and never contain a raw '"', so this matches the whole tag exactly.
_ANCHOR = re.compile(r'<a((?:\s+[^\s="]+="[^"]*")*)\s*>')
_REL = re.compile(r'\s+rel="[^"]*"')


def _drop_rel_without_href(html: str) -> str:
    """Remove ``rel`` from anchors that have no ``href``.

    Why: nh3 adds ``rel`` to every ``<a>``, also to one whose unsafe ``href`` it removed
    (``javascript:``); the HTML Standard allows ``rel`` on ``<a>`` only with ``href``, so the
    page would fail the Nu HTML Checker.
    """
    def fix(match: re.Match[str]) -> str:
        attrs = match.group(1)
        if re.search(r'\shref="', attrs):
            return match.group(0)
        return "<a" + _REL.sub("", attrs) + ">"
    return _ANCHOR.sub(fix, html)


def sanitise_html(html: str) -> str:
    """Clean an HTML fragment with the site's allow-list (see the module docstring)."""
    return _drop_rel_without_href(_clean(html))


def _clean(html: str) -> str:
    return nh3.clean(
        html,
        tags=ALLOWED_TAGS,
        clean_content_tags={"script", "style"},
        attributes=ALLOWED_ATTRIBUTES,
        attribute_filter=_attribute_filter,
        url_schemes=URL_SCHEMES,
        allowed_classes={"span": _token_classes(), "code": {"fol-code"},
                         "pre": {"fol-code"}},
        link_rel="noopener noreferrer nofollow",
    )


def _fence_highlight(code: str, lang: str, _attrs: str) -> str:
    """markdown-it hook: highlight a fenced block when its language is known, else plain."""
    if not lang:
        return ""
    try:
        from pygments.lexers import get_lexer_by_name

        lexer = get_lexer_by_name(lang.strip().split()[0])
    except (ClassNotFound, IndexError):
        return ""
    body = highlight(code, lexer, _formatter())
    return f'<pre class="fol-code"><code>{body}</code></pre>'


@lru_cache(maxsize=1)
def _markdown() -> MarkdownIt:
    md = MarkdownIt("commonmark", {"html": True, "linkify": False, "typographer": False,
                                   "highlight": _fence_highlight})
    md.enable(["table", "strikethrough"])
    return md


_IMG_WITHOUT_ALT = re.compile(r"<img(?![^>]*\salt=)")


def render_markdown(text: str, *, shift_headings: int = 0, drop_title: str | None = None) -> str:
    """Markdown (untrusted) -> safe HTML fragment.

    A raw ``<img>`` without ``alt`` gets ``alt=""`` after cleaning: HTML requires the
    attribute, and an image the author did not describe is best skipped by screen readers.
    ``shift_headings`` moves Markdown headings down (a README's ``#`` becomes ``<h2>`` under
    the page's own title), and a leading heading equal to ``drop_title`` is left out so the
    page does not repeat its title.
    """
    md = _markdown()
    tokens = md.parse(text or "")
    if drop_title and len(tokens) >= 3 and tokens[0].type == "heading_open" \
            and tokens[1].content.strip().lower() == drop_title.strip().lower():
        tokens = tokens[3:]
    if shift_headings:
        for token in tokens:
            if token.type in ("heading_open", "heading_close"):
                level = min(int(token.tag[1]) + shift_headings, 6)
                token.tag = f"h{level}"
    html = md.renderer.render(tokens, md.options, {})
    return _IMG_WITHOUT_ALT.sub('<img alt=""', sanitise_html(html))


@lru_cache(maxsize=1)
def _formatter() -> HtmlFormatter:
    # nowrap: we write our own <pre><code>; classprefix keeps token classes in our vocabulary.
    return HtmlFormatter(nowrap=True, classprefix=TOKEN_PREFIX)


def _lexer_for(filename: str, text: str):
    if filename.lower().endswith((".py", ".pyw")):
        return PythonLexer()
    try:
        return get_lexer_for_filename(filename, text)
    except ClassNotFound:
        return TextLexer()


def notebook_cells(text: str) -> list[str] | None:
    """The code cells of a notebook (JSON) as strings, or None if it is not a readable notebook.

    Why: a reader copying a notebook recipe wants the code, not the JSON around it.
    """
    try:
        data = json.loads(text)
    except (ValueError, TypeError):
        return None
    if not isinstance(data, dict) or not isinstance(data.get("cells"), list):
        return None
    cells: list[str] = []
    for cell in data["cells"]:
        if isinstance(cell, dict) and cell.get("cell_type") == "code":
            source = cell.get("source", "")
            cells.append("".join(source) if isinstance(source, list) else str(source))
    return cells


# Highlighted code by (file name, text). Why: the builder highlights the scripts of the
# recipes about to run while its workers warm up (site.prepare), and the pages use the result.
_HIGHLIGHTED: dict[tuple[str, str], str] = {}
_HIGHLIGHTED_KEPT = 1024


def highlight_code(text: str, filename: str) -> str:
    """Highlight a script as class-only spans (escaped); notebooks show their code cells.

    Returns the inner HTML of a ``<code>`` element; the caller wraps it.
    """
    key = (filename, text)
    done = _HIGHLIGHTED.get(key)
    if done is None:
        if len(_HIGHLIGHTED) >= _HIGHLIGHTED_KEPT:
            _HIGHLIGHTED.clear()
        done = _HIGHLIGHTED[key] = _highlight_code(text, filename)
    return done


def _highlight_code(text: str, filename: str) -> str:
    if filename.lower().endswith(".ipynb"):
        cells = notebook_cells(text)
        if cells is not None:
            joined = "\n\n".join(f"# In[{i}]\n{cell.rstrip()}" for i, cell in
                                 enumerate(cells, start=1))
            return highlight(joined + "\n", PythonLexer(), _formatter())
    return highlight(text, _lexer_for(filename, text), _formatter())


def code_text(text: str, filename: str) -> str:
    """The plain text that the copy button copies (notebook -> its code cells)."""
    if filename.lower().endswith(".ipynb"):
        cells = notebook_cells(text)
        if cells is not None:
            return "\n\n".join(c.rstrip() for c in cells) + "\n"
    return text
