"""The ``figfolio`` command: parse arguments, call one pipeline step, print, exit.

Why the try/except at the top: a user error (``FigfolioError``) is printed as a short message
with its fix and the exit status PRODUCT.md §4 promises; anything else is a bug in figfolio and
says so, with the traceback, so it can be reported.
"""
from __future__ import annotations

import argparse
import os
import re
import shutil
import sys
from pathlib import Path
from typing import Sequence

from figfolio import __version__
from figfolio.errors import FigfolioError, ManyErrors, UsageError
from figfolio.settings import Settings, load_settings

FAILING = ("changed", "broken", "missing", "unstable")
SCAFFOLD = Path(__file__).parent / "scaffold"


class _Parser(argparse.ArgumentParser):
    """argparse that raises our UsageError (exit 2, no traceback) instead of exiting itself."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise UsageError(message, hint=f"see '{self.prog} --help'")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="figfolio", description="Run, verify and publish a catalogue of figure "
                                              "recipes.")
    p.add_argument("--version", action="version", version=f"figfolio {__version__}")
    p.add_argument("-C", dest="root", type=Path, default=Path.cwd(),
                   help="the catalogue folder (default: here or the nearest parent)")
    sub = p.add_subparsers(dest="command", parser_class=_Parser)

    new = sub.add_parser("new", help="scaffold a runnable recipe or copy one")
    new.add_argument("slug")
    new.add_argument("--from", dest="source", metavar="OTHER")

    lint = sub.add_parser("lint", help="check settings, metadata and data without running")
    lint.add_argument("slugs", nargs="*")

    def run_options(cmd: argparse.ArgumentParser) -> None:
        cmd.add_argument("slugs", nargs="*", metavar="SLUG")
        cmd.add_argument("--jobs", "-j", type=int, metavar="N")
        cmd.add_argument("--force", action="store_true", help="run even when the cache is fresh")
        cmd.add_argument("--executor", choices=("local", "dask"))
        cmd.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler address")
        cmd.add_argument("--strict", action="store_true", help="unapproved outputs fail too")
        cmd.add_argument("--repeat", type=int, default=None, metavar="N",
                         help="run each recipe N times and flag unstable outputs")
        cmd.add_argument("--quiet", "-q", action="store_true")

    build = sub.add_parser("build", help="run changed recipes, fingerprint, audit, publish")
    run_options(build)
    build.add_argument("--out", type=Path, metavar="DIR", help="site folder (default build/site)")

    verify = sub.add_parser("verify", help="compare outputs with the approved fingerprints")
    run_options(verify)
    verify.add_argument("--junit", type=Path, metavar="FILE", help="write JUnit XML here")

    approve = sub.add_parser("approve", help="record current outputs as approved")
    approve.add_argument("slugs", nargs="*", metavar="SLUG")
    approve.add_argument("--jobs", "-j", type=int, metavar="N")
    approve.add_argument("--quiet", "-q", action="store_true")

    serve = sub.add_parser("serve", help="build, serve on 127.0.0.1, rebuild on change")
    serve.add_argument("--port", type=int, default=8765)
    serve.add_argument("--jobs", "-j", type=int, metavar="N")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    try:
        args = _parser().parse_args(argv)
        if not args.command:
            _parser().print_help()
            return 2
        return COMMANDS[args.command](args)
    except FigfolioError as exc:
        print(exc.render(), file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


def _settings(args: argparse.Namespace) -> Settings:
    return load_settings(args.root)


def cmd_new(args: argparse.Namespace) -> int:
    from figfolio.recipe import SLUG, load_recipe

    settings = _settings(args)
    if not SLUG.match(args.slug):
        raise UsageError(f"'{args.slug}' is not a valid slug",
                         hint="use lowercase letters, digits and single hyphens")
    target = settings.recipes_path / args.slug
    if target.exists():
        raise UsageError(f"recipe '{args.slug}' already exists", path=target,
                         hint="choose another slug")
    settings.recipes_path.mkdir(parents=True, exist_ok=True)
    tmp = settings.recipes_path / f".{args.slug}.partial"
    shutil.rmtree(tmp, ignore_errors=True)
    if args.source:
        source = settings.recipes_path / args.source
        if not (source / "recipe.toml").is_file():
            raise UsageError(f"no recipe named '{args.source}'", path=settings.recipes_path,
                             hint="see the folder names under recipes/")
        original = load_recipe(source, settings)
        shutil.copytree(source, tmp, ignore=shutil.ignore_patterns(
            "fingerprints.json", "__pycache__", "*.pyc", ".ipynb_checkpoints"), symlinks=True)
        toml = tmp / "recipe.toml"
        text = toml.read_text(encoding="utf-8")
        new_title = f"{original.title} (copy)"
        text, n = re.subn(r'(?m)^title\s*=\s*(".*?"|\'.*?\')\s*$',
                          'title = ' + _toml_string(new_title), text, count=1)
        toml.write_text(text, encoding="utf-8")
        what = f"copied from '{args.source}' (title: {new_title}; no fingerprints yet)"
    else:
        shutil.copytree(SCAFFOLD, tmp, ignore=shutil.ignore_patterns("__pycache__"))
        toml = tmp / "recipe.toml"
        toml.write_text(toml.read_text(encoding="utf-8").replace("{slug}", args.slug),
                        encoding="utf-8")
        what = "scaffolded: edit recipe.toml, figure.py and data/"
    os.replace(tmp, target)
    print(f"{target.relative_to(settings.root)}: {what}")
    print(f"next: cd {target.relative_to(settings.root)} && python {_script_name(target)}; "
          f"then figfolio build {args.slug} && figfolio approve {args.slug}")
    return 0


def _script_name(folder: Path) -> str:
    found = sorted(p.name for p in folder.iterdir() if p.suffix in (".py", ".ipynb"))
    return found[0] if found else "figure.py"


def _toml_string(value: str) -> str:
    return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'


def cmd_lint(args: argparse.Namespace) -> int:
    from figfolio import data, screen
    from figfolio.recipe import discover

    from figfolio import audit

    settings = _settings(args)
    audit.check_error_codes(settings)
    recipes, problems = discover(settings, args.slugs or None)
    screen_lines = []
    for recipe in recipes:
        for path in recipe.data:
            desc = data.describe_file(path, recipe, settings)
            for note in (desc or {}).get("notes", []) if recipe.publishes_data else []:
                screen_lines.append(f"note: {recipe.rel(path)} ({recipe.slug}): {note}")
        findings = screen.screen_recipe(recipe, settings)
        blocking = [f for f in findings if f.blocking]
        if findings:
            screen_lines.append(f"{recipe.slug}:\n" + screen.format_findings(
                findings, recipe.toml_path.relative_to(settings.root)))
        if blocking:
            problems.append(FigfolioError(f"{len(blocking)} open data-screen finding(s)",
                                          path=recipe.toml_path, key="screen.acknowledged",
                                          hint="acknowledge each reviewed column with a reason"))
    for line in screen_lines:
        print(line)
    if problems:
        print(ManyErrors(problems).render(), file=sys.stderr)
        print(f"lint: {len(problems)} problem(s) in {len(recipes) + len(problems)} recipe(s)",
              file=sys.stderr)
        return 2
    print(f"lint: {len(recipes)} recipe(s), settings and metadata valid, data screen clean")
    return 0


def _options(args: argparse.Namespace, command: str):
    from figfolio.build import Options

    repeat = getattr(args, "repeat", None)
    return Options(slugs=list(args.slugs), force=getattr(args, "force", False), jobs=args.jobs,
                   out=getattr(args, "out", None), executor=getattr(args, "executor", None),
                   scheduler=getattr(args, "scheduler", None), repeat=repeat or 1,
                   quiet=getattr(args, "quiet", False), command=command)


def _run(args: argparse.Namespace, command: str) -> int:
    from figfolio import approval, build

    settings = _settings(args)
    options = _options(args, command)
    if options.repeat == 1 and getattr(args, "repeat", None) is None:
        options.repeat = settings.repeat if command == "build" else 1
    report = build.run_pass(settings, options)
    strict = getattr(args, "strict", False) or settings.strict
    _print_table(report, verbose=command == "verify")
    if command == "verify" and getattr(args, "junit", None):
        approval.write_junit(args.junit, {o.recipe.slug: o.rows for o in report.outcomes},
                             strict=strict,
                             durations={o.recipe.slug: o.result.duration
                                        for o in report.outcomes})
        print(f"JUnit XML: {args.junit}")
    for problem in report.problems:
        print(problem.render(), file=sys.stderr)
    status = max((approval.exit_status(o.rows, strict) for o in report.outcomes), default=0)
    errors = [f for o in report.outcomes for f in o.audit.get("findings", [])
              if f.get("severity") == "error"]
    if errors:
        status = max(status, 1)
    if report.problems:
        status = 2
    return status


def _print_table(report, verbose: bool) -> None:
    counts = report.counts()
    rows = []
    for o in report.outcomes:
        if verbose:
            for r in o.rows:
                rows.append((o.recipe.slug, r.name, r.verdict, r.detail))
        else:
            rows.append((o.recipe.slug, "", o.verdict, o.result.reason))
        for f in o.audit.get("findings", []) if verbose else []:
            fig = f.get("figure")
            where = f"figure {fig}" if isinstance(fig, int) else (str(fig) if fig else "-")
            rows.append((o.recipe.slug, where, f"audit {f['severity']}",
                         f"{f['code']}: {f['message']}"))
        for w in o.result.warnings:
            rows.append((o.recipe.slug, "", "warning", w))
        if o.result.status != "ok":
            for line in _failure_tail(o.result.traceback or o.result.stderr_tail):
                rows.append((o.recipe.slug, "", "", "  " + line))
    if rows:
        w0 = max(len(r[0]) for r in rows)
        w1 = max(len(r[1]) for r in rows)
        for slug, name, verdict, detail in rows:
            cols = [slug.ljust(w0)] + ([name.ljust(w1)] if w1 else []) + [verdict.ljust(11),
                                                                          detail]
            print("  ".join(cols).rstrip())
    summary = ", ".join(f"{n} {v}" for v, n in sorted(counts.items()))
    print(f"{len(report.outcomes)} recipe(s): {report.ran} run, {report.cached} from cache; "
          f"outputs: {summary or 'none'}; {report.seconds:.1f} s")
    if report.site:
        print(f"site: {report.site / 'index.html'}")


_FRAME = re.compile(r'^\s*File "([^"]+)", line \d+')
_OWN_CODE = str(Path(__file__).resolve().parent)


def _failure_tail(text: str, count: int = 3) -> list[str]:
    """The last lines of a broken recipe's traceback, without figfolio's own frames.

    Why: when figfolio itself stops a recipe (a canvas over ``max_pixels``) the exception is
    raised inside figfolio's code; printing those frames makes the recipe's failure look like
    a crash of figfolio, and the reason column already says what happened. Frames of the
    recipe and of its libraries stay, so the user sees where their own code failed.
    """
    lines = text.strip().splitlines()
    if lines and lines[-1].startswith("figfolio."):
        return []
    kept: list[str] = []
    skipping = False
    for line in lines:
        frame = _FRAME.match(line)
        if frame:
            skipping = frame.group(1).startswith(_OWN_CODE)
        elif skipping and line.startswith("    "):
            continue
        else:
            skipping = False
        if not skipping:
            kept.append(line)
    return kept[-count:]


def cmd_build(args: argparse.Namespace) -> int:
    return _run(args, "build")


def cmd_verify(args: argparse.Namespace) -> int:
    return _run(args, "verify")


def cmd_approve(args: argparse.Namespace) -> int:
    from figfolio import build

    settings = _settings(args)
    options = _options(args, "approve")
    report, lines = build.approve(settings, options)
    for line in lines:
        print(f"approved: {line}" if ":" not in line else line)
    for problem in report.problems:
        print(problem.render(), file=sys.stderr)
    refused = [line for line in lines if ":" in line]
    return 1 if refused else (2 if report.problems else 0)


def cmd_serve(args: argparse.Namespace) -> int:
    from figfolio import build, serve

    settings = _settings(args)
    pool = build.warm_pool(settings, args.jobs)  # warm workers kept between rebuilds
    if pool is not None:
        from figfolio.executor import warm
        warm(pool, args.jobs or settings.job_count)  # ready before the first edit

    def rebuild() -> None:
        try:
            report = build.run_pass(settings, build.Options(jobs=args.jobs, quiet=True),
                                    pool=pool)
            _print_table(report, verbose=False)
        except FigfolioError as exc:
            print(exc.render(), file=sys.stderr)

    try:
        serve.serve(settings, args.port, rebuild)
    finally:
        if pool is not None:
            pool.close()
    return 0


COMMANDS = {"new": cmd_new, "lint": cmd_lint, "build": cmd_build, "verify": cmd_verify,
            "approve": cmd_approve, "serve": cmd_serve}
