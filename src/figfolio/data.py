"""Data files of a recipe: what the recipe page shows about them, and the data screen's entry.

``describe_file`` gives the preview (first rows) and a summary of every column of one data
file; ``screen_recipe`` (re-exported from ``figfolio.screen``) looks for likely identifiers.
Both read the same bounded sample (``settings.screen.sample_rows`` rows, at most ~50 MB), so a
huge file costs a bounded amount of time and memory, and both never raise for a bad file: a
file figfolio cannot read is described with notes, because one odd file must not stop a build.

Per-column metadata keys (``data_labels``, ``missing_codes``, ``screen.acknowledged``) are
``"FILE:COLUMN"`` where FILE is the path relative to ``data/`` (``visits.csv``), the path
relative to the recipe folder (``data/visits.csv``), or, for files elsewhere, the bare file name.
"""
from __future__ import annotations

import datetime as dt
import functools
from pathlib import Path
from typing import Any

from figfolio.data_columns import ColumnData, build_column, key_of, summarise
from figfolio.data_formats import read_table
from figfolio.data_text import Table
from figfolio.recipe import Recipe
from figfolio.settings import Settings

PREVIEW_ROWS = 8
CELL_CHARS = 120

__all__ = ["describe_file", "load_table", "table_columns", "column_keys"]


def column_keys(recipe: Recipe, path: Path, column: str) -> list[str]:
    """The accepted ``"FILE:COLUMN"`` spellings for ``column`` of ``path``, preferred first."""
    try:
        rel = path.resolve().relative_to(recipe.folder).as_posix()
    except ValueError:
        rel = path.name
    names = [rel[len("data/"):]] if rel.startswith("data/") else []
    names += [rel, path.name]
    return list(dict.fromkeys(f"{name}:{column}" for name in names))


def lookup(table: dict[str, Any], keys: list[str]) -> Any:
    """The first entry of ``table`` under any of ``keys``, or None."""
    return next((table[k] for k in keys if k in table), None)


@functools.lru_cache(maxsize=8)
def _cached_table(path: str, size: int, mtime_ns: int, sample_rows: int) -> Table:
    return read_table(Path(path), sample_rows)


def load_table(path: Path, sample_rows: int) -> Table:
    """The bounded sample of ``path``; cached by size and mtime so the site and the screen
    share one read. Callers must not modify the returned table."""
    stat = path.stat()
    return _cached_table(str(path), stat.st_size, stat.st_mtime_ns, sample_rows)


# The last few tables' columns. Why: the data screen and the recipe page's data summary
# classify the same cells (in a cold build of the benchmark catalogue, about 1 s each);
# the builder describes a recipe's data right after screening it and gets them from here.
_COLUMNS: dict[tuple[int, int, str], tuple[Table, Recipe | None, list[ColumnData]]] = {}
_COLUMNS_KEPT = 4


def table_columns(table: Table, recipe: Recipe | None, path: Path) -> list[ColumnData]:
    """Typed columns of a table, with the recipe's missing codes and value labels applied.

    The same (table, recipe, path) gives the same list: callers must not modify it.
    """
    key = (id(table), id(recipe), str(path))
    kept = _COLUMNS.get(key)
    if kept is not None and kept[0] is table and kept[1] is recipe:
        return kept[2]
    columns = _build_columns(table, recipe, path)
    while len(_COLUMNS) >= _COLUMNS_KEPT:
        _COLUMNS.pop(next(iter(_COLUMNS)))
    _COLUMNS[key] = (table, recipe, columns)
    return columns


def _build_columns(table: Table, recipe: Recipe | None, path: Path) -> list[ColumnData]:
    unique = _unique_names(table.header)
    columns = []
    for index, name in enumerate(unique):
        keys = column_keys(recipe, path, name) if recipe else []
        codes = list(lookup(recipe.missing_codes, keys) or []) if recipe else []
        labels = dict(lookup(recipe.data_labels, keys) or {}) if recipe else {}
        cells = [row[index] if index < len(row) else None for row in table.rows]
        columns.append(build_column(name, cells, codes, labels, table.decimal_comma))
    return columns


def _unique_names(header: list[str]) -> list[str]:
    """Blank names become column_N; repeated names get _2, _3 so every column has one key."""
    seen: dict[str, int] = {}
    out = []
    for index, raw in enumerate(header):
        name = str(raw).strip() or f"column_{index + 1}"
        if name in seen:
            seen[name] += 1
            name = f"{name}_{seen[name]}"
        else:
            seen[name] = 1
        out.append(name)
    return out


def describe_file(path: Path, recipe: Recipe, settings: Settings) -> dict[str, Any] | None:
    """Preview and column summaries of one data file for the recipe page.

    Returns None when nothing about the file may be shown or there is nothing to show: the
    recipe's data is ``restricted`` (not even summaries are published), or ``path`` is not a
    file. Otherwise a dict ``{"kind": "table", "rows", "columns", "preview", "notes"}`` or
    ``{"kind": "download-only", "notes"}``; see docs in this module and PRODUCT.md §6.
    """
    if not recipe.publishes_data or not path.is_file():
        return None
    sample_rows = settings.screen.sample_rows
    try:
        table = load_table(path, sample_rows)
    except Exception as exc:  # a bad file must never stop a build; say what happened instead
        return {"kind": "download-only",
                "notes": [f"could not be read ({type(exc).__name__}: {exc}); offered for "
                          "download only"]}
    if table.kind != "table":
        return {"kind": table.kind, "notes": list(table.notes)}
    return _table_description(table, table_columns(table, recipe, path), sample_rows)


def _table_description(table: Table, columns: list[ColumnData], sample_rows: int
                       ) -> dict[str, Any]:
    header = [c.name for c in columns]
    notes = list(table.notes) + _shape_notes(table, sample_rows)
    declared = sum(c.declared for c in columns)
    if declared:
        notes.append(f"{declared} cell(s) holding declared missing-value codes counted as missing")
    return {"kind": "table", "rows": table.total_rows,
            "columns": [summarise(c) for c in columns],
            "preview": {"header": header,
                        "rows": [[show_cell(row[i]) if i < len(row) else ""
                                  for i in range(len(header))]
                                 for row in table.rows[:PREVIEW_ROWS]]},
            "notes": notes}


def _shape_notes(table: Table, sample_rows: int) -> list[str]:
    """Notes about ragged rows, a header-only file and sampling (rows are fixed in place)."""
    notes: list[str] = []
    width = len(table.header)
    short = sum(1 for r in table.rows if len(r) < width)
    long = sum(1 for r in table.rows if len(r) > width)
    if short:
        notes.append(f"{short} row(s) had fewer fields than the header; padded with empty cells")
    if long:
        notes.append(f"{long} row(s) had more fields than the header; extra fields dropped")
    if table.header and not table.rows and not table.sampled:
        notes.append("header only: no data rows")
    if len(set(table.header)) < len(table.header) or any(not str(h).strip() for h in table.header):
        notes.append("blank or repeated column names were renamed")
    if table.sampled:
        more = f" (about {table.total_rows:,} rows)" if table.total_rows else ""
        notes.append(f"summary of the first {len(table.rows):,} rows; file has more{more}")
    return notes


def show_cell(value: Any) -> str:
    """A cell as preview text, cut to ``CELL_CHARS``."""
    if value is None:
        return ""
    if isinstance(value, float):
        text = repr(value)
    elif isinstance(value, (dt.date, bool)):
        text = key_of(value)
    else:
        text = str(value)
    return text if len(text) <= CELL_CHARS else text[:CELL_CHARS - 1] + "\u2026"


def __getattr__(name: str) -> Any:
    """Lazy re-exports from figfolio.screen (it imports this module)."""
    if name in ("screen_recipe", "format_findings", "ScreenFinding", "false_positive_rate"):
        from figfolio import screen
        return getattr(screen, name)
    raise AttributeError(name)
