"""The data screen (PRODUCT.md §8): likely direct identifiers and small cells in data files.

Why: data files are published for download next to the figure. Before that happens the screen
looks at every data file of a recipe for the identifier categories of the HIPAA Safe Harbor
standard (45 CFR 164.514(b)(2)(i)(A)-(R)) and, in aggregate tables, for small cell counts.
A finding stops the build until the recipe acknowledges the column in ``[screen.acknowledged]``
with a reason; for ``data_origin = "restricted"`` the data is never published, so findings are
reported but do not stop the build (``blocking`` is False). The screen is an aid, not a
guarantee: the group's data governance, ethics approvals and local rules decide what is shared.

Acknowledgement keys: ``"FILE:COLUMN"`` with FILE relative to ``data/`` (``visits.csv``) or to
the recipe folder (``data/visits.csv``). Findings about a whole file (an image, a file the
screen cannot read) use the column ``*``: ``"photo.jpg:*"``.

Rules that depend on the table (documented because they decide what is a finding):
- a table is *aggregate* when ``data_origin = "aggregate"``, or when it has a count-named
  column of non-negative integers (count, n, cases, deaths, visits, ...) beside a categorical
  or date column and no person-like id; it is *person-level* when not aggregate and it has a
  person-like id (patient_id, subject, ...) or per-person columns (sex, age, dob, ...);
- full dates (day precision) are findings only in person-level tables, or in any table when
  the column name says birth, death, admission or discharge (then month precision too);
- city/town/district/latitude columns are findings only in person-level tables; address,
  street, postcode and ZIP columns and postcode/street-address values everywhere;
- small cells (0 < count < ``settings.screen.small_cell``, default 11 following the US CMS
  cell-size suppression policy that suppresses counts 1 to 10 — from memory) only in the count
  columns of aggregate tables;
- only the bounded sample (``settings.screen.sample_rows`` rows) is screened.
"""
from __future__ import annotations

import sys
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from figfolio.data import column_keys, load_table, lookup, table_columns
from figfolio.errors import FigfolioError
from figfolio.recipe import Recipe
from figfolio.screen_rules import CATEGORIES, SOURCE, Hit, check_column, table_shape
from figfolio.settings import ScreenSettings, Settings

IMAGE_SUFFIXES = frozenset({".png", ".jpg", ".jpeg", ".gif", ".bmp", ".tif", ".tiff", ".webp",
                            ".heic", ".heif", ".dcm"})
# Code and documentation next to the data (a generator script, a codebook in Markdown) are
# published as they are; the screen does not ask for them to be acknowledged.
CODE_SUFFIXES = frozenset({".py", ".r", ".rmd", ".qmd", ".ipynb", ".md", ".rst", ".sql", ".do",
                           ".sas", ".sps", ".jl", ".m", ".sh", ".yml", ".yaml", ".toml", ".cfg"})
WHOLE_FILE = "*"
RESTRICTED = ('data_origin = "restricted": the data is not published, so this does not stop '
              "the build")
DISCLAIMER = ("The screen is an aid, not a guarantee: your group's data governance, ethics "
              "approvals and local rules decide what may be shared.")


@dataclass(frozen=True)
class ScreenFinding:
    """One column (or whole file, column ``*``) that looks like it holds identifiers.

    ``examples`` are redacted ("J*** S****", "***-**-1234", "19**-**-**"). ``blocking`` is
    True when the finding must stop the build: not acknowledged and the data is published.
    """

    file: str
    column: str
    category: str
    reason: str
    examples: tuple[str, ...] = ()
    count: int = 0
    acknowledged: bool = False
    ack_reason: str | None = None
    blocking: bool = True

    @property
    def ack_key(self) -> str:
        """The key to write under ``[screen.acknowledged]``."""
        name = self.file[len("data/"):] if self.file.startswith("data/") else self.file
        return f"{name}:{self.column}"

    @property
    def standard(self) -> str:
        """The paragraph of the de-identification standard, e.g. '45 CFR 164.514(b)(2)(i)(A)'."""
        letter = CATEGORIES.get(self.category, ("", ""))[0]
        return f"{SOURCE}({letter})" if letter else ""

    @property
    def label(self) -> str:
        return CATEGORIES.get(self.category, ("", self.category))[1]

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["examples"] = list(self.examples)
        out.update(ack_key=self.ack_key, standard=self.standard, label=self.label)
        return out


def screen_file(path: Path, origin: str, screen: ScreenSettings,
                recipe: Recipe | None = None) -> list[Hit]:
    """Findings for one data file, before acknowledgements; never raises for a bad file."""
    if path.suffix.lower() in CODE_SUFFIXES:
        return []
    if path.suffix.lower() in IMAGE_SUFFIXES:
        return [Hit(WHOLE_FILE, "photograph", "image file: may show a person", (), 1)]
    try:
        table = load_table(path, screen.sample_rows)
    except Exception as exc:  # an unreadable file is a finding, not a crash
        return [Hit(WHOLE_FILE, "unscreened", f"could not be read ({type(exc).__name__}); "
                                              "review it by hand", (), 1)]
    if table.kind != "table":
        why = table.notes[0] if table.notes else "not a table"
        return [Hit(WHOLE_FILE, "unscreened", f"{why}; the screen cannot look inside, review "
                                              "it by hand", (), 1)]
    columns = table_columns(table, recipe, path)
    shape = table_shape(columns, origin)
    hits = [hit for col in columns for hit in check_column(col, shape, screen.small_cell)]
    if table.sampled:
        hits = [Hit(h.column, h.category, f"{h.reason} (screened the first {len(table.rows):,}"
                                          " rows)", h.examples, h.count) for h in hits]
    return hits


def screen_recipe(recipe: Recipe, settings: Settings) -> list[ScreenFinding]:
    """Screen every data file of ``recipe``; acknowledgements and restriction applied."""
    findings: list[ScreenFinding] = []
    restricted = not recipe.publishes_data
    for path in recipe.data:
        for hit in screen_file(path, recipe.data_origin, settings.screen, recipe):
            reason = lookup(recipe.acknowledged, column_keys(recipe, path, hit.column))
            text = f"{hit.reason}; {RESTRICTED}" if restricted else hit.reason
            findings.append(ScreenFinding(
                file=recipe.rel(path), column=hit.column, category=hit.category, reason=text,
                examples=hit.examples, count=hit.count, acknowledged=reason is not None,
                ack_reason=reason, blocking=reason is None and not restricted))
    return findings


def format_findings(findings: list[ScreenFinding], toml: str | Path | None = None) -> str:
    """A block for the terminal: each finding, redacted examples, and the exact lines to add
    to recipe.toml to acknowledge the open ones. Empty string when there is nothing to say."""
    if not findings:
        return ""
    open_ = [f for f in findings if not f.acknowledged]
    lines = [f"data screen: {len(open_)} open finding(s), "
             f"{len(findings) - len(open_)} acknowledged"]
    for f in open_:
        where = f"{f.file}" if f.column == WHOLE_FILE else f"{f.file}, column '{f.column}'"
        cite = f" [{f.standard}]" if f.standard else ""
        lines.append(f"  {where}: {f.label}{cite}")
        lines.append(f"      {f.reason}")
        if f.examples:
            lines.append(f"      e.g. {', '.join(f.examples)}")
    for f in findings:
        if f.acknowledged:
            lines.append(f"  acknowledged: {f.ack_key} ({f.label}): {f.ack_reason}")
    keys = list(dict.fromkeys(f.ack_key for f in open_ if f.blocking))
    if keys:
        target = f" {toml}" if toml else " recipe.toml"
        lines.append(f"To publish, review each column, then add to{target}:")
        lines.append("  [screen.acknowledged]")
        lines += [f'  "{key}" = "REASON: why this may be published"' for key in keys]
    lines.append(DISCLAIMER)
    return "\n".join(lines)


@dataclass(frozen=True)
class RateReport:
    """Result of ``false_positive_rate``: flagged columns over all columns screened."""

    flagged: int
    columns: int
    per_file: dict[str, list[str]]

    @property
    def rate(self) -> float:
        return self.flagged / self.columns if self.columns else 0.0


def false_positive_rate(paths: list[Path], settings: Settings | None = None) -> RateReport:
    """Screen files known to hold no identifiers (e.g. the invented demo data) and count the
    columns flagged. Each file's recipe (the folder holding ``recipe.toml`` above it) gives
    the data origin and missing codes; acknowledgements are ignored on purpose."""
    screen = settings.screen if settings else ScreenSettings()
    per_file: dict[str, list[str]] = {}
    flagged = total = 0
    for path in sorted(Path(p).resolve() for p in paths):
        if not path.is_file() or path.suffix.lower() in CODE_SUFFIXES:
            continue
        recipe = _owning_recipe(path, settings)
        origin = recipe.data_origin if recipe else "synthetic"
        hits = screen_file(path, origin, screen, recipe)
        try:
            table = load_table(path, screen.sample_rows)
            width = len(table.header) if table.kind == "table" else 1
        except Exception:  # counted as one unreadable column
            width = 1
        names = sorted({f"{h.column} ({h.category})" for h in hits})
        per_file[str(path)] = names
        flagged += len({h.column for h in hits})
        total += max(width, 1)
    return RateReport(flagged, total, per_file)


def _owning_recipe(path: Path, settings: Settings | None) -> Recipe | None:
    from figfolio.recipe import load_recipe

    for folder in path.parents:
        if (folder / "recipe.toml").is_file():
            try:
                return load_recipe(folder, settings or Settings(root=folder.parent))
            except FigfolioError:
                return None
    return None


def main(argv: list[str] | None = None) -> int:
    """``python -m figfolio.screen FILE...``: print flagged columns and the false-positive rate."""
    paths = [Path(a) for a in (sys.argv[1:] if argv is None else argv)]
    if not paths:
        print("usage: python -m figfolio.screen DATA_FILE...  (e.g. recipes/*/data/*)")
        return 2
    report = false_positive_rate(paths)
    for name, cols in report.per_file.items():
        print(f"{name}: {', '.join(cols) if cols else 'no findings'}")
    print(f"flagged columns: {report.flagged} of {report.columns} "
          f"(false-positive rate {report.rate:.1%} if the data holds no identifiers)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
