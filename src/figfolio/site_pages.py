"""What each page shows: file placement under ``r/<slug>/`` and the template contexts.

Why the placement rules live here: the index, the report and the recipe page all link to the
same files, and an incremental build reuses a recipe's folder from the previous site, so every
URL must be a pure function of the view entry (never of what happened to be copied this time).
"""
from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from PIL import Image

from figfolio import markup
from figfolio.site_files import SiteError, copy_file, safe_parts, url, url_path, write_zip

OUTPUT_SUFFIXES = (".png", ".svg", ".pdf")
AUDIT_KINDS = ("protan", "deutan", "tritan", "grayscale")
AUDIT_WORDS = {"protan": "protan (red-weak)", "deutan": "deutan (green-weak)",
               "tritan": "tritan (blue-weak)", "grayscale": "grayscale"}
THUMB_SIZES = (320, 640)
COPY_HINT = "figfolio new my-copy --from {slug}"


def image_size(path: Path | None) -> tuple[int, int] | None:
    """Pixel size from the file header (cheap); None when unreadable."""
    if path is None:
        return None
    try:
        with Image.open(path) as img:
            return img.size
    except (OSError, ValueError):
        return None


def _output_name(name: str, slug: str) -> str:
    parts = safe_parts(name, where=f"recipe {slug}", key="outputs")
    if len(parts) != 1 or not name.lower().endswith(OUTPUT_SUFFIXES):
        raise SiteError(f"unexpected output name {name!r}", path=f"recipe {slug}",
                        key="outputs", hint="outputs are .png, .svg or .pdf files")
    return parts[0]


def thumb_name(size: int | str, source: Path | str) -> str:
    """The thumbnail's file name in the site, keeping its real format's suffix (WebP or PNG)."""
    return f"thumb-{int(size)}{Path(source).suffix.lower() or '.png'}"


def thumb_url(slug: str, size: int, source: Path | str) -> str:
    return url("r", slug, thumb_name(size, source))


# Flat names beside the page (no sub-folders): folder operations dominate publishing time on
# slow disks, and an incremental build links every unchanged folder again.
def figure_token(figure: object) -> str:
    """A file-name-safe token for a figure key: a number, or a file stem the script chose."""
    return re.sub(r"[^A-Za-z0-9_-]+", "-", str(figure)).strip("-") or "x"


def figure_order(figure: str) -> tuple[int, int, str]:
    """Numbered figures first, in number order; named ones after, by name."""
    return (0, int(figure), "") if str(figure).isdigit() else (1, 0, str(figure))


def audit_file(figure: object, kind: str) -> str:
    return f"audit-figure-{figure_token(figure)}-{kind}.png"


def diff_file(name: str, which: str = "diff") -> str:
    return f"{which}-{name}.png"


RESERVED = {"index.html"}


def data_file(name: str) -> str:
    """Data keeps its path from the recipe folder, so README links like data/x.csv work."""
    parts = safe_parts(name, key="data")
    first = parts[0].lower()
    if first in RESERVED or (len(parts) == 1 and (
            first.startswith(("thumb-", "audit-", "diff-", "approved-"))
            or first.endswith((".zip", *OUTPUT_SUFFIXES)))):
        raise SiteError(f"data file name {name!r} clashes with a file of the recipe page",
                        key="data", hint="keep data files under data/")
    return "/".join(parts)


def place_recipe(entry: dict[str, Any], folder: Path) -> None:
    """Copy every file a recipe page links to into ``folder`` (= site/r/<slug>)."""
    slug = entry["slug"]
    for out in entry.get("outputs") or []:
        name = _output_name(out["name"], slug)
        if out.get("path") and Path(out["path"]).is_file():
            copy_file(Path(out["path"]), folder / name)
        for which, key in (("diff", "diff_image"), ("approved", "approved_image")):
            if out.get(key):
                copy_file(Path(out[key]), folder / diff_file(name, which))
    for size, path in (entry.get("thumbs") or {}).items():
        copy_file(Path(path), folder / thumb_name(size, path))
    for figure, images in ((entry.get("audit") or {}).get("images") or {}).items():
        for kind in AUDIT_KINDS:
            if images.get(kind):
                copy_file(Path(images[kind]), folder / audit_file(figure, kind))
    for data in entry.get("data_files") or []:
        if data.get("publish"):
            copy_file(Path(data["path"]), folder / data_file(data["name"]))
    write_zip(Path(entry["folder"]), list(entry.get("files") or []), slug,
              folder / f"{slug}.zip")


def card(entry: dict[str, Any], number: int) -> dict[str, Any]:
    """What the index card of a recipe shows (root-relative URLs)."""
    slug = entry["slug"]
    thumbs = entry.get("thumbs") or {}
    small = thumbs.get(320) or thumbs.get("320")
    size = image_size(Path(small)) if small else None
    findings = (entry.get("audit") or {}).get("findings") or []
    return {
        "number": number, "slug": slug, "title": entry.get("title", slug),
        "summary": entry.get("summary", ""), "alt": entry.get("alt", ""),
        "verdict": entry.get("verdict", "unapproved"), "findings": len(findings),
        "href": url("r", slug, "index.html"),
        "thumb": thumb_url(slug, 320, small) if small else None,
        "srcset": ", ".join(f"{thumb_url(slug, s, thumbs.get(s) or thumbs.get(str(s)))} {s}w"
                            for s in THUMB_SIZES if thumbs.get(s) or thumbs.get(str(s))),
        "thumb_size": size, "tags": entry.get("tags") or [],
    }


def _figures(entry: dict[str, Any]) -> list[dict[str, Any]]:
    """The PNG outputs to show large, each with its size and the other formats of that figure."""
    shown = []
    outputs = entry.get("outputs") or []
    for out in outputs:
        if out.get("format") != "png" or not out.get("path"):
            continue
        size = (out.get("width"), out.get("height"))
        if not all(size):
            size = image_size(Path(out["path"])) or (None, None)
        number = out.get("figure")
        alt = entry.get("alt", "")
        if number and len([o for o in outputs if o.get("format") == "png"]) > 1:
            alt = f"{alt} (figure {number})"
        shown.append({"src": url_path(out["name"]), "alt": alt, "width": size[0],
                      "height": size[1], "figure": number})
    return shown


def _downloads(entry: dict[str, Any]) -> list[dict[str, Any]]:
    return [{"name": o["name"], "href": url_path(o["name"]), "format": str(o.get("format", "")),
             "verdict": o.get("verdict", ""), "detail": o.get("detail", ""),
             "download": str(o.get("format")) != "png"}
            for o in entry.get("outputs") or []]


def _audit_images(entry: dict[str, Any]) -> list[dict[str, Any]]:
    groups = []
    images = (entry.get("audit") or {}).get("images") or {}
    for figure in sorted(images, key=figure_order):
        cells = []
        for kind in AUDIT_KINDS:
            path = images[figure].get(kind)
            if path:
                size = image_size(Path(path)) or (None, None)
                cells.append({"kind": AUDIT_WORDS[kind], "src": url_path(audit_file(figure, kind)),
                              "width": size[0], "height": size[1]})
        label = int(figure) if str(figure).isdigit() else figure  # JSON keys are strings
        groups.append({"figure": label, "cells": cells})
    return groups


def _data_files(entry: dict[str, Any]) -> list[dict[str, Any]]:
    files = []
    for data in entry.get("data_files") or []:
        desc = data.get("description") or None
        files.append({"name": data["name"], "size": data.get("size"),
                      "publish": bool(data.get("publish")),
                      "href": url_path(data_file(data["name"])) if data.get("publish") else None,
                      "description": desc})
    return files


def recipe_context(entry: dict[str, Any], related: list[dict[str, Any]],
                   prev: dict[str, Any] | None, nxt: dict[str, Any] | None) -> dict[str, Any]:
    """Everything the recipe page template needs (URLs relative to r/<slug>/)."""
    slug = entry["slug"]
    script_name = str(entry.get("script_name", "figure.py"))
    script_text = str(entry.get("script_text", ""))
    def link(other: dict[str, Any] | None) -> dict[str, Any] | None:
        return None if other is None else {
            "title": other.get("title", other["slug"]),
            "href": "../" + url(other["slug"], "index.html")}
    return {
        "entry": entry, "slug": slug, "figures": _figures(entry), "downloads": _downloads(entry),
        "readme_html": markup.render_markdown(entry["readme_markdown"], shift_headings=1,
                                              drop_title=entry["title"])
        if entry.get("readme_markdown") else "",
        "code_html": markup.highlight_code(script_text, script_name),
        "script_name": script_name, "data_files": _data_files(entry),
        "zip_href": url(f"{slug}.zip"), "copy_line": COPY_HINT.format(slug=slug),
        "audit_images": _audit_images(entry),
        "related": [dict(link(r) or {}, summary=r.get("summary", "")) for r in related],
        "prev": link(prev), "next": link(nxt),
    }


def report_rows(entries: list[dict[str, Any]]) -> dict[str, Any]:
    """Report page: a row per output, difference images, broken recipes, all findings."""
    rows, diffs, broken, findings = [], [], [], []
    for entry in entries:
        slug = entry["slug"]
        base = f"r/{url(slug)}/"
        page = base + "index.html"
        for out in entry.get("outputs") or []:
            rows.append({"slug": slug, "title": entry.get("title", slug), "href": page,
                         "name": out["name"], "verdict": out.get("verdict", ""),
                         "detail": out.get("detail", "")})
            if out.get("verdict") in ("drifted", "changed") and out.get("diff_image"):
                name = out["name"]
                approved = base + url_path(diff_file(name, "approved")) \
                    if out.get("approved_image") else None
                diffs.append({"slug": slug, "title": entry.get("title", slug), "href": page,
                              "name": name, "verdict": out["verdict"],
                              "new": base + url_path(name) if out.get("path") else None,
                              "approved": approved,
                              "diff": base + url_path(diff_file(name, "diff")),
                              "size": image_size(Path(out["diff_image"])),
                              "new_size": image_size(Path(out["path"])) if out.get("path")
                              else None,
                              "approved_size": image_size(Path(out["approved_image"]))
                              if out.get("approved_image") else None})
        if entry.get("status") == "broken" or entry.get("verdict") == "broken":
            run = entry.get("run") or {}
            broken.append({"slug": slug, "title": entry.get("title", slug), "href": page,
                           "reason": entry.get("reason", ""),
                           "stderr": run.get("stderr_tail", ""),
                           "traceback": run.get("traceback", "")})
        for f in (entry.get("audit") or {}).get("findings") or []:
            findings.append(dict(f, slug=slug, title=entry.get("title", slug), href=page))
    return {"rows": rows, "diffs": diffs, "broken": broken, "findings": findings}


def jaccard(a: set[str], b: set[str]) -> float:
    return len(a & b) / len(a | b) if a and b else 0.0


def related_map(entries: list[dict[str, Any]], top: int = 4) -> dict[str, list[str]]:
    """Top recipes by Jaccard similarity of tags (ties: catalogue order); none when nothing shared.

    Quadratic in recipes, but through an inverted tag list so only recipes sharing a tag are
    compared (500 recipes: a few milliseconds).
    """
    tags = {e["slug"]: {str(t).lower() for t in e.get("tags") or []} for e in entries}
    order = {e["slug"]: i for i, e in enumerate(entries)}
    by_tag: dict[str, list[str]] = {}
    for slug, ts in tags.items():
        for t in ts:
            by_tag.setdefault(t, []).append(slug)
    result: dict[str, list[str]] = {}
    for slug, ts in tags.items():
        others = {o for t in ts for o in by_tag[t] if o != slug}
        ranked = sorted(others, key=lambda o: (-jaccard(ts, tags[o]), order[o]))
        result[slug] = ranked[:top]
    return result
