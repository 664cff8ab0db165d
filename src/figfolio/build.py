"""One pass over the catalogue: plan, run what changed, fingerprint, audit, judge, publish.

Why one module: ``build``, ``verify`` and ``approve`` are the same pipeline with different
endings, and the order of steps (screen before publish, cache before run, verdict after
fingerprint) is the product's guarantee. Each step is delegated to the module that owns it;
this file only decides what happens in which order and gathers the results.

Where the time goes, and why the pass is shaped this way (benchmarks/bench_build.py measures
it): recipes run in warm workers, longest expected first; each worker also stages its own
results (digests, thumbnails, audit, data summaries; poststep.py), so the main thread only
stores them. A pass where nothing changed is answered from ``build/cache/noop.json`` after one
stat walk (noop.py) without loading a recipe. When that check fails, a pass still stats files
rather than hashing them, reuses the screen verdicts of unchanged data, and publishes nothing
when the site on disk was made from the same view (site_state.py); a pass with changes
re-renders only the pages that show them. Neither no-op path imports numpy, pandas,
matplotlib or Pillow.
"""
from __future__ import annotations

import dataclasses
import hashlib
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

from figfolio import __version__, approval, noop
from figfolio.atomic import write_text
from figfolio.cache import RECORD, Cache, Entry
from figfolio.errors import DataScreenError, FigfolioError
from figfolio.executor import Executor, Lent, make_executor, warm
from figfolio.poststep import PostSpec
from figfolio.progress import Progress
from figfolio.recipe import Recipe, discover
from figfolio.runner import Job, RunResult
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
    # True when the pass was answered from build/cache/noop.json (nothing changed); else
    # fast_miss says why not ("inputs changed", "--force", ...).
    fast: bool = False
    fast_miss: str = ""
    shown: list[str] = field(default_factory=list)   # slugs of the published recipe pages

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


SCREEN_PASSED = "screen-passed.json"


def _screen_key(input_key: str, settings: Settings) -> str:
    """What a recipe's screen result depends on: its files (the input key) and the settings."""
    from dataclasses import asdict

    blob = json.dumps([input_key, asdict(settings.screen), __version__], sort_keys=True,
                      default=str)
    return hashlib.sha256(blob.encode()).hexdigest()


def screen_all(recipes: list[Recipe], settings: Settings, cache: Cache | None = None,
               keys: dict[str, str] | None = None,
               described: dict[str, list[dict[str, Any]] | None] | None = None) -> str:
    """The data-screen report of every recipe with a finding that must stop publishing.

    With a cache and input keys, a recipe that passed the screen with exactly these files and
    screen settings is not screened again (``build/cache/screen-passed.json``): reading every
    data file of a thousand recipes would dominate a build where nothing changed. A recipe
    with a blocking finding is never remembered, so its report is shown on every build.

    ``described``: for each of its slugs that is screened here, its value becomes the recipe's
    data description (``poststep.describe_data``), made right after the screen while the
    classified columns are still at hand (``data.table_columns``), so the post step need not
    classify every cell again. Slugs not screened keep None; their post step describes them.
    """
    known: dict[str, str] = {}
    wanted: dict[str, str] = {}
    if cache is not None and keys is not None:
        known = _read_json(cache.path / SCREEN_PASSED)
        wanted = {r.slug: _screen_key(keys[r.slug], settings) for r in recipes}
    todo = [r for r in recipes if not wanted or known.get(r.slug) != wanted[r.slug]]
    if not todo:
        return ""
    from figfolio import screen

    blocks = []
    passed: dict[str, str] = {}
    for recipe in todo:
        findings = screen.screen_recipe(recipe, settings)
        if described is not None and recipe.slug in described:
            described[recipe.slug] = _describe(recipe, settings)
        if any(f.blocking for f in findings):
            rel = recipe.toml_path.relative_to(settings.root)
            blocks.append(f"{recipe.slug}:\n" + screen.format_findings(findings, rel))
        elif wanted:
            passed[recipe.slug] = wanted[recipe.slug]
    if passed and cache is not None:
        kept = {slug: key for slug, key in known.items() if slug in wanted}
        write_text(cache.path / SCREEN_PASSED, json.dumps({**kept, **passed}, sort_keys=True))
    return "\n".join(blocks)


def _describe(recipe: Recipe, settings: Settings) -> list[dict[str, Any]] | None:
    """The recipe's data description, or None (its post step tries again and reports)."""
    from figfolio import poststep

    t0 = time.perf_counter()
    try:
        return poststep.describe_data(recipe, settings)
    except OSError:  # a data file vanished since discovery
        return None
    finally:
        _timed("describe", time.perf_counter() - t0)


def _read_json(path: Path) -> dict[str, Any]:
    try:
        value = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return value if isinstance(value, dict) else {}


def _stage(result: RunResult, recipe: Recipe, settings: Settings, staging: Path,
           described: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """Stage a run's outputs here, in the builder (spawn mode, Dask, or a failed post fork)."""
    from figfolio import poststep

    return poststep.stage(result, recipe, settings, staging, described)


def _add_timings(record: dict[str, Any]) -> None:
    """Move the post step's timings out of the record into this pass's TIMINGS."""
    for name, seconds in (record.pop("timings", None) or {}).items():
        if isinstance(seconds, (int, float)):
            _timed(name, float(seconds))


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
            old = approved.outputs.get(row.name)
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


def run_pass(settings: Settings, options: Options, pool: Executor | None = None) -> Report:
    """Plan, execute, fingerprint, audit and judge; publish the site when asked.

    A ``build`` or ``verify`` whose inputs, cache and site are exactly as the last successful
    pass left them is answered from ``build/cache/noop.json`` (noop.py) without loading a
    recipe; ``--force`` and ``--repeat`` always take the full path. ``pool``: an executor the
    caller keeps between passes (``serve``'s warm workers); used instead of a new one and
    left running.
    """
    started = time.perf_counter()
    TIMINGS.clear()
    if not settings.recipes_path.is_dir():
        discover(settings)  # raises the error that names the missing folder; creates nothing
    cache = Cache(settings.cache_path)
    with cache.lock():
        t0 = time.perf_counter()
        snapshot = noop.inputs_digest(settings, options) if _replayable(options) else None
        miss = "--force" if options.force else "not a plain build or verify"
        if snapshot is not None and not options.force:
            replay, miss = noop.check(settings, snapshot)
            if replay is not None:
                _timed("noop_check", time.perf_counter() - t0)
                return _replayed(settings, options, replay, started)
        noop.forget(settings)
        _timed("noop_check", time.perf_counter() - t0)
        report = _full_pass(settings, options, cache, pool)
        report.fast_miss = miss
        if snapshot is not None:
            shown = report.shown if report.site is not None else []
            t0 = time.perf_counter()
            noop.record(settings, snapshot, report.site, shown, report.outcomes,
                        report.problems)
            _timed("noop_record", time.perf_counter() - t0)
    report.seconds = time.perf_counter() - started
    report.timings = dict(TIMINGS, total=report.seconds)
    return report


def _replayable(options: Options) -> bool:
    """Passes whose summary a later identical pass may replay: plain build and verify.

    Not approve (it writes fingerprints.json from the full outcomes) and not ``--repeat``
    (its ``unstable`` verdicts come from the repeated runs, which a replay would not make).
    """
    return options.command in ("build", "verify") and max(options.repeat, 1) == 1


def _replayed(settings: Settings, options: Options, replay: "noop.Replay", started: float
              ) -> Report:
    """The Report of a pass where nothing changed, as the full path would have made it."""
    outcomes = replay.outcomes
    progress = Progress(len(outcomes), options.command, quiet=options.quiet)
    for outcome in outcomes:
        progress.step(outcome.recipe.slug, "cached")
    report = Report(outcomes=outcomes, problems=replay.problems, seconds=0.0, ran=0,
                    cached=len(outcomes), fast=True)
    _write_last(settings, report, options)
    if options.publish and options.command != "approve":
        report.site = replay.site
        _timed("site_unchanged", 1.0)   # as on the full path: the site on disk is current
    report.seconds = time.perf_counter() - started
    report.timings = dict(TIMINGS, total=report.seconds)
    return report


def _full_pass(settings: Settings, options: Options, cache: Cache,
               pool: Executor | None = None) -> Report:
    """Every step, for a pass that cannot be replayed (the caller holds the lock)."""
    if settings.audit.errors:
        from figfolio import audit
        audit.check_error_codes(settings)
    t0 = time.perf_counter()
    recipes, problems = discover(settings, options.slugs or None)
    _timed("discover", time.perf_counter() - t0)
    t0 = time.perf_counter()
    keys = {r.slug: cache.input_key(r, settings) for r in recipes}
    _timed("plan", time.perf_counter() - t0)
    entries, todo = _lookup(recipes, cache, keys, options)
    executor = _started_executor(settings, options, todo, pool)
    try:
        t0 = time.perf_counter()
        described: dict[str, list[dict[str, Any]] | None] = {r.slug: None for r in todo}
        blocking = screen_all(recipes, settings, cache, keys, described) if recipes else ""
        _timed("screen", time.perf_counter() - t0)
        if blocking:
            raise DataScreenError(
                "the data screen found likely identifiers or small counts that no recipe has "
                "acknowledged:\n" + blocking,
                hint="remove or coarsen those columns, or acknowledge each one in the "
                     "recipe's [screen.acknowledged] with a reason; the screen is an aid, not "
                     "a guarantee: your data governance decides what may be shared")
    except BaseException:
        if executor is not None:
            executor.close()
        raise
    if todo and options.publish and options.command != "approve":
        t0 = time.perf_counter()  # while the workers warm up (site.prepare says why)
        from figfolio import site
        site.prepare(settings, todo)
        _timed("site_prepare", time.perf_counter() - t0)
    t0 = time.perf_counter()
    outcomes, ran, cached = _execute(settings, options, recipes, cache, keys, entries, todo,
                                     executor, described)
    _timed("execute", time.perf_counter() - t0)
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
        report.shown = [o.recipe.slug for o in shown]
        _timed("site", time.perf_counter() - t0)
    return report


def _lookup(recipes: list[Recipe], cache: Cache, keys: dict[str, str], options: Options
            ) -> tuple[dict[str, Entry], list[Recipe]]:
    """(cache entries of the recipes that need no run, the recipes that must run)."""
    entries: dict[str, Entry] = {}
    todo: list[Recipe] = []
    fresh = options.force or max(options.repeat, 1) > 1
    for recipe in recipes:
        entry = None if fresh else cache.lookup(recipe.slug, keys[recipe.slug])
        if entry is None:
            todo.append(recipe)
        else:
            entries[recipe.slug] = entry
    return entries, todo


def _started_executor(settings: Settings, options: Options, todo: list[Recipe],
                      pool: Executor | None = None) -> Executor | None:
    """The executor for ``todo``, its workers already warming up; None when nothing runs.

    Made before the data screen so that the workers import their stack (about a second)
    while the builder screens, instead of after it. With a ``pool`` (kept by the caller),
    that pool, lent: closing it leaves it running.
    """
    if not todo:
        return None
    if pool is not None and not options.executor:
        executor: Executor = Lent(pool)
    else:
        executor = make_executor(settings, options.executor, options.scheduler,
                                 jobs=options.jobs, preload=imported_modules(todo))
    warm(executor, len(todo))
    return executor


def _execute(settings: Settings, options: Options, recipes: list[Recipe], cache: Cache,
             keys: dict[str, str], entries: dict[str, Entry], todo: list[Recipe],
             executor: Executor | None,
             described: dict[str, list[dict[str, Any]] | None] | None = None
             ) -> tuple[list[Outcome], int, int]:
    """Run ``todo`` on ``executor`` (which this closes) and judge every recipe.

    ``described``: data descriptions the builder already made (``screen_all``), by slug.
    """
    described = described or {}
    repeat = max(options.repeat, 1)
    progress = Progress(len(recipes), options.command, quiet=options.quiet)
    for slug in entries:
        progress.step(slug, "cached")
    unstable: dict[str, dict[str, str]] = {}
    if todo:
        by_slug = {r.slug: r for r in todo}
        rounds: dict[str, list[RunResult]] = {r.slug: [] for r in todo}
        try:
            jobs = [Job.from_recipe(r, settings, _expected_seconds(r, cache)) for r in todo]
            # Round 1 is staged (digests, thumbnails, audit, data summaries) by the warm
            # workers in parallel; later --repeat rounds are only compared, so they need no
            # post step.
            staged_jobs = [dataclasses.replace(j, post=PostSpec(
                by_slug[j.slug], settings, described.get(j.slug))) for j in jobs]
            work = Path(tempfile.mkdtemp(prefix="work-", dir=_tmp_dir(cache)))
            marks = _catalogue_marks(settings)
            assert executor is not None, "_started_executor makes one whenever todo is not empty"
            for k in range(repeat):
                def collect(result: RunResult, k: int = k) -> None:
                    rounds[result.slug].append(result)
                    if k == 0:
                        entries[result.slug] = _store(result, by_slug[result.slug], settings,
                                                      cache, keys[result.slug],
                                                      described.get(result.slug))
                        if repeat == 1:
                            progress.step(result.slug, result.status)
                    elif k == repeat - 1:
                        progress.step(result.slug, result.status)
                executor.run(staged_jobs if k == 0 else jobs, work / f"round-{k + 1}",
                             collect)
        finally:
            if executor is not None:
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
        changed = _changed_marks(marks, _catalogue_marks(settings))
    else:
        changed = []
    outcomes = []
    for recipe in recipes:
        entry = entries.get(recipe.slug)
        if entry is None:
            continue
        outcomes.append(_outcome(recipe, entry, recipe not in todo, settings, cache,
                                 unstable.get(recipe.slug, {})))
    strays = _stray_writes(settings, changed, outcomes, [r.slug for r in todo])
    for outcome in outcomes:
        if strays and outcome.recipe in todo:
            outcome.result.warnings = list(outcome.result.warnings) + strays
    return outcomes, len(todo), len(recipes) - len(todo)


def _catalogue_marks(settings: Settings) -> dict[str, tuple[int, int]]:
    """(size, mtime_ns) of the catalogue's files outside build/: recipes/ and the top level.

    Why: each worker reports writes into its own recipe's folder; a write anywhere else in the
    catalogue (another recipe, the settings) can only be seen from here, before and after.
    """
    from figfolio.runner_capture import snapshot

    marks = {f"{settings.recipes_dir}/{rel}": stat
             for rel, stat in snapshot(settings.recipes_path).items()}
    try:
        with os.scandir(settings.root) as entries:
            for entry in entries:
                if entry.is_file(follow_symlinks=False):
                    info = entry.stat(follow_symlinks=False)
                    marks[entry.name] = (info.st_size, info.st_mtime_ns)
    except OSError:
        pass
    return marks


def _changed_marks(before: dict[str, tuple[int, int]], after: dict[str, tuple[int, int]]
                   ) -> list[str]:
    from figfolio.runner_capture import changed_files

    return changed_files(before, after) + sorted(rel for rel in before if rel not in after)


def _stray_writes(settings: Settings, changed: list[str], outcomes: list[Outcome],
                  ran: list[str]) -> list[str]:
    """A warning for catalogue files that changed while recipes ran and that no recipe's own
    folder check has already reported."""
    reported = {f"{settings.recipes_dir}/{o.recipe.slug}/{w.split(': ', 1)[1]}"
                for o in outcomes for w in o.result.warnings
                if w.startswith("tried to write into recipe folder: ")}
    stray = [rel for rel in changed if rel not in reported]
    if not stray:
        return []
    who = ran[0] if len(ran) == 1 else f"one of the {len(ran)} recipes run in this pass"
    shown = ", ".join(stray[:5]) + (f" and {len(stray) - 5} more" if len(stray) > 5 else "")
    return [f"the catalogue changed while recipes ran ({who}?): {shown}; recipes must write "
            "only in their scratch folder"]


def _expected_seconds(recipe: Recipe, cache: Cache) -> float:
    """How long the recipe should take, so the executor can start the longest first.

    The last stored run's time when there is one. A recipe never run gets a guess from its
    data volume (1 s plus 1 s per MB; a heuristic that only orders the queue): on a cold
    build the one big recipe then starts first instead of last, when it would run alone at
    the end while the other cores idle.
    """
    known = cache.last_run_seconds(recipe.slug)
    if known:
        return known
    size = 0
    for path in recipe.data:
        try:
            size += path.stat().st_size
        except OSError:
            continue
    return 1.0 + size / 1e6


def warm_pool(settings: Settings, jobs: int | None = None) -> Executor | None:
    """A local executor to keep between passes (``serve``), preloading what every recipe of
    the catalogue imports; None when the settings send work to another executor.

    Why: a rebuild after one edit then pays only for that recipe's own run, not for starting
    and warming the workers again (about a second).
    """
    if (settings.executor or "local") != "local":
        return None
    try:
        recipes, _problems = discover(settings)
    except FigfolioError:
        recipes = []
    return make_executor(settings, jobs=jobs, preload=imported_modules(recipes))


def imported_modules(recipes: list[Recipe]) -> list[str]:
    """Absolute imports in the Python scripts of ``recipes`` that workers may preload.

    Read with ``ast`` (nothing is executed); ``from a.b import c`` yields ``a.b`` and
    ``a.b.c`` (c may be a submodule). The worker keeps only ``worker.PRELOADABLE`` packages.
    """
    import ast

    from figfolio.worker import PRELOADABLE

    found: set[str] = set()
    for recipe in recipes:
        if recipe.kind != "python":
            continue
        try:
            tree = ast.parse(recipe.script.read_bytes(), filename=str(recipe.script))
        except (OSError, SyntaxError, ValueError):
            continue  # the run reports it
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                found.update(alias.name for alias in node.names)
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                found.add(node.module)
                found.update(f"{node.module}.{alias.name}" for alias in node.names
                             if alias.name != "*")
    return sorted(m for m in found if m.partition(".")[0] in PRELOADABLE)[:200]


def _store(result: RunResult, recipe: Recipe, settings: Settings, cache: Cache, key: str,
           described: list[dict[str, Any]] | None = None) -> Entry:
    """Put one finished run into the cache, staged by its worker or, failing that, here."""
    t0 = time.perf_counter()
    if result.staged:
        staging = Path(result.staged["dir"])
        record = result.staged["record"]
        run = record.get("run") or {}
        result.status, result.reason = run.get("status", result.status), \
            run.get("reason", result.reason)
    else:
        staging = Path(tempfile.mkdtemp(prefix="stage-", dir=_tmp_dir(cache)))
        record = _stage(result, recipe, settings, staging, described)
        _timed("staged_in_builder", 1.0)
    _add_timings(record)
    entry = cache.store(result.slug, key, staging, record, move=True)
    shutil.rmtree(staging, ignore_errors=True)
    _timed("store", time.perf_counter() - t0)
    return entry


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
    tmp.write_text(json.dumps(payload, sort_keys=True))  # no indent: the C encoder, 5x faster
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
    """Render the site from these outcomes into ``--out`` or build/site, if it changed.

    Only the recipe pages whose content changed are rendered again (plus the index, report and
    pages whose neighbours changed, see site.py); nothing at all when the site on disk is
    already the one these outcomes make (site_state.py). ``--force`` renders everything.
    """
    from figfolio import site_state

    t0 = time.perf_counter()
    view = site_view(settings, outcomes, options.command)
    out = options.out or settings.site_path
    t1 = time.perf_counter()
    state = site_state.view_state(view, settings.root)
    changed = None if options.force else \
        site_state.plan(state, site_state.read_state(out), out)
    _timed("site_view", t1 - t0)
    _timed("site_state", time.perf_counter() - t1)
    if changed is False:  # the site on disk was published from exactly this state
        _timed("site_unchanged", 1.0)
        return out
    from figfolio import site

    site.publish(view, settings, out, state=state,
                 changed_slugs=changed if isinstance(changed, set) else None)
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
    """Files of the recipe that go into its zip; restricted data stays out.

    Regular files only (no symlinks, no ``__pycache__``), in path order. Walked with
    ``os.walk`` and plain strings: this runs for every recipe on every build, including
    builds where nothing changed, and Path objects made it the slowest step of those.
    """
    import stat

    data_files = {recipe.rel(p) for p in recipe.data}
    root = str(recipe.folder)
    found: list[tuple[str, ...]] = []
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = [d for d in dirnames if d != "__pycache__"]
        base = os.path.relpath(dirpath, root)
        prefix = () if base == "." else tuple(base.split(os.sep))
        for name in filenames:
            try:
                mode = os.lstat(os.path.join(dirpath, name)).st_mode
            except OSError:
                continue
            if stat.S_ISREG(mode):
                found.append((*prefix, name))
    out = []
    for parts in sorted(found):
        rel = "/".join(parts)
        if not recipe.publishes_data and (rel in data_files or parts[0] == "data"):
            continue
        out.append(rel)
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
        # Content digest of the cache record the run, audit and data parts come from (from
        # the entry's checksum manifest): lets site_state digest those parts cheaply.
        "record_sha256": (entry.files.get(RECORD) or {}).get("sha256"),
    }
