r"""The browser search index: built here at build time, queried by ``assets/search.js``.

Why this shape: the site must work from ``file://`` where ``fetch`` of JSON is refused, so the
index ships as a script that assigns a global. Terms are stored sorted so the browser finds
every term with a given prefix by binary search (one keystroke over 5,000 recipes stays well
under a frame). Each term carries a flat postings list ``[doc, weight, doc, weight, ...]`` where
the weight adds up the field weights of every field the term occurs in, so the browser does no
per-field work at query time.

The tokeniser must match ``tokenize`` in search.js exactly: lower-case, accents removed (NFKD,
combining marks dropped), split on anything that is not a letter or digit
(Python ``[\W_]``, JavaScript ``[^\p{L}\p{N}]``).
"""
from __future__ import annotations

import json
import re
import unicodedata
from typing import Any, Iterable

# Field weights: a word in the title says more about a recipe than a word in its README.
FIELD_WEIGHTS: dict[str, float] = {
    "title": 8.0, "tags": 5.0, "methods": 4.0, "summary": 3.0, "authors": 3.0,
    "columns": 2.0, "description": 1.0,
}
FACETS = ("tag", "method", "verdict", "origin", "audit")
_SPLIT = re.compile(r"[\W_]+")


def tokenize(text: str) -> list[str]:
    """Lower-case, strip accents, split on non-alphanumerics (mirror of search.js)."""
    decomposed = unicodedata.normalize("NFKD", text.lower())
    plain = "".join(ch for ch in decomposed if not unicodedata.combining(ch))
    return [t for t in _SPLIT.split(plain) if t]


def _markdown_words(markdown: str | None) -> str:
    """Rough plain text of a README for search: drop code fences and link targets."""
    if not markdown:
        return ""
    text = re.sub(r"```.*?```", " ", markdown, flags=re.S)
    text = re.sub(r"\]\([^)]*\)", "]", text)
    return re.sub(r"<[^>]+>", " ", text)


def _column_names(entry: dict[str, Any]) -> list[str]:
    names: list[str] = []
    for data in entry.get("data_files") or []:
        desc = data.get("description") or {}
        names += [str(c.get("name", "")) for c in desc.get("columns") or []]
    return names


def entry_fields(entry: dict[str, Any]) -> dict[str, str]:
    """The searchable text of one recipe, by field."""
    return {
        "title": str(entry.get("title", "")),
        "summary": str(entry.get("summary", "")),
        "tags": " ".join(map(str, entry.get("tags") or [])),
        "methods": " ".join(map(str, entry.get("methods") or [])),
        "authors": " ".join(map(str, entry.get("authors") or [])),
        "description": _markdown_words(entry.get("readme_markdown")),
        "columns": " ".join(_column_names(entry)),
    }


def audit_codes(entry: dict[str, Any]) -> list[str]:
    """Distinct audit finding codes of a recipe, or ["none"] so 'no findings' is a facet too."""
    codes = sorted({str(f.get("code", "")) for f in (entry.get("audit") or {}).get("findings")
                    or [] if f.get("code")})
    return codes or ["none"]


def entry_facets(entry: dict[str, Any]) -> dict[str, list[str]]:
    """Facet values of one recipe; each facet is a list so one code path serves all."""
    return {
        "tag": sorted({str(t) for t in entry.get("tags") or []}),
        "method": sorted({str(m) for m in entry.get("methods") or []}),
        "verdict": [str(entry.get("verdict", "unapproved"))],
        "origin": [str(entry.get("data_origin", "synthetic"))],
        "audit": audit_codes(entry),
    }


def build_index(entries: Iterable[dict[str, Any]]) -> dict[str, Any]:
    """The index as a JSON-able dict: docs (slug, facets), terms (sorted), postings."""
    postings: dict[str, dict[int, float]] = {}
    docs: list[dict[str, Any]] = []
    for number, entry in enumerate(entries):
        docs.append({"s": str(entry["slug"]), "f": entry_facets(entry)})
        for field, text in entry_fields(entry).items():
            weight = FIELD_WEIGHTS[field]
            for term in set(tokenize(text)):
                bucket = postings.setdefault(term, {})
                bucket[number] = bucket.get(number, 0.0) + weight
    # JavaScript compares strings by UTF-16 code units; sort the same way so its binary
    # search agrees with this order even for characters outside the Basic Multilingual Plane.
    terms = sorted(postings, key=lambda t: t.encode("utf-16-be"))
    flat: list[list[float]] = []
    for term in terms:
        row: list[float] = []
        for doc, weight in sorted(postings[term].items()):
            row += [doc, weight]
        flat.append(row)
    return {"version": 1, "facets": list(FACETS), "docs": docs, "terms": terms, "postings": flat}


def index_script(index: dict[str, Any]) -> str:
    """``search-index.js``: assigns the index to a global (works from file://, no fetch).

    ``</`` is escaped so no text in the index can close a script element if someone inlines it.
    """
    body = json.dumps(index, ensure_ascii=False, separators=(",", ":"))
    body = body.replace("</", "<\\/").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    return f"window.FIGFOLIO_INDEX={body};\n"
