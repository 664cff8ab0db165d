"""What a published site was made from, so a build can skip publishing or publish only changes.

Why: a build where nothing changed must finish in milliseconds, and rendering a thousand recipe
pages takes seconds. ``view_state`` reduces the site's view (built by build.py) to digests:
one for what every page shares (titles, revision, theme, the list of recipes, the report's
counts) and one per recipe page. ``site.publish`` stores the state in the site's own manifest,
in the same atomic swap as the pages, so the state can never describe another site than the one
on disk. The next build compares: same state -> nothing to publish; otherwise only the recipes
whose digest changed are passed to ``site.publish`` as ``changed_slugs``.

Left out of the digests on purpose: the build date and the report's date (they change on every
pass, and the site keeps the date of the pass that last changed it), each entry's place in the
order (pages do not show it; the list of slugs in the common digest covers reordering), and
``from_cache`` (whether this pass re-ran the recipe or took the stored result: the page shows the
output of the run that produced it).

Light on purpose: this module runs on the no-op path, which imports no rendering stack, and no
Jinja.
"""
from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path
from typing import Any

MANIFEST = ".figfolio-site.json"
THEME_NAME = "site_template"  # = site_render.DEFAULT_THEME_NAME
STATE_VERSION = 1


def theme_folders(root: Path) -> list[Path]:
    """The theme folders ``site_render.theme_folders`` uses, found without importing Jinja."""
    here = Path(__file__).resolve().parent
    default = next((c for c in (here / THEME_NAME, here.parents[1] / THEME_NAME)
                    if (c / "layouts").is_dir()), None)
    own = Path(root) / THEME_NAME
    folders = [own] if own.is_dir() and (default is None or own.resolve() != default.resolve()) \
        else []
    return folders + ([default] if default is not None else [])


def theme_digest(root: Path) -> str:
    """Digest of every theme file's path, size and modification time (no reading)."""
    digest = hashlib.sha256()
    for folder in theme_folders(root):
        digest.update(f"theme {folder}\n".encode())
        for dirpath, dirnames, filenames in os.walk(folder):
            dirnames.sort()
            for name in sorted(filenames):
                st = os.stat(os.path.join(dirpath, name))
                rel = os.path.relpath(os.path.join(dirpath, name), folder)
                digest.update(f"{rel}\0{st.st_size}\0{st.st_mtime_ns}\n".encode())
    return digest.hexdigest()


def _digest(value: Any) -> str:
    blob = json.dumps(value, sort_keys=True, default=str, ensure_ascii=False)
    return hashlib.sha256(blob.encode("utf-8")).hexdigest()


# Entry parts copied verbatim from the cache record: when the entry carries the record's own
# sha256 (``record_sha256``), that digest stands for them, which halves the bytes to hash.
FROM_RECORD = ("audit", "run")


def entry_digest(entry: dict[str, Any]) -> str:
    """What one recipe page shows of its own recipe (see the module docstring for omissions)."""
    shown = {k: v for k, v in entry.items() if k != "order_index"}
    run = dict(shown.get("run") or {})
    run.pop("from_cache", None)
    shown["run"] = run
    if shown.get("record_sha256"):
        for key in FROM_RECORD:
            shown.pop(key, None)
        shown["data_files"] = [{k: v for k, v in item.items() if k != "description"}
                               for item in shown.get("data_files") or []]
    return _digest(shown)


def view_state(view: dict[str, Any], root: Path) -> dict[str, Any]:
    """{"version", "common": digest, "pages": {slug: digest}} for ``view``."""
    report = dict(view.get("report") or {})
    report.pop("date", None)
    entries = list(view.get("recipes") or [])
    common = {k: v for k, v in view.items() if k not in ("recipes", "report", "build_date")}
    common.update(report=report, slugs=[e.get("slug") for e in entries],
                  theme=theme_digest(root))
    return {"version": STATE_VERSION, "common": _digest(common),
            "pages": {str(e.get("slug")): entry_digest(e) for e in entries}}


def read_state(site: Path) -> dict[str, Any] | None:
    """The state recorded by the last publish into ``site``; None when absent or unreadable."""
    try:
        manifest = json.loads((Path(site) / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    state = manifest.get("state") if isinstance(manifest, dict) else None
    return state if isinstance(state, dict) and state.get("version") == STATE_VERSION else None


def plan(state: dict[str, Any], previous: dict[str, Any] | None, site: Path
         ) -> set[str] | None | bool:
    """False: nothing to publish. None: publish everything. A set: publish these recipes.

    Nothing is skipped unless the index and every recipe page are still there (someone may
    have deleted files by hand); a change in the common digest re-renders the top pages while
    recipe pages are still reused by ``site.publish`` when their own signature did not change.
    """
    if previous is None:
        return None
    old_pages = previous.get("pages") or {}
    changed = {slug for slug, digest in state["pages"].items() if old_pages.get(slug) != digest}
    if not changed and previous.get("common") == state["common"] and _complete(site, state):
        return False
    return changed


def _complete(site: Path, state: dict[str, Any]) -> bool:
    """The index and each recipe's page exist (a stat per page: milliseconds for 1,000)."""
    root = str(site)
    return os.path.isfile(os.path.join(root, "index.html")) and all(
        os.path.isfile(os.path.join(root, "r", slug, "index.html")) for slug in state["pages"])
