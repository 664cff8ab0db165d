"""The catalogue-level no-op check: answer "nothing changed" from stats alone.

Why: a build where nothing changed still loaded 1,000 recipe.toml files, computed their input
keys, decoded 1,000 cache records and built the site's view only to find that the site on disk
is already right; that took 0.7 s. Like the "checker" of content-hash build tools, a pass that
succeeded writes ``build/cache/noop.json``: digests of the stats (size, mtime_ns) of everything
the pass read or wrote, and the summary the command prints. The next pass stats the same things
(one ``os.scandir`` walk per tree, nothing read or hashed) and, when every digest matches,
replays the summary instead of doing the work. Any difference, a missing or unreadable
noop.json, ``--force`` or ``--repeat`` -> the normal path, which is always right.

What the digests cover (``inputs_digest`` before a pass, ``outputs_digest`` after it):

* inputs: every file and folder under ``recipes/`` (``__pycache__`` aside; this includes each
  recipe's fingerprints.json, so approval is seen), the settings (their values and the file's
  stat), the catalogue's and the default theme (``site_state.theme_digest``), the contribute
  file, figfolio's version and its own modules' stats, the rendering-stack versions the cache
  key uses, the command options that change the result (command, slugs, out, executor,
  scheduler, publish) and the catalogue's source revision (the site shows it);
* outputs: every file and folder under the cache's ``runs/`` and ``images/`` (an entry deleted
  or damaged by hand sends the pass down the normal path, which re-runs it), the site's manifest
  and index page and each recipe page.

Racy stats: a file modified less than ``cache.RACY_SECONDS`` before the pass started may be
edited again in the same clock tick without its stat changing, so such a pass writes no
noop.json (the next one does). Inputs are stat'ed *before* the pass reads them: an edit made
during a pass is seen by the next one.

Light on purpose: this runs first in a no-op ``figfolio build``; it imports nothing heavy.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

from figfolio import __version__, errors
from figfolio.atomic import write_text
from figfolio.cache import RACY_SECONDS, stack_fingerprint
from figfolio.recipe import Recipe
from figfolio.settings import Settings

NAME = "noop.json"
VERSION = 1
SKIP = frozenset({"__pycache__"})
PACKAGE = Path(__file__).resolve().parent


@dataclass
class Snapshot:
    """The inputs' digest taken before a pass, and whether any input's stat is too fresh."""

    digest: str
    racy: bool


def _walk(top: str, prefix: str, rows: list[tuple[str, int, int]]) -> int:
    """Append (relative path, size, mtime_ns) of everything under ``top``; size -1 for folders.

    Returns the newest mtime_ns seen (0 when empty or absent). Symbolic links are recorded with
    their own stat and their target's, so re-pointing a link counts as a change. Iterative and
    sorted once at the end: this walk is most of the no-op's time (15,000 cache files).
    """
    newest = 0
    found: list[tuple[str, int, int]] = []
    stack = [(top, prefix)]
    while stack:
        folder, base = stack.pop()
        try:
            it = os.scandir(folder)
        except OSError:
            continue
        with it:
            for entry in it:
                if entry.name in SKIP:
                    continue
                rel = base + entry.name
                if entry.is_dir(follow_symlinks=False):
                    found.append((rel + "/", -1, 0))
                    stack.append((entry.path, rel + "/"))
                    continue
                try:
                    st = entry.stat(follow_symlinks=False)
                except OSError:
                    continue
                newest = max(newest, st.st_mtime_ns)
                found.append((rel, st.st_size, st.st_mtime_ns))
                if entry.is_symlink():
                    target = _stat(entry.path)
                    found.append((rel + " ->", *target))
                    newest = max(newest, target[1])
    found.sort()
    rows.extend(found)
    return newest


def _stat(path: Path | str) -> tuple[int, int]:
    """(size, mtime_ns) of a file, (-2, 0) when it is absent."""
    try:
        st = os.stat(path)
    except OSError:
        return (-2, 0)
    return (st.st_size, st.st_mtime_ns)


def _hash(value: Any) -> str:
    return hashlib.sha256(repr(value).encode("utf-8", "surrogateescape")).hexdigest()


def _own_modules() -> list[tuple[str, int, int]]:
    """Stats of figfolio's own modules: an edited (editable-install) figfolio is a change."""
    rows: list[tuple[str, int, int]] = []
    with os.scandir(PACKAGE) as it:
        for entry in it:
            if entry.name.endswith(".py"):
                st = entry.stat()
                rows.append((entry.name, st.st_size, st.st_mtime_ns))
    return sorted(rows)


def options_key(options: Any) -> dict[str, Any]:
    """The command options that change what a pass reports or publishes."""
    out = options.out.resolve() if options.out is not None else None
    return {"command": options.command, "slugs": list(options.slugs), "out": str(out),
            "executor": options.executor, "scheduler": options.scheduler,
            "publish": options.publish}


def inputs_digest(settings: Settings, options: Any) -> Snapshot:
    """Digest of everything a pass reads, from stats; taken before the pass reads anything."""
    from figfolio.build import source_revision
    from figfolio.site_state import theme_digest

    started = time.time_ns()
    rows: list[tuple[str, int, int]] = []
    newest = _walk(str(settings.recipes_path), "", rows)
    source = _stat(settings.source) if settings.source else (-2, 0)
    contribute = _stat(settings.root / settings.contribute) if settings.contribute else (-2, 0)
    newest = max(newest, source[1], contribute[1])
    parts = {
        "version": VERSION, "figfolio": __version__, "stack": stack_fingerprint(),
        "modules": _own_modules(),
        "settings": json.dumps(settings.as_dict(), sort_keys=True, default=str),
        "settings_file": [str(settings.source), *source], "contribute": contribute,
        "options": options_key(options), "theme": theme_digest(settings.root),
        "revision": source_revision(settings.root), "recipes": _hash(rows),
    }
    racy = started - newest < RACY_SECONDS * 1e9
    return Snapshot(digest=_hash(sorted(parts.items())), racy=racy)


def outputs_digest(settings: Settings, site: Path | None, pages: Iterable[str]) -> str:
    """Digest of the cache entries and the published site, from stats."""
    rows: list[tuple[str, int, int]] = []
    for part in ("runs", "images"):
        _walk(str(settings.cache_path / part), part + "/", rows)
    if site is not None:
        base = str(site)
        rows.append(("site-manifest", *_stat(os.path.join(base, ".figfolio-site.json"))))
        rows.append(("site-index", *_stat(os.path.join(base, "index.html"))))
        for slug in pages:
            rows.append((slug, *_stat(os.path.join(base, "r", slug, "index.html"))))
    return _hash(rows)


# --- the summary: what the command prints and its exit status depends on ----------------

_RECIPE_FIELDS = tuple(f.name for f in dataclasses.fields(Recipe))


def _recipe_to_dict(recipe: Recipe) -> dict[str, Any]:
    """The recipe's fields (no deep copy: json.dumps only reads them)."""
    out = {name: getattr(recipe, name) for name in _RECIPE_FIELDS}
    out["folder"], out["script"] = str(recipe.folder), str(recipe.script)
    out["data"] = [str(p) for p in recipe.data]
    return out


def _recipe_from_dict(raw: dict[str, Any]) -> Recipe:
    raw = dict(raw)
    raw["folder"], raw["script"] = Path(raw["folder"]), Path(raw["script"])
    raw["data"] = tuple(Path(p) for p in raw["data"])
    for key in ("tags", "methods", "authors", "formats", "command", "outputs"):
        raw[key] = tuple(raw[key])
    return Recipe(**raw)


def _row_to_list(row: Any) -> list[Any]:
    return [row.name, row.verdict, row.detail, row.distance,
            str(row.diff_image) if row.diff_image else None,
            str(row.approved_image) if row.approved_image else None]


def _outcome_to_dict(outcome: Any) -> dict[str, Any]:
    result = outcome.result
    failed = result.status != "ok"
    return {"recipe": _recipe_to_dict(outcome.recipe), "verdict": outcome.verdict,
            "rows": [_row_to_list(r) for r in outcome.rows],
            "findings": list(outcome.audit.get("findings", [])),
            "result": {"slug": result.slug, "status": result.status, "reason": result.reason,
                       "duration": result.duration, "warnings": list(result.warnings),
                       "traceback": result.traceback if failed else "",
                       "stderr_tail": result.stderr_tail if failed else ""}}


def _problem_to_dict(problem: errors.FigfolioError) -> dict[str, Any]:
    return {"class": type(problem).__name__, "message": problem.message,
            "path": problem.path, "key": problem.key, "hint": problem.hint}


def _problem_from_dict(raw: dict[str, Any]) -> errors.FigfolioError:
    cls = getattr(errors, str(raw.get("class")), errors.FigfolioError)
    if not (isinstance(cls, type) and issubclass(cls, errors.FigfolioError)) \
            or cls is errors.ManyErrors:
        cls = errors.FigfolioError
    return cls(raw["message"], path=raw["path"], key=raw["key"], hint=raw["hint"])


def path_of(settings: Settings) -> Path:
    return settings.cache_path / NAME


def forget(settings: Settings) -> None:
    """Remove noop.json: a pass that fails half-way must not leave a promise behind."""
    try:
        os.unlink(path_of(settings))
    except FileNotFoundError:
        pass


def record(settings: Settings, snapshot: Snapshot, site: Path | None, pages: list[str],
           outcomes: list[Any], problems: list[errors.FigfolioError]) -> bool:
    """Write noop.json after a successful pass (atomic); False when the inputs were racy."""
    if snapshot.racy:
        forget(settings)
        return False
    payload = {"version": VERSION, "inputs": snapshot.digest,
               "outputs": outputs_digest(settings, site, pages), "pages": pages,
               "site": str(site) if site is not None else None,
               "outcomes": [_outcome_to_dict(o) for o in outcomes],
               "problems": [_problem_to_dict(p) for p in problems]}
    write_text(path_of(settings), json.dumps(payload, separators=(",", ":"), default=str))
    return True


@dataclass
class Replay:
    """What noop.json holds, when it still describes the catalogue exactly."""

    site: Path | None
    outcomes: list[Any]          # build.Outcome
    problems: list[errors.FigfolioError]


def check(settings: Settings, snapshot: Snapshot) -> tuple[Replay | None, str]:
    """The stored summary when nothing changed since it was written, else (None, why)."""
    try:
        raw = json.loads(path_of(settings).read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None, "no noop.json"
    except (OSError, ValueError):
        return None, "noop.json unreadable"
    if not isinstance(raw, dict) or raw.get("version") != VERSION:
        return None, "noop.json of another version"
    if raw.get("inputs") != snapshot.digest:
        return None, "inputs changed"
    try:
        site = Path(raw["site"]) if raw.get("site") else None
        pages = [str(p) for p in raw["pages"]]
        if raw.get("outputs") != outputs_digest(settings, site, pages):
            return None, "cache or site changed"
        problems = [_problem_from_dict(p) for p in raw["problems"]]
        outcomes = _outcomes(raw["outcomes"])
    except (KeyError, TypeError, ValueError, AttributeError):
        return None, "noop.json damaged"
    return Replay(site=site, outcomes=outcomes, problems=problems), ""


def _outcomes(stored: list[dict[str, Any]]) -> list[Any]:
    """Outcomes for the summary table and exit status, from noop.json.

    They carry the recipe, its verdict rows, the run's status, reason, warnings and failure
    tail, and the audit findings; not the cache entry, images or data summaries (``entry`` is
    None): a replayed pass publishes nothing, so nothing needs them.
    """
    from figfolio.approval import OutputVerdict
    from figfolio.build import Outcome
    from figfolio.runner import RunResult

    out = []
    for raw in stored:
        rows = [OutputVerdict(name, verdict, detail, distance,
                              Path(diff) if diff else None, Path(old) if old else None)
                for name, verdict, detail, distance, diff, old in raw["rows"]]
        out.append(Outcome(recipe=_recipe_from_dict(raw["recipe"]), entry=None,
                           result=RunResult(**raw["result"]), from_cache=True, images={},
                           rows=rows, verdict=raw["verdict"],
                           audit={"findings": raw["findings"]}, data=[]))
    return out
