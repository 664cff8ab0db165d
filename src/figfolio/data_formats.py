"""Read JSON, JSON Lines, Parquet and Excel files into the same bounded ``Table`` sample.

Why: the recipe page and the data screen look at every format through one shape, so each
reader here only has to turn its format into a header, native cell values and notes. Binary
formats keep native types (datetimes stay datetimes) so dates and numbers need no guessing.
Excel is read with cached values only (``data_only=True``): figfolio never evaluates or shows
formulas, and says when a formula has no saved value.
"""
from __future__ import annotations

import datetime as dt
import json
from decimal import Decimal
from pathlib import Path
from typing import Any

from figfolio.data_text import MAX_CHARS, Table, decode_bytes, read_delimited

TEXT_SUFFIXES = (".csv", ".tsv", ".txt", ".tab", ".dat")
JSON_SUFFIXES = (".json",)
JSONL_SUFFIXES = (".jsonl", ".ndjson")
PARQUET_SUFFIXES = (".parquet", ".pq")
EXCEL_SUFFIXES = (".xlsx", ".xlsm")
TABLE_SUFFIXES = TEXT_SUFFIXES + JSON_SUFFIXES + JSONL_SUFFIXES + PARQUET_SUFFIXES + EXCEL_SUFFIXES
EXCEL_ERRORS = frozenset({"#DIV/0!", "#N/A", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!",
                          "#GETTING_DATA", "#SPILL!", "#CALC!"})
DOWNLOAD_ONLY = "not a table format figfolio reads; offered for download only"


def download_only(*notes: str) -> Table:
    """A non-table description; the first note says why."""
    return Table(kind="download-only", total_rows=None, notes=list(notes) or [DOWNLOAD_ONLY])


def read_table(path: Path, sample_rows: int) -> Table:
    """Dispatch on the file extension; unknown extensions are download-only."""
    suffix = path.suffix.lower()
    if suffix in TEXT_SUFFIXES:
        return read_delimited(path, sample_rows)
    if suffix in JSON_SUFFIXES:
        return read_json(path, sample_rows)
    if suffix in JSONL_SUFFIXES:
        return read_json_lines(path, sample_rows)
    if suffix in PARQUET_SUFFIXES:
        return read_parquet(path, sample_rows)
    if suffix in EXCEL_SUFFIXES:
        return read_excel(path, sample_rows)
    if suffix == ".xls":
        return download_only(DOWNLOAD_ONLY, "legacy .xls workbook: save it as .xlsx to get a "
                                            "preview and summary")
    return download_only()


def plain(value: Any) -> Any:
    """A JSON/Arrow/Excel value as a cell: scalars kept, nested values as compact JSON text."""
    if value is None or isinstance(value, (str, bool, int, float, dt.date, dt.datetime)):
        return value
    if isinstance(value, Decimal):
        return float(value)
    if isinstance(value, (bytes, bytearray)):
        return f"<{len(value)} bytes>"
    if isinstance(value, (dt.time, dt.timedelta)):
        return str(value)
    try:
        return json.dumps(value, ensure_ascii=False, default=str, sort_keys=True)
    except (TypeError, ValueError):
        return str(value)


def _records_table(records: list[Any], sample_rows: int, note: str | None) -> Table:
    """Records (dicts) to a table: the union of keys in first-seen order."""
    table = Table(notes=[note] if note else [])
    dicts = [r for r in records if isinstance(r, dict)]
    if not dicts:
        return download_only("JSON is not a table: expected a list of records (objects) or "
                             "an object of equal-length column lists; offered for download only")
    if len(dicts) < len(records):
        table.notes.append(f"{len(records) - len(dicts)} item(s) that are not records were skipped")
    sample = dicts[:sample_rows]
    header: dict[str, None] = {}
    for record in sample:
        header.update(dict.fromkeys(str(k) for k in record))
    table.header = list(header)
    table.rows = [[plain(r.get(k)) for k in table.header] for r in
                  ({str(k): v for k, v in rec.items()} for rec in sample)]
    table.total_rows = len(dicts)
    table.sampled = len(dicts) > len(sample)
    return table


def _columns_table(columns: dict[str, list[Any]], sample_rows: int, note: str | None) -> Table:
    """An object of column lists; shorter columns are padded with missing cells (noted)."""
    table = Table(notes=[note] if note else [])
    lengths = {len(v) for v in columns.values()}
    longest = max(lengths, default=0)
    if len(lengths) > 1:
        table.notes.append("columns have different lengths; shorter ones padded with missing")
    table.header = [str(k) for k in columns]
    count = min(longest, sample_rows)
    cols = list(columns.values())
    table.rows = [[plain(c[i]) if i < len(c) else None for c in cols] for i in range(count)]
    table.total_rows = longest
    table.sampled = longest > count
    return table


def read_json(path: Path, sample_rows: int) -> Table:
    """A JSON list of records, an object of column lists, or {"key": [records]}."""
    if path.stat().st_size > MAX_CHARS:
        return download_only(f"JSON file larger than {MAX_CHARS // 1_000_000} MB: not "
                             "summarised; offered for download only")
    text, note = decode_bytes(path.read_bytes())
    if not text.strip():
        return Table(notes=["empty file: no header and no rows"])
    try:
        data = json.loads(text)
    except (json.JSONDecodeError, RecursionError) as exc:
        where = f" (line {exc.lineno}: {exc.msg})" if isinstance(exc, json.JSONDecodeError) else ""
        return download_only(f"not valid JSON{where}; offered for download only")
    if isinstance(data, list):
        return _records_table(data, sample_rows, note)
    if isinstance(data, dict) and data and all(isinstance(v, list) for v in data.values()):
        if len(data) == 1 and all(isinstance(r, dict) for r in next(iter(data.values()))):
            key = next(iter(data))
            return _records_table(next(iter(data.values())), sample_rows,
                                  note or f"records read from key '{key}'")
        return _columns_table(data, sample_rows, note)
    return download_only("JSON is not a table: expected a list of records (objects) or an "
                         "object of equal-length column lists; offered for download only")


def read_json_lines(path: Path, sample_rows: int) -> Table:
    """One JSON record per line; reads at most ``sample_rows`` records, counts the rest."""
    records: list[Any] = []
    bad, total, used = 0, 0, 0
    with path.open("rb") as handle:
        for raw in handle:
            used += len(raw)
            if not raw.strip():
                continue
            total += 1
            if len(records) < sample_rows and used <= MAX_CHARS:
                try:
                    records.append(json.loads(raw))
                except (json.JSONDecodeError, UnicodeDecodeError, RecursionError):
                    bad += 1
    if total == 0:
        return Table(notes=["empty file: no header and no rows"])
    table = _records_table(records, sample_rows, f"{bad} line(s) are not valid JSON" if bad
                           else None)
    if table.kind == "table":
        table.total_rows = total - bad
        table.sampled = total - bad > len(table.rows)
    return table


def read_parquet(path: Path, sample_rows: int) -> Table:
    """First ``sample_rows`` rows of a Parquet file; the row count comes from its metadata."""
    import pyarrow.parquet as pq

    try:
        parquet = pq.ParquetFile(path)
    except Exception as exc:  # pyarrow raises several unrelated types for a bad file
        return download_only(f"could not be read as Parquet ({type(exc).__name__}); offered "
                             "for download only")
    table = Table(header=list(parquet.schema_arrow.names))
    table.total_rows = parquet.metadata.num_rows
    if table.total_rows:
        batch = next(parquet.iter_batches(batch_size=sample_rows), None)
        if batch is not None:
            columns = [batch.column(i).to_pylist() for i in range(batch.num_columns)]
            table.rows = [[plain(c[i]) for c in columns] for i in range(batch.num_rows)]
    table.sampled = table.total_rows > len(table.rows)
    return table


def read_excel(path: Path, sample_rows: int) -> Table:
    """The first worksheet's cached values; formulas are never shown (see module docstring)."""
    import openpyxl

    try:
        book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises zip, XML and key errors for a bad file
        return download_only(f"could not be read as an Excel workbook ({type(exc).__name__}); "
                             "offered for download only")
    try:
        sheet = book.worksheets[0]
        table = Table()
        if len(book.worksheets) > 1:
            others = ", ".join(f"'{ws.title}'" for ws in book.worksheets[1:])
            table.notes.append(f"workbook has {len(book.worksheets)} sheets; showing the first, "
                               f"'{sheet.title}' (others: {others})")
        grid = _sheet_rows(sheet, sample_rows + 2)
        max_row = sheet.max_row
    finally:
        book.close()
    formulas = _formula_cells(path, grid[-1][0] if grid else -1)
    _fill_excel(table, grid, formulas, sample_rows)
    if table.sampled:
        table.total_rows = max_row - 1 if isinstance(max_row, int) and max_row > 1 else None
    return table


def _sheet_rows(sheet: Any, limit: int) -> list[list[Any]]:
    """At most ``limit`` non-empty rows of a read-only sheet, with their sheet row index."""
    grid: list[list[Any]] = []
    for index, row in enumerate(sheet.iter_rows(values_only=True)):
        if any(v is not None and v != "" for v in row):
            grid.append([index, *row])
            if len(grid) >= limit:
                break
    return grid


def _formula_cells(path: Path, last: int) -> set[tuple[int, int]]:
    """(sheet row, column) of cells that hold a formula, from a second, formula-preserving read."""
    import openpyxl

    found: set[tuple[int, int]] = set()
    try:
        book = openpyxl.load_workbook(path, read_only=True, data_only=False)
    except Exception:  # the first read succeeded; a failure here only loses the note
        return found
    try:
        for index, row in enumerate(book.worksheets[0].iter_rows(values_only=True)):
            if index > last:
                break
            for col, value in enumerate(row):
                if (isinstance(value, str) and value.startswith("=")) or \
                        type(value).__name__ in ("ArrayFormula", "DataTableFormula"):
                    found.add((index, col))
    finally:
        book.close()
    return found


def _fill_excel(table: Table, grid: list[list[Any]], formulas: set[tuple[int, int]],
                sample_rows: int) -> None:
    """Header from the first non-empty row; formula cells without a saved value become missing."""
    if not grid:
        table.notes.append("empty worksheet: no header and no rows")
        return
    width = max(len(r) for r in grid) - 1
    while width > 0 and all(len(r) <= width or r[width] in (None, "") for r in grid):
        width -= 1
    header_row, *body = grid
    table.header = ["" if v is None else str(plain(v)) for v in header_row[1:width + 1]]
    unsaved, errors = 0, 0
    for row in body[:sample_rows]:
        cells: list[Any] = []
        for col in range(width):
            value = row[col + 1] if col + 1 < len(row) else None
            if (row[0], col) in formulas and (value is None or
                                              (isinstance(value, str) and value.startswith("="))):
                unsaved += 1
                value = None
            elif isinstance(value, str) and value.strip() in EXCEL_ERRORS:
                errors += 1
                value = None
            cells.append(plain(value))
        table.rows.append(cells)
    table.total_rows = len(table.rows)
    table.sampled = len(body) > sample_rows
    shown = sum(1 for r in body[:sample_rows] for c in range(width) if (r[0], c) in formulas)
    if unsaved:
        table.notes.append(f"{unsaved} formula cell(s) have no saved value (the workbook was "
                           "not recalculated by a spreadsheet program); shown as missing")
    if shown - unsaved > 0:
        table.notes.append(f"{shown - unsaved} formula cell(s): their saved values are shown, "
                           "never the formulas")
    if errors:
        table.notes.append(f"{errors} spreadsheet error value(s) such as #DIV/0! counted as "
                           "missing")
