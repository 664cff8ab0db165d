"""One pass over the catalogue: plan, run what changed, fingerprint, audit, judge, publish.

Why one module: ``build``, ``verify`` and ``approve`` are the same pipeline with different
endings, and the order of steps (screen before publish, cache before run, verdict after
fingerprint) is the product's guarantee. Each step is delegated to the module that owns it;
this file only decides what happens in which order and gathers the results.
"""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable

from figfolio import __version__, approval
from figfolio.cache import Cache, Entry
from figfolio.errors import DataScreenError, FigfolioError
from figfolio.executor import make_executor
from figfolio.progress import Progress
from figfolio.recipe import Recipe, discover
from figfolio.runner import Job, Output, RunResult
from figfolio.settings import Settings

TIMINGS: dict[str, float] = {}


def _timed(name: str, seconds: float) -> None:
    """Add to the per-step time of this pass (printed by the benchmark)."""
    TIMINGS[name] = TIMINGS.get(name, 0.0) + seconds


UNSTABLE_CAUSES = ("unseeded random numbers, the clock or today's date, dictionary or set "
                   "ordering, file-system listing order, parallel reductions")


@dataclass
class Options:
    """What the command line asked for."""

    slugs: list[str] = field(default_factory=list)
    force: bool = False
    jobs: int | None = None
    out: Path | None = None
    executor: str | None = None
    scheduler: str | None = None
    repeat: int = 1
    publish: bool = True
    quiet: bool = False
    command: str = "build"


@dataclass
class Outcome:
    """Everything known about one recipe after this pass."""

    recipe: Recipe
    entry: Entry | None
    result: RunResult
    from_cache: bool
    images: dict[str, dict[str, Any]]
    rows: list[Any]
    verdict: str
    audit: dict[str, Any]
    data: list[dict[str, Any]]


@dataclass
class Report:
    """The pass as a whole, for the summary table, the exit status and the site."""

    outcomes: list[Outcome]
    problems: list[FigfolioError]
    seconds: float
    ran: int
    cached: int
    site: Path | None = None
    timings: dict[str, float] = field(default_factory=dict)

    def counts(self) -> dict[str, int]:
        out: dict[str, int] = {}
        for o in self.outcomes:
            for row in o.rows:
                out[row.verdict] = out.get(row.verdict, 0) + 1
        return out


def source_revision(root: Path) -> str | None:
    """Short git revision of the catalogue, with '+changes' when the tree is dirty."""
    try:
        rev = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=root, text=True,
                             capture_output=True, timeout=5)
        if rev.returncode != 0:
            return None
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"],
                               cwd=root, text=True, capture_output=True, timeout=5)
        return rev.stdout.strip() + ("+changes" if dirty.stdout.strip() else "")
    except (OSError, subprocess.SubprocessError):
        return None


def screen_all(recipes: list[Recipe], settings: Settings) -> str:
    """The data-screen report of every recipe with a finding that must stop publishing."""
    from figfolio import screen

    blocks = []
    for recipe in recipes:
        findings = screen.screen_recipe(recipe, settings)
        if any(f.blocking for f in findings):
            rel = recipe.toml_path.relative_to(settings.root)
            blocks.append(f"{recipe.slug}:\n" + screen.format_findings(findings, rel))
    return "\n".join(blocks)


def _stage(result: RunResult, recipe: Recipe, settings: Settings, staging: Path
           ) -> dict[str, Any]:
    """Move a run's outputs into ``staging`` and derive digests, thumbnails and the audit."""
    from figfolio import audit, data, fingerprint

    staging.mkdir(parents=True, exist_ok=True)
    images: dict[str, dict[str, Any]] = {}
    outputs: list[Output] = []
    for out in result.outputs:
        target = staging / out.name
        shutil.move(out.path, target)
        outputs.append(Output(out.name, out.format, out.figure, str(target)))
    result.outputs = outputs
    thumbs_done = False
    for out in outputs:
        path = Path(out.path)
        try:
            if out.format == "png":
                facts = fingerprint.analyse_png(path, None if thumbs_done else staging / "thumbs")
                thumbs = {str(k): Path(v).relative_to(staging).as_posix()
                          for k, v in facts.thumbs.items()}
                thumbs_done = thumbs_done or bool(thumbs)
                images[out.name] = {"format": "png", "exact": facts.exact,
                                    "perceptual": facts.perceptual, "width": facts.width,
                                    "height": facts.height, "thumbs": thumbs}
            else:
                images[out.name] = {"format": out.format,
                                    "exact": fingerprint.vector_digest(path)}
        except FigfolioError as exc:
            result.status = "broken"
            result.reason = f"{out.name}: {exc.message}"
    audit_dir = staging / "audit"
    audit_dir.mkdir(exist_ok=True)
    t0 = time.perf_counter()
    findings = audit.audit_recipe(recipe, settings, [o.to_dict() for o in outputs],
                                  result.facts, audit_dir)
    _timed("audit", time.perf_counter() - t0)
    findings["images"] = {fig: {kind: Path(p).relative_to(staging).as_posix()
                                for kind, p in kinds.items()}
                          for fig, kinds in findings.get("images", {}).items()}
    described = []
    for path in recipe.data:
        desc = data.describe_file(path, recipe, settings) if recipe.publishes_data else None
        described.append({"name": recipe.rel(path), "size": path.stat().st_size,
                          "description": desc})
    run = result.to_dict()
    for out in run["outputs"]:
        out["path"] = out["name"]
    return {"run": run, "images": images, "audit": findings, "data": described}


def _outcome(recipe: Recipe, entry: Entry, from_cache: bool, settings: Settings,
             cache: Cache, unstable: dict[str, str]) -> Outcome:
    from figfolio import fingerprint

    record = entry.record
    result = RunResult.from_dict(record["run"])
    for out in result.outputs:
        out.path = str(entry.path(out.name))
    approved = approval.read_approved(recipe.fingerprints_path)
    rows = approval.verdicts(approved, record["images"], result.status,
                             settings.drift_tolerance, reason=result.reason)
    for row in rows:
        if row.name in unstable:
            row.verdict, row.detail = "unstable", unstable[row.name]
        if row.verdict in ("drifted", "changed") and approved is not None:
            old = approved.outputs.get(row.name, {})
            new_path = entry.path(row.name)
            if row.name.endswith(".png") and new_path.is_file():
                diff = entry.dir / "diff" / row.name
                before = cache.image_for(old.get("exact", "")) if old else None
                if not diff.is_file():
                    diff.parent.mkdir(exist_ok=True)
                    fingerprint.diff_image(before, new_path, diff)
                row.diff_image = diff
                row.approved_image = before
    return Outcome(recipe=recipe, entry=entry, result=result, from_cache=from_cache,
                   images=record["images"], rows=rows, verdict=approval.recipe_verdict(rows),
                   audit=record.get("audit", {}), data=record.get("data", []))


def _compare_rounds(first: RunResult, others: list[RunResult]) -> dict[str, str]:
    """Names of outputs whose pixels (PNG) or bytes differ between repeated runs."""
    from figfolio import fingerprint

    unstable: dict[str, str] = {}
    base = {o.name: o for o in first.outputs}
    for k, other in enumerate(others, start=2):
        if other.status != "ok":
            for name in base:
                unstable.setdefault(name, f"run {k} failed ({other.reason}) while run 1 "
                                          f"succeeded; usual causes: {UNSTABLE_CAUSES}")
            continue
        for out in other.outputs:
            if out.name not in base:
                unstable.setdefault(out.name, f"produced only in run {k}")
                continue
            a, b = Path(base[out.name].path), Path(out.path)
            if out.format == "png":
                same = fingerprint.exact_digest(fingerprint.decode(a)) == \
                    fingerprint.exact_digest(fingerprint.decode(b))
                what = "pixels"
            else:
                same = a.read_bytes() == b.read_bytes()
                what = "bytes"
            if not same:
                unstable.setdefault(out.name, f"{what} differ between run 1 and run {k}; usual "
                                              f"causes: {UNSTABLE_CAUSES}")
    return unstable


def run_pass(settings: Settings, options: Options) -> Report:
    """Plan, execute, fingerprint, audit and judge; publish the site when asked."""
    started = time.perf_counter()
    TIMINGS.clear()
    if settings.audit.errors:
        from figfolio import audit
        audit.check_error_codes(settings)
    recipes, problems = discover(settings, options.slugs or None)
    if recipes:
        blocking = screen_all(recipes, settings)
        if blocking:
            raise DataScreenError(
                "the data screen found likely identifiers or small counts that no recipe has "
                "acknowledged:\n" + blocking,
                hint="remove or coarsen those columns, or acknowledge each one in the recipe's "
                     "[screen.acknowledged] with a reason; the screen is an aid, not a "
                     "guarantee: your data governance decides what may be shared")
    cache = Cache(settings.cache_path)
    with cache.lock():
        outcomes, ran, cached = _execute(settings, options, recipes, cache)
        report = Report(outcomes=outcomes, problems=problems, ran=ran, cached=cached,
                        seconds=0.0)
        _write_last(settings, report, options)
        if options.publish and options.command != "approve":
            shown = outcomes
            if options.slugs:  # a partial build still publishes every cached recipe
                done = {o.recipe.slug for o in outcomes}
                shown = outcomes + _cached_outcomes(settings, cache, done)
            t0 = time.perf_counter()
            report.site = publish(settings, shown, options)
            _timed("site", time.perf_counter() - t0)
    report.seconds = time.perf_counter() - started
    report.timings = dict(TIMINGS, total=report.seconds)
    return report


def _execute(settings: Settings, options: Options, recipes: list[Recipe], cache: Cache
             ) -> tuple[list[Outcome], int, int]:
    keys = {r.slug: cache.input_key(r, settings) for r in recipes}
    entries: dict[str, Entry] = {}
    todo: list[Recipe] = []
    repeat = max(options.repeat, 1)
    for recipe in recipes:
        entry = None if (options.force or repeat > 1) else cache.lookup(recipe.slug,
                                                                       keys[recipe.slug])
        if entry is None:
            todo.append(recipe)
        else:
            entries[recipe.slug] = entry
    progress = Progress(len(recipes), options.command, quiet=options.quiet)
    for slug in entries:
        progress.step(slug, "cached")
    unstable: dict[str, dict[str, str]] = {}
    if todo:
        by_slug = {r.slug: r for r in todo}
        jobs = [Job.from_recipe(r, settings, cache.last_run_seconds(r.slug)) for r in todo]
        work = Path(tempfile.mkdtemp(prefix="work-", dir=_tmp_dir(cache)))
        executor = make_executor(settings, options.executor, options.scheduler,
                                 jobs=options.jobs)
        rounds: dict[str, list[RunResult]] = {r.slug: [] for r in todo}
        try:
            for k in range(repeat):
                def collect(result: RunResult, k: int = k) -> None:
                    rounds[result.slug].append(result)
                    if k == 0:
                        recipe = by_slug[result.slug]
                        staging = Path(tempfile.mkdtemp(prefix="stage-", dir=_tmp_dir(cache)))
                        record = _stage(result, recipe, settings, staging)
                        entries[result.slug] = cache.store(result.slug, keys[result.slug],
                                                           staging, record)
                        shutil.rmtree(staging, ignore_errors=True)
                        if repeat == 1:
                            progress.step(result.slug, result.status)
                    elif k == repeat - 1:
                        progress.step(result.slug, result.status)
                executor.run(jobs, work / f"round-{k + 1}", collect)
        finally:
            executor.close()
        if repeat > 1:
            for slug, results in rounds.items():
                entry = entries.get(slug)
                if entry is None or not results:
                    continue
                first = RunResult.from_dict(entry.record["run"])
                for out in first.outputs:
                    out.path = str(entry.path(out.name))
                unstable[slug] = _compare_rounds(first, results[1:]) if first.status == "ok" \
                    else {}
        shutil.rmtree(work, ignore_errors=True)
    outcomes = []
    for recipe in recipes:
        entry = entries.get(recipe.slug)
        if entry is None:
            continue
        outcomes.append(_outcome(recipe, entry, recipe not in todo, settings, cache,
                                 unstable.get(recipe.slug, {})))
    return outcomes, len(todo), len(recipes) - len(todo)


def _tmp_dir(cache: Cache) -> Path:
    path = cache.path / "tmp"
    path.mkdir(parents=True, exist_ok=True)
    return path


def _write_last(settings: Settings, report: Report, options: Options) -> None:
    """Keep the latest verdicts in the cache so the site's report page can show them."""
    rows = [{"slug": o.recipe.slug, "name": r.name, "verdict": r.verdict, "detail": r.detail}
            for o in report.outcomes for r in o.rows]
    payload = {"command": options.command, "date": _now(), "rows": rows}
    target = settings.cache_path / "last-verdicts.json"
    tmp = target.with_suffix(".tmp")
    tmp.write_text(json.dumps(payload, indent=1, sort_keys=True))
    os.replace(tmp, target)


def _now() -> str:
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def approve(settings: Settings, options: Options) -> tuple[Report, list[str]]:
    """Build the chosen recipes, then record their current outputs as approved."""
    options.command = "approve"
    report = run_pass(settings, options)
    written, refused = [], []
    cache = Cache(settings.cache_path)
    for outcome in report.outcomes:
        if outcome.result.status != "ok":
            refused.append(f"{outcome.recipe.slug}: not approved, the recipe is broken "
                           f"({outcome.result.reason})")
            continue
        approval.write_approved(outcome.recipe, outcome.images, approval.stack_versions())
        for name, facts in outcome.images.items():
            if facts.get("format") == "png" and outcome.entry is not None:
                cache.remember_image(outcome.entry.path(name), facts["exact"])
        written.append(outcome.recipe.slug)
    if options.publish:
        fresh = run_pass(settings, Options(publish=True, quiet=True, command="build",
                                           out=options.out))
        report.site = fresh.site
    return report, written + refused


def publish(settings: Settings, outcomes: list[Outcome], options: Options) -> Path:
    """Render the site from these outcomes into ``--out`` or build/site."""
    from figfolio import site

    view = site_view(settings, outcomes, options.command)
    out = options.out or settings.site_path
    site.publish(view, settings, out)
    return out


def _cached_outcomes(settings: Settings, cache: Cache, skip: set[str]) -> list[Outcome]:
    """Outcomes of recipes not run in this pass whose current inputs have a cache entry."""
    recipes, _ = discover(settings)
    out = []
    for recipe in recipes:
        if recipe.slug in skip:
            continue
        entry = cache.lookup(recipe.slug, cache.input_key(recipe, settings))
        if entry is not None:
            out.append(_outcome(recipe, entry, True, settings, cache, {}))
    return out


def site_view(settings: Settings, outcomes: list[Outcome], command: str) -> dict[str, Any]:
    """The plain-data view the site templates render (see site.py for the fields)."""
    outcomes = _ordered(outcomes, settings.order)
    revision = source_revision(settings.root)
    contribute = None
    if settings.contribute:
        path = settings.root / settings.contribute
        if path.is_file():
            contribute = path.read_text(encoding="utf-8", errors="replace")
    counts: dict[str, int] = {}
    entries = []
    for index, o in enumerate(outcomes):
        for row in o.rows:
            counts[row.verdict] = counts.get(row.verdict, 0) + 1
        entries.append(_entry(o, index, revision))
    return {"title": settings.title, "description": settings.description, "build_date": _now(),
            "revision": revision, "figfolio_version": __version__,
            "contribute_markdown": contribute,
            "report": {"date": _now(), "counts": counts, "command": command},
            "recipes": entries}


def _ordered(outcomes: list[Outcome], order: str) -> list[Outcome]:
    if order == "slug":
        key: Callable[[Outcome], Any] = lambda o: (o.recipe.order or 0, o.recipe.slug)
    elif order == "newest":
        key = lambda o: -(o.recipe.toml_path.stat().st_mtime)
    else:
        key = lambda o: (o.recipe.order if o.recipe.order is not None else 1 << 30,
                         o.recipe.title.lower())
    return sorted(outcomes, key=key)


def recipe_files(recipe: Recipe) -> list[str]:
    """Files of the recipe that go into its zip; restricted data stays out."""
    out = []
    data_files = {recipe.rel(p) for p in recipe.data}
    for path in sorted(recipe.folder.rglob("*")):
        rel = path.relative_to(recipe.folder)
        if not path.is_file() or path.is_symlink() or "__pycache__" in rel.parts:
            continue
        if not recipe.publishes_data and (rel.as_posix() in data_files or rel.parts[0] == "data"):
            continue
        out.append(rel.as_posix())
    return out


def _entry(o: Outcome, index: int, revision: str | None) -> dict[str, Any]:
    recipe, entry = o.recipe, o.entry
    assert entry is not None
    verdict_of = {r.name: r for r in o.rows}
    outputs = []
    for out in o.result.outputs:
        row = verdict_of.get(out.name)
        facts = o.images.get(out.name, {})
        outputs.append({"name": out.name, "format": out.format, "figure": out.figure,
                        "path": Path(out.path), "verdict": row.verdict if row else "unapproved",
                        "detail": row.detail if row else "",
                        "width": facts.get("width"), "height": facts.get("height"),
                        "diff_image": getattr(row, "diff_image", None) if row else None,
                        "approved_image": getattr(row, "approved_image", None) if row else None})
    thumbs = {}
    for facts in o.images.values():
        if facts.get("thumbs"):
            thumbs = {int(k): entry.dir / v for k, v in facts["thumbs"].items()}
            break
    audit_view = dict(o.audit)
    audit_view["images"] = {fig: {k: entry.dir / v for k, v in kinds.items()}
                            for fig, kinds in o.audit.get("images", {}).items()}
    data_files = []
    for item in o.data:
        data_files.append({"name": item["name"], "path": recipe.folder / item["name"],
                           "size": item["size"], "publish": recipe.publishes_data,
                           "description": item["description"]})
    readme = recipe.readme
    provenance = dict(o.result.provenance)
    provenance.setdefault("revision", revision)
    provenance.setdefault("run_seconds", round(o.result.duration, 2))
    return {
        "slug": recipe.slug, "title": recipe.title, "summary": recipe.summary,
        "alt": recipe.alt, "tags": list(recipe.tags), "methods": list(recipe.methods),
        "authors": list(recipe.authors), "data_origin": recipe.data_origin,
        "width_mm": recipe.width_mm, "kind": recipe.kind,
        "readme_markdown": readme.read_text(encoding="utf-8", errors="replace")
        if readme else None,
        "script_name": recipe.rel(recipe.script),
        "script_text": recipe.script.read_text(encoding="utf-8", errors="replace"),
        "folder": recipe.folder, "files": recipe_files(recipe), "verdict": o.verdict,
        "status": o.result.status, "reason": o.result.reason, "outputs": outputs,
        "thumbs": thumbs, "audit": audit_view, "data_files": data_files,
        "provenance": provenance,
        "run": {"stdout_tail": o.result.stdout_tail, "stderr_tail": o.result.stderr_tail,
                "traceback": o.result.traceback, "from_cache": o.from_cache,
                "warnings": list(o.result.warnings)},
        "order_index": index,
    }
