"""The approved fingerprints of a recipe (``fingerprints.json``), verdicts, and JUnit XML.

Why a file in the recipe folder: approval is a reviewed decision, so it belongs in version
control next to the script, where a pull request shows which figure changed. The file is
written with sorted keys and one output per block so such a diff is small and readable, and it
is written atomically so a crash never leaves half of it. Verdict words and their meaning are
PRODUCT.md §5; exit statuses are §4.
"""
from __future__ import annotations

import datetime as _dt
import json
import platform
import re
import socket
import xml.etree.ElementTree as ET
from dataclasses import asdict, dataclass, field
from importlib import metadata
from pathlib import Path
from typing import Any, Collection, Mapping, Protocol, Sequence

from figfolio import __version__
from figfolio.atomic import write_text
from figfolio.errors import RecipeError
from figfolio.fingerprint import PERCEPTUAL_BITS, ImageFacts, hamming

# Worst first: a recipe's verdict is the worst of its outputs' verdicts.
VERDICTS = ("broken", "unstable", "missing", "changed", "unapproved", "drifted", "reproduced")
FAILING = frozenset({"broken", "unstable", "missing", "changed"})
FORMATS = ("png", "svg", "pdf")
VECTOR = ("svg", "pdf")
_EXACT = re.compile(r"^sha256:[0-9a-f]{64}$")
_PERCEPTUAL = re.compile(r"^[0-9a-f]{%d}$" % (PERCEPTUAL_BITS // 4))
_STACK_PACKAGES = ("matplotlib", "numpy", "pillow")
_PRINT_FIELDS = ("format", "exact", "perceptual", "width", "height")


class HasFingerprints(Protocol):
    """Anything with a ``fingerprints_path`` (a ``Recipe``)."""

    @property
    def fingerprints_path(self) -> Path: ...


@dataclass(frozen=True)
class OutputPrint:
    """Fingerprint of one output file, as stored under ``outputs`` in fingerprints.json."""

    format: str
    exact: str
    perceptual: str | None = None
    width: int | None = None
    height: int | None = None

    @classmethod
    def from_image(cls, facts: ImageFacts) -> "OutputPrint":
        return cls("png", facts.exact, facts.perceptual, facts.width, facts.height)

    @classmethod
    def from_vector(cls, fmt: str, digest: str) -> "OutputPrint":
        return cls(fmt, digest)

    def to_dict(self) -> dict[str, Any]:
        return {k: v for k, v in asdict(self).items() if v is not None}

    def get(self, key: str, default: Any = None) -> Any:
        """Read like the dict in fingerprints.json (``old.get("exact")``), for callers that
        handle stored and current fingerprints alike."""
        value = getattr(self, key, None) if key in _PRINT_FIELDS else None
        return default if value is None else value


PrintLike = OutputPrint | ImageFacts | Mapping[str, Any]


@dataclass(frozen=True)
class Approved:
    """A parsed fingerprints.json."""

    path: Path
    figfolio: str
    approved: str
    stack: dict[str, str] = field(default_factory=dict)
    outputs: dict[str, OutputPrint] = field(default_factory=dict)


@dataclass
class OutputVerdict:
    """The verdict on one output; ``distance`` is perceptual bits, when one was measured.

    Mutable on purpose: the builder attaches ``diff_image`` (the difference PNG) after
    judging, and may overrule a verdict with ``unstable`` after repeated runs.
    """

    name: str
    verdict: str
    detail: str
    distance: int | None = None
    diff_image: Path | None = None
    approved_image: Path | None = None

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["diff_image"] = str(self.diff_image) if self.diff_image else None
        out["approved_image"] = str(self.approved_image) if self.approved_image else None
        return out


# --- fingerprints.json ----------------------------------------------------------------------

def stack_versions() -> dict[str, str]:
    """Versions of the rendering stack, read from package metadata (no heavy imports)."""
    stack = {"python": platform.python_version()}
    for name in _STACK_PACKAGES:
        try:
            stack[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    try:   # FreeType shapes every glyph; a new FreeType is the classic cause of drift
        from matplotlib import ft2font
        stack["freetype"] = str(ft2font.__freetype_version__)
    except (ImportError, AttributeError):
        pass
    return stack


def _print_from_json(name: str, raw: Any, path: Path, fix: str) -> OutputPrint:
    key = f"outputs.{name}"
    if not isinstance(raw, dict):
        raise RecipeError("must be a table of fingerprints", path=path, key=key, hint=fix)
    fmt = raw.get("format")
    if fmt not in FORMATS:
        raise RecipeError(f"format {fmt!r} is not one of {', '.join(FORMATS)}", path=path,
                          key=f"{key}.format", hint=fix)
    if not isinstance(raw.get("exact"), str) or not _EXACT.match(raw["exact"]):
        raise RecipeError("must be 'sha256:' and 64 hex digits", path=path,
                          key=f"{key}.exact", hint=fix)
    if fmt != "png":
        return OutputPrint(fmt, raw["exact"])
    perceptual = raw.get("perceptual")
    if not isinstance(perceptual, str) or not _PERCEPTUAL.match(perceptual):
        raise RecipeError(f"must be {PERCEPTUAL_BITS // 4} hex digits", path=path,
                          key=f"{key}.perceptual", hint=fix)
    for dim in ("width", "height"):
        value = raw.get(dim)
        if not isinstance(value, int) or isinstance(value, bool) or value <= 0:
            raise RecipeError("must be a whole number of pixels above 0", path=path,
                              key=f"{key}.{dim}", hint=fix)
    return OutputPrint("png", raw["exact"], perceptual, raw["width"], raw["height"])


def _target(where: Path | HasFingerprints) -> Path:
    return where if isinstance(where, Path) else where.fingerprints_path


def read_approved(where: Path | HasFingerprints) -> Approved | None:
    """Parse fingerprints.json; None when the recipe has never been approved."""
    path = _target(where)
    if not path.is_file():
        return None
    fix = f"run figfolio approve {path.parent.name} to write it anew"
    try:
        raw = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise RecipeError(f"is not valid JSON ({exc})", path=path, hint=fix) from None
    if not isinstance(raw, dict):
        raise RecipeError("must hold a JSON object", path=path, hint=fix)
    outputs = raw.get("outputs")
    if not isinstance(outputs, dict):
        raise RecipeError("missing or not a table", path=path, key="outputs", hint=fix)
    stack = raw.get("stack", {})
    if not isinstance(stack, dict):
        raise RecipeError("must be a table of versions", path=path, key="stack", hint=fix)
    for key in ("figfolio", "approved"):
        if not isinstance(raw.get(key, ""), str):
            raise RecipeError("must be a string", path=path, key=key, hint=fix)
    return Approved(path=path, figfolio=raw.get("figfolio", ""), approved=raw.get("approved", ""),
                    stack={str(k): str(v) for k, v in stack.items()},
                    outputs={name: _print_from_json(name, value, path, fix)
                             for name, value in outputs.items()})


def render_approved(outputs: Mapping[str, PrintLike], stack: Mapping[str, str],
                    approved: str, version: str = __version__) -> str:
    """The exact text of fingerprints.json: sorted keys, two-space indent, final newline.

    Only the fingerprint fields are kept (a builder's dict may also carry thumbnails).
    """
    doc = {"figfolio": version, "approved": approved, "stack": dict(stack),
           "outputs": {name: _as_print(name, out).to_dict() for name, out in outputs.items()}}
    return json.dumps(doc, sort_keys=True, indent=2, ensure_ascii=False) + "\n"


def write_approved(where: Path | HasFingerprints, outputs: Mapping[str, PrintLike],
                   stack: Mapping[str, str] | None = None, today: _dt.date | None = None
                   ) -> Path:
    """Record ``outputs`` as approved; atomic, so a crash leaves the old file intact."""
    path = _target(where)
    day = (today or _dt.date.today()).isoformat()
    text = render_approved(outputs, stack if stack is not None else stack_versions(), day)
    write_text(path, text, durable=True)
    return path


# --- verdicts -------------------------------------------------------------------------------

def _stack_note(old: Mapping[str, str], new: Mapping[str, str] | None) -> str:
    if not new:
        return ""
    moved = [f"{k} {old[k]} -> {new[k]}" for k in sorted(old) if k in new and old[k] != new[k]]
    return f" (since approval: {', '.join(moved)})" if moved else ""


def _compare_png(old: OutputPrint, new: OutputPrint, tolerance: int) -> OutputVerdict:
    name = ""
    if old.exact == new.exact:
        return OutputVerdict(name, "reproduced",
                             f"pixel-identical to the approved image ({new.width} x {new.height})",
                             0)
    if (old.width, old.height) != (new.width, new.height):
        return OutputVerdict(name, "changed", f"size changed from {old.width} x {old.height} "
                                              f"to {new.width} x {new.height} pixels")
    if not old.perceptual or not new.perceptual:
        return OutputVerdict(name, "changed", "pixels differ and no perceptual digest to compare")
    distance = hamming(old.perceptual, new.perceptual)
    verdict = "drifted" if distance <= tolerance else "changed"
    detail = (f"{distance} of {PERCEPTUAL_BITS} perceptual bits differ (tolerance {tolerance})"
              + ("; pixels differ" if distance == 0 else ""))
    return OutputVerdict(name, verdict, detail, distance)


def _png_twin(name: str) -> str:
    return str(Path(name).with_suffix(".png"))


def _compare_vector(name: str, old: OutputPrint, new: OutputPrint,
                    png_rows: Mapping[str, OutputVerdict]) -> OutputVerdict:
    kind = old.format.upper()
    if old.exact == new.exact:
        return OutputVerdict(name, "reproduced", "bytes identical to the approved file")
    twin = _png_twin(name)
    row = png_rows.get(twin)
    if row is None or row.verdict not in ("reproduced", "drifted", "changed"):
        return OutputVerdict(name, "changed",
                             f"{kind} bytes differ and there is no PNG of the same figure to "
                             "compare")
    if row.verdict == "reproduced":
        return OutputVerdict(name, "drifted",
                             f"{kind} bytes differ, but {twin} is pixel-identical", 0)
    return OutputVerdict(name, row.verdict, f"{kind} bytes differ; {twin} {row.verdict}: "
                                            f"{row.detail}", row.distance)


def _natural(name: str) -> list[Any]:
    return [int(part) if part.isdigit() else part for part in re.split(r"(\d+)", name)]


def _as_print(name: str, value: PrintLike) -> OutputPrint:
    """Accept an OutputPrint, ImageFacts, or the builder's dict (extra keys ignored)."""
    if isinstance(value, OutputPrint):
        return value
    if isinstance(value, ImageFacts):
        return OutputPrint.from_image(value)
    fmt = value.get("format") or Path(name).suffix.lstrip(".").lower()
    return OutputPrint(fmt, value["exact"], value.get("perceptual"), value.get("width"),
                       value.get("height"))


def verdicts(approved: Approved | None,
             outputs: Mapping[str, PrintLike],
             status: str = "ok", tolerance: int = 10, *, reason: str = "", slug: str = "",
             unstable: Mapping[str, str] | Collection[str] = (),
             stack: Mapping[str, str] | None = None) -> list[OutputVerdict]:
    """One verdict per output, following PRODUCT.md §5, sorted by output name.

    ``status`` is the run's status ("ok" or "broken", with ``reason``); ``unstable`` names the
    outputs whose pixels differed between repeated runs (name -> detail, or just names);
    ``stack`` is the current rendering stack, mentioned in drifted/changed details.
    """
    old = approved.outputs if approved else {}
    if status == "broken":
        why = reason or "the recipe failed"
        names = sorted(old, key=_natural) or ["(recipe)"]
        return [OutputVerdict(n, "broken", why) for n in names]
    current = {name: _as_print(name, value) for name, value in outputs.items()}
    if not current and not old:
        return [OutputVerdict("(recipe)", "broken", reason or "the recipe produced no figure")]
    note = _stack_note(approved.stack, stack) if approved else ""
    rows: dict[str, OutputVerdict] = {}
    for name in [n for n in current if current[n].format == "png"] + \
            [n for n in current if current[n].format != "png"]:
        new = current[name]
        if name not in old:
            fix = f"run figfolio approve {slug}" if slug else "run figfolio approve"
            rows[name] = OutputVerdict(name, "unapproved", f"not approved yet; {fix}")
        elif new.format == "png":
            row = _compare_png(old[name], new, tolerance)
            rows[name] = OutputVerdict(name, row.verdict, row.detail, row.distance)
        else:
            rows[name] = _compare_vector(name, old[name], new, rows)
        if rows[name].verdict in ("drifted", "changed") and note:
            rows[name] = OutputVerdict(name, rows[name].verdict, rows[name].detail + note,
                                       rows[name].distance)
    for name in old:
        if name not in current:
            when = f" on {approved.approved}" if approved and approved.approved else ""
            rows[name] = OutputVerdict(name, "missing",
                                       f"approved{when} but not produced by this run")
    details = unstable if isinstance(unstable, Mapping) else {n: "" for n in unstable}
    for name, detail in details.items():
        rows[name] = OutputVerdict(name, "unstable", detail or "pixels differ between repeated "
                                                             "runs of the same inputs")
    return [rows[n] for n in sorted(rows, key=_natural)]


def recipe_verdict(rows: Sequence[OutputVerdict]) -> str:
    """The worst verdict of the rows (order: broken, unstable, missing, changed, unapproved,
    drifted, reproduced); ``unapproved`` when there are no rows."""
    if not rows:
        return "unapproved"
    return min((r.verdict for r in rows), key=VERDICTS.index)


def failing(verdict: str, strict: bool) -> bool:
    """True when this verdict makes verify exit 1 (PRODUCT.md §4)."""
    return verdict in FAILING or (strict and verdict == "unapproved")


def exit_status(rows: Sequence[OutputVerdict], strict: bool) -> int:
    """0 when every output passes, 1 otherwise."""
    return 1 if any(failing(r.verdict, strict) for r in rows) else 0


# --- JUnit XML ------------------------------------------------------------------------------

_XML_BAD = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _clean(text: str) -> str:
    """XML 1.0 cannot carry most control characters, even escaped."""
    return _XML_BAD.sub("?", text)


def _testcase(suite: ET.Element, slug: str, row: OutputVerdict, seconds: float,
              strict: bool) -> str:
    case = ET.SubElement(suite, "testcase", classname=slug, name=_clean(row.name),
                         time=f"{seconds:.3f}")
    detail = _clean(row.detail)
    outcome = "passed"
    if failing(row.verdict, strict):
        ET.SubElement(case, "failure", message=detail, type=row.verdict).text = detail
        outcome = "failure"
    elif row.verdict == "unapproved":
        ET.SubElement(case, "skipped", message=detail, type=row.verdict)
        outcome = "skipped"
    ET.SubElement(case, "system-out").text = f"{row.verdict}: {detail}"
    return outcome


def junit_tree(suites: Mapping[str, Sequence[OutputVerdict]], *, strict: bool = False,
               durations: Mapping[str, float] | None = None,
               timestamp: _dt.datetime | None = None) -> ET.Element:
    """Build the XML: one testsuite per recipe, one testcase per output."""
    stamp = (timestamp or _dt.datetime.now()).replace(microsecond=0).isoformat()
    host = socket.gethostname() or "localhost"
    root = ET.Element("testsuites", name="figfolio verify")
    totals = {"tests": 0, "failures": 0, "skipped": 0}
    total_time = 0.0
    for slug, rows in suites.items():
        seconds = float((durations or {}).get(slug, 0.0))
        total_time += seconds
        suite = ET.SubElement(root, "testsuite", name=slug, timestamp=stamp, hostname=host)
        outcomes = [_testcase(suite, slug, row, seconds / max(1, len(rows)), strict)
                    for row in rows]
        counts = {"tests": len(rows), "failures": outcomes.count("failure"),
                  "skipped": outcomes.count("skipped")}
        for key, value in counts.items():
            suite.set(key, str(value))
            totals[key] += value
        suite.set("errors", "0")
        suite.set("time", f"{seconds:.3f}")
    for key in ("tests", "failures"):
        root.set(key, str(totals[key]))
    root.set("errors", "0")
    root.set("time", f"{total_time:.3f}")
    ET.indent(root)
    return root


def write_junit(path: Path, suites: Mapping[str, Sequence[OutputVerdict]], *,
                strict: bool = False, durations: Mapping[str, float] | None = None,
                timestamp: _dt.datetime | None = None) -> Path:
    """Write JUnit XML for CI systems (atomic); unapproved outputs are skipped tests unless
    ``strict``, where they fail like the exit status does."""
    root = junit_tree(suites, strict=strict, durations=durations, timestamp=timestamp)
    body = ET.tostring(root, encoding="unicode")
    write_text(Path(path), '<?xml version="1.0" encoding="UTF-8"?>\n' + body + "\n")
    return Path(path)


__all__ = ["VERDICTS", "FAILING", "OutputPrint", "Approved", "OutputVerdict", "stack_versions",
           "read_approved", "render_approved", "write_approved", "verdicts", "recipe_verdict",
           "failing", "exit_status", "junit_tree", "write_junit"]
