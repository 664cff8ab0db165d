"""Publish the catalogue site: ``publish(view, settings, out)``.

The view (built by build.py) is untrusted text plus paths to files already produced. This
module renders the theme (catalogue ``site_template/`` over the default, file by file), copies
the files every page links to, writes ``search-index.js`` and the per-recipe zips, all into a
temporary sibling folder that is swapped in whole by renames, so a failed or killed build
never leaves half a site behind.

Incremental: with ``changed_slugs`` only those recipe pages, pages whose neighbours (related or
previous/next) changed, the index, the report and the contribute page are rendered; every other
``r/<slug>/`` folder is hard-linked from the previous site. A small manifest
(``.figfolio-site.json``) records each page's "signature" (theme, neighbours) so a page whose
surroundings changed is re-rendered even if its own recipe did not.
"""
from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path
from typing import Any, Iterable

from jinja2 import Environment, TemplateError

import figfolio
from figfolio import markup
from figfolio.errors import FigfolioError
from figfolio.recipe import SLUG
from figfolio.settings import Settings
from figfolio.site_files import (SiteError, copy_file, fork_helper, helper_succeeded,
                                 link_tree, stop_helper, swap_in, temp_site_folder,
                                 write_text)
from figfolio.site_pages import card, place_recipe, recipe_context, related_map, report_rows
from figfolio.site_render import make_env, render, theme_folders
from figfolio.site_search import build_index, entry_facets, index_script
from figfolio.site_state import MANIFEST

CSP = ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
       "object-src 'none'; base-uri 'none'; form-action 'none'")
FACET_TITLES = {"tag": "Tags", "method": "Methods", "verdict": "Verdict",
                "origin": "Data origin", "audit": "Audit findings"}


def publish(view: dict[str, Any], settings: Settings, out: Path, *,
            changed_slugs: Iterable[str] | None = None,
            state: dict[str, Any] | None = None) -> None:
    """Write the whole site for ``view`` to ``out`` (atomically replacing what was there).

    ``state`` (from ``site_state.view_state``) is stored in the manifest, in the same swap as
    the pages, so the next build can tell whether this site is still current.
    """
    entries = list(view.get("recipes") or [])
    _check_slugs(entries)
    env = make_env(settings.root)
    _cache_templates(env, settings)
    tmp = temp_site_folder(out)
    try:
        _write_assets(settings.root, tmp / "assets")
        common = _common(view)
        signatures = _signatures(entries, settings.root, common)
        reuse = _reusable(out, signatures, entries, changed_slugs)
        _write_recipes(env, entries, common, tmp, out, reuse)
        _write_top_pages(env, view, entries, common, tmp)
        manifest: dict[str, Any] = {"pages": signatures}
        if state is not None:
            manifest["state"] = state
        write_text(tmp / MANIFEST, json.dumps(manifest, indent=1, sort_keys=True))
        swap_in(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def prepare(settings: Settings, recipes: Iterable[Any]) -> None:
    """Do ahead the site work that depends only on files: compile the theme's templates (kept
    in build/cache/templates) and highlight the recipes' code (markup.highlight_code).

    Why: a cold build waits a second or more for its workers to import the rendering stack,
    and the builder's core is idle after the data screen; on the benchmark catalogue this is
    0.12-0.15 s of the site's work, which otherwise runs after the last recipe. Errors are
    left for ``publish``, which reports them.
    """
    try:
        env = make_env(settings.root)
        _cache_templates(env, settings)
        for name in env.list_templates(filter_func=lambda n: n.endswith(".html")):
            try:
                env.get_template(name)
            except TemplateError:
                continue
    except (FigfolioError, OSError):
        return
    for recipe in recipes:
        try:
            text = recipe.script.read_text(encoding="utf-8", errors="replace")
        except OSError:
            continue
        markup.highlight_code(text, recipe.rel(recipe.script))


def _cache_templates(env: Environment, settings: Settings) -> None:
    """Keep compiled templates in build/cache/templates: compiling the theme costs about
    0.2 s per build, more than rendering the pages of a small change. Jinja checks each
    template's source checksum, so an edited template is compiled again."""
    from jinja2 import FileSystemBytecodeCache

    folder = Path(settings.cache_path) / "templates"
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        return  # a read-only cache folder only costs the compile time
    env.bytecode_cache = FileSystemBytecodeCache(str(folder))


def _check_slugs(entries: list[dict[str, Any]]) -> None:
    seen: set[str] = set()
    for entry in entries:
        slug = str(entry.get("slug", ""))
        if not SLUG.match(slug) or slug in seen:
            raise SiteError(f"recipe slug {slug!r} is empty, unsafe or repeated", key="slug",
                            hint="slugs are lowercase letters, digits and hyphens, one per recipe")
        seen.add(slug)


def _write_assets(root: Path, dest: Path) -> None:
    """Default theme's static files, then the catalogue's (the catalogue file wins)."""
    for folder in reversed(theme_folders(root)):
        static = folder / "static"
        for path in sorted(static.rglob("*")) if static.is_dir() else []:
            if path.is_file():
                copy_file(path, dest / path.relative_to(static))


def _common(view: dict[str, Any]) -> dict[str, Any]:
    report = view.get("report") or {}
    return {"site": {"title": view.get("title") or "Figure catalogue",
                     "description": view.get("description") or "",
                     "build_date": _human_date(view.get("build_date")),
                     "build_iso": str(view.get("build_date") or ""),
                     "revision": view.get("revision"),
                     "version": view.get("figfolio_version") or figfolio.__version__,
                     "report": report, "counts": report.get("counts") or {}},
            "csp": CSP}


def _human_date(value: Any) -> str:
    text = str(value or "")
    return text.replace("T", " ").replace("Z", " UTC")[:20].strip() if text else ""


def _theme_digest(root: Path) -> str:
    digest = hashlib.sha256()
    for folder in theme_folders(root):
        for path in sorted(p for p in folder.rglob("*") if p.is_file()):
            digest.update(str(path.relative_to(folder)).encode() + b"\0" + path.read_bytes())
    return digest.hexdigest()


def _neighbours(entries: list[dict[str, Any]]) -> dict[str, dict[str, Any]]:
    related = related_map(entries)
    by_slug = {e["slug"]: e for e in entries}
    result = {}
    for i, entry in enumerate(entries):
        result[entry["slug"]] = {
            "related": [by_slug[s] for s in related[entry["slug"]]],
            "prev": entries[i - 1] if i > 0 else None,
            "next": entries[i + 1] if i + 1 < len(entries) else None}
    return result


def _signatures(entries: list[dict[str, Any]], root: Path, common: dict[str, Any]) -> dict[str, str]:
    """Per page: a digest of what the page shows *besides* its own recipe."""
    theme = _theme_digest(root)
    neighbours = _neighbours(entries)
    out = {}
    for entry in entries:
        near = neighbours[entry["slug"]]
        brief = [[o["slug"], o.get("title"), o.get("summary")] if o else None
                 for o in [*near["related"], near["prev"], near["next"]]]
        blob = json.dumps([theme, common["site"]["title"], common["site"]["version"], brief],
                          default=str)
        out[entry["slug"]] = hashlib.sha256(blob.encode()).hexdigest()
    return out


def _reusable(out: Path, signatures: dict[str, str], entries: list[dict[str, Any]],
              changed: Iterable[str] | None) -> set[str]:
    """Slugs whose folder can be hard-linked from the previous site unchanged."""
    if changed is None or not (out / MANIFEST).is_file():
        return set()
    try:
        old = json.loads((out / MANIFEST).read_text(encoding="utf-8")).get("pages", {})
    except (OSError, ValueError):
        return set()
    changed = set(changed)
    return {e["slug"] for e in entries
            if e["slug"] not in changed and old.get(e["slug"]) == signatures[e["slug"]]
            and (out / "r" / e["slug"] / "index.html").is_file()}


# Below this many pages to render, a second process costs more than it saves.
HELPER_PAGES = 24


def _write_recipes(env: Environment, entries: list[dict[str, Any]], common: dict[str, Any],
                   tmp: Path, old_site: Path, reuse: set[str]) -> None:
    """Every recipe page: unchanged ones hard-linked, the rest rendered (on two cores when
    there are many: a forked helper renders every other page)."""
    neighbours = _neighbours(entries)
    fresh = []
    for entry in entries:
        if entry["slug"] in reuse:
            link_tree(old_site / "r" / entry["slug"], tmp / "r" / entry["slug"])
        else:
            fresh.append(entry)
    share = fresh[1::2] if len(fresh) >= HELPER_PAGES else []
    helper = fork_helper(lambda: _render_pages(env, share, common, tmp, neighbours)) \
        if share else None
    mine = fresh[0::2] if helper is not None else fresh
    try:
        _render_pages(env, mine, common, tmp, neighbours)
    except BaseException:
        stop_helper(helper)
        raise
    if helper is not None and not helper_succeeded(helper):
        for entry in share:  # render the helper's pages here, reporting any error in full
            shutil.rmtree(tmp / "r" / entry["slug"], ignore_errors=True)
        _render_pages(env, share, common, tmp, neighbours)


def _render_pages(env: Environment, entries: list[dict[str, Any]], common: dict[str, Any],
                  tmp: Path, neighbours: dict[str, dict[str, Any]]) -> None:
    for entry in entries:
        slug = entry["slug"]
        folder = tmp / "r" / slug
        folder.mkdir(parents=True, exist_ok=True)
        place_recipe(entry, folder)
        near = neighbours[slug]
        context = dict(common, root="../../", page="recipe",
                       **recipe_context(entry, near["related"], near["prev"], near["next"]))
        write_text(folder / "index.html", render(env, "layouts/recipe.html", context))


def _facet_groups(entries: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Facet values with their counts over the whole catalogue (JS updates them live)."""
    counts: dict[str, dict[str, int]] = {k: {} for k in FACET_TITLES}
    for entry in entries:
        for group, values in entry_facets(entry).items():
            for value in values:
                counts[group][value] = counts[group].get(value, 0) + 1
    return [{"key": key, "title": title,
             "values": sorted(counts[key].items(), key=lambda kv: (-kv[1], kv[0].lower()))}
            for key, title in FACET_TITLES.items() if counts[key]]


def _contribute_html(env: Environment, view: dict[str, Any]) -> str:
    text = view.get("contribute_markdown")
    if text is None:  # the theme's default text (a catalogue can override the file too)
        text = env.loader.get_source(env, "content/contribute.md")[0]  # type: ignore[union-attr]
    return markup.render_markdown(text)


def _write_top_pages(env: Environment, view: dict[str, Any], entries: list[dict[str, Any]],
                     common: dict[str, Any], tmp: Path) -> None:
    top = dict(common, root="")
    cards = [card(e, i) for i, e in enumerate(entries)]
    pages = {
        "index.html": ("layouts/index.html", dict(top, page="index", cards=cards,
                                                  facets=_facet_groups(entries))),
        "report.html": ("layouts/report.html", dict(top, page="report", **report_rows(entries))),
        "contribute.html": ("layouts/contribute.html",
                            dict(top, page="contribute", body=_contribute_html(env, view))),
    }
    for name, (template, context) in pages.items():
        write_text(tmp / name, render(env, template, context))
    write_text(tmp / "search-index.js", index_script(build_index(entries)))
