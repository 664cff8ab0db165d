"""Classify the cells of a sampled table into typed columns and summarise each column.

Why own parsing instead of pandas' inference: cells arrive as text (CSV) or as native values
(Parquet, Excel) and must be treated alike; declared missing codes and value labels are per
column; and codes with leading zeros ("02139", "007") must stay codes, not become numbers.
The missing-value strings are pandas' own defaults so a summary agrees with what an analyst
gets from ``pandas.read_csv``.
"""
from __future__ import annotations

import datetime as dt
import math
import re
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

import numpy as np

# pandas.read_csv's default ``na_values`` (pandas documentation, "na_values" parameter).
NA_STRINGS = frozenset({"", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan",
                        "1.#IND", "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a",
                        "nan", "null"})
NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
COMMA_NUMBER = re.compile(r"^[+-]?\d+,\d+$")
INFINITIES = {"inf": math.inf, "+inf": math.inf, "-inf": -math.inf, "infinity": math.inf,
              "-infinity": -math.inf, "+infinity": math.inf}
LEADING_ZERO = re.compile(r"^0\d")
ISO_DAY = re.compile(r"^\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d{1,6})?)?"
                     r"(?:Z|[+-]\d{2}:?\d{2})?)?$")
YMD_SLASH = re.compile(r"^(\d{4})/(\d{1,2})/(\d{1,2})$")
DMY = re.compile(r"^(\d{1,2})([./-])(\d{1,2})\2(\d{4})$")
YEAR_MONTH = re.compile(r"^(\d{4})-(\d{2})$")
TOP_LEVELS = 5
HIST_BINS = 10
SIGNIFICANT = 6


@dataclass
class ColumnData:
    """One column of the sample: present values with their row numbers, and how typed.

    ``rows`` are 0-based data-row indices of the present (non-missing) values; the screen
    uses them to point at cells without showing their content.
    """

    name: str
    values: list[Any] = field(default_factory=list)
    rows: list[int] = field(default_factory=list)
    missing: int = 0
    declared: int = 0
    kind: str = "empty"
    numbers: list[float] = field(default_factory=list)
    integers: bool = False
    dates: list[dt.datetime] = field(default_factory=list)
    precision: str = "day"
    labels: dict[str, str] = field(default_factory=dict)

    @property
    def texts(self) -> list[str]:
        return [key_of(v) for v in self.values]


def key_of(value: Any) -> str:
    """The text a value is shown and matched by (value labels use these keys)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, dt.datetime):
        return value.isoformat(sep=" ") if value.time() != dt.time() else value.date().isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value).strip()


def is_missing(value: Any, codes: list[Any]) -> tuple[bool, bool]:
    """(missing?, because of a declared code?) for one cell."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return True, False
    if isinstance(value, str) and value.strip() in NA_STRINGS:
        return True, False
    if codes and _matches_code(value, codes):
        return True, True
    return False, False


def _matches_code(value: Any, codes: list[Any]) -> bool:
    text = key_of(value)
    number = to_number(value, False)
    for code in codes:
        if text == key_of(code):
            return True
        if number is not None and not isinstance(code, bool) and isinstance(code, (int, float)) \
                and number == float(code):
            return True
    return False


def to_number(value: Any, decimal_comma: bool) -> float | None:
    """A float for numeric cells (text or native); None otherwise. Booleans are not numbers."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value)
    if not isinstance(value, str):
        return None
    text = value.strip()
    if NUMBER.match(text):
        return float(text)
    if decimal_comma and COMMA_NUMBER.match(text):
        return float(text.replace(",", "."))
    return INFINITIES.get(text.lower())


def to_date(value: Any, day_first: bool) -> tuple[dt.datetime, str] | None:
    """(datetime, precision) for a date cell; precision is "day" or "month"."""
    if isinstance(value, dt.datetime):
        return value.replace(tzinfo=None), "day"
    if isinstance(value, dt.date):
        return dt.datetime(value.year, value.month, value.day), "day"
    if not isinstance(value, str):
        return None
    text = value.strip()
    try:
        if ISO_DAY.match(text):
            return dt.datetime.fromisoformat(text).replace(tzinfo=None), "day"
        if m := YMD_SLASH.match(text):
            return dt.datetime(int(m[1]), int(m[2]), int(m[3])), "day"
        if m := DMY.match(text):
            day, month = (int(m[1]), int(m[3])) if day_first else (int(m[3]), int(m[1]))
            return dt.datetime(int(m[4]), month, day), "day"
        if m := YEAR_MONTH.match(text):
            return dt.datetime(int(m[1]), int(m[2]), 1), "month"
    except ValueError:
        return None
    return None


def _day_first(values: list[Any]) -> bool:
    """For d/m/y-looking text: day first unless a middle part exceeds 12 (then month first)."""
    for value in values:
        if isinstance(value, str) and (m := DMY.match(value.strip())):
            if int(m[1]) > 12:
                return True
            if int(m[3]) > 12:
                return False
    return True


def build_column(name: str, cells: list[Any], codes: list[Any], labels: dict[str, str],
                 decimal_comma: bool = False) -> ColumnData:
    """Split cells into present and missing, then decide the column's type."""
    col = ColumnData(name=name, labels=labels)
    for row, cell in enumerate(cells):
        missing, declared = is_missing(cell, codes)
        if missing:
            col.missing += 1
            col.declared += declared
        else:
            col.values.append(cell.strip() if isinstance(cell, str) else cell)
            col.rows.append(row)
    _classify(col, decimal_comma)
    return col


def _classify(col: ColumnData, decimal_comma: bool) -> None:
    values = col.values
    if not values:
        col.kind = "empty"
        return
    if col.labels or all(isinstance(v, bool) for v in values):
        col.kind = "categorical"
        return
    codes_like = any(isinstance(v, str) and LEADING_ZERO.match(v) for v in values)
    numbers = [to_number(v, decimal_comma) for v in values]
    if not codes_like and all(n is not None for n in numbers):
        col.kind, col.numbers = "numeric", [float(n) for n in numbers if n is not None]
        col.integers = all(math.isfinite(n) and n.is_integer() for n in col.numbers)
        return
    day_first = _day_first(values)
    parsed = [to_date(v, day_first) for v in values]
    if all(p is not None for p in parsed):
        col.kind = "date"
        col.dates = [p[0] for p in parsed if p is not None]
        col.precision = "month" if all(p[1] == "month" for p in parsed if p) else "day"
        return
    texts = col.texts
    distinct = len(set(texts))
    mean_length = sum(len(t) for t in texts) / len(texts)
    free_text = mean_length > 40 or (distinct > 20 and distinct > len(texts) / 2)
    col.kind = "text" if free_text else "categorical"


def sig(x: float) -> float | None:
    """Round to ``SIGNIFICANT`` significant digits: enough for a summary, stable in JSON."""
    return float(f"{x:.{SIGNIFICANT}g}") if math.isfinite(x) else None


def _num(x: float, integers: bool) -> int | float | None:
    if integers and math.isfinite(x) and float(x).is_integer():
        return int(x)
    return sig(float(x))


def summarise(col: ColumnData) -> dict[str, Any]:
    """The JSON summary of one column (plain str/int/float/None values only)."""
    out: dict[str, Any] = {"name": col.name, "type": col.kind, "count": len(col.values),
                           "missing": col.missing, "distinct": len(set(col.texts))}
    if col.declared:
        out["declared_missing"] = col.declared
    if col.kind == "numeric":
        out.update(numeric_summary(col.numbers, col.integers))
    elif col.kind == "categorical":
        out.update(categorical_summary(col.texts, col.labels))
    elif col.kind == "date":
        out.update(date_summary(col.dates, col.precision))
    return out


def numeric_summary(numbers: list[float], integers: bool) -> dict[str, Any]:
    """min, max, mean, sample sd, median, quartiles (linear interpolation, numpy's default)
    and a 10-bin equal-width histogram over [min, max]; infinite values are left out."""
    data = np.asarray(numbers, dtype=float)
    finite = data[np.isfinite(data)]
    out: dict[str, Any] = {k: None for k in ("min", "max", "mean", "sd", "median", "q1", "q3")}
    out["histogram"] = []
    if len(finite) < len(data):
        out["infinite"] = int(len(data) - len(finite))
    if not len(finite):
        return out
    q1, median, q3 = np.percentile(finite, [25, 50, 75])
    out.update(min=_num(finite.min(), integers), max=_num(finite.max(), integers),
               mean=sig(float(finite.mean())),
               sd=sig(float(finite.std(ddof=1))) if len(finite) > 1 else None,
               median=_num(median, integers), q1=_num(q1, integers), q3=_num(q3, integers))
    counts, _ = np.histogram(finite, bins=HIST_BINS)
    out["histogram"] = [int(c) for c in counts]
    return out


def categorical_summary(texts: list[str], labels: dict[str, str]) -> dict[str, Any]:
    """Top levels as [value, label or None, count], most frequent first, and the rest's count."""
    counts = Counter(texts)
    top = counts.most_common(TOP_LEVELS)
    return {"top": [[value, labels.get(value), n] for value, n in top],
            "other": len(texts) - sum(n for _, n in top)}


def date_summary(dates: list[dt.datetime], precision: str) -> dict[str, Any]:
    """Earliest and latest date as ISO text, at the precision the data has."""
    def show(d: dt.datetime) -> str:
        if precision == "month":
            return d.strftime("%Y-%m")
        return d.isoformat(sep=" ", timespec="minutes") if d.time() != dt.time() \
            else d.date().isoformat()
    return {"min": show(min(dates)), "max": show(max(dates)), "precision": precision}
