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
from collections.abc import Callable
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
# One NUMBER that is not LEADING_ZERO, per line, for a whole column joined by newlines (see
# _numbers). Possessive quantifiers only drop backtracking that can never succeed here: what
# follows the digits is always ".", "e", a newline or the end, never another digit.
_PLAIN_NUMBER = r"(?!0\d)[+-]?+(?:\d++(?:\.\d*+)?+|\.\d++)(?:[eE][+-]?+\d++)?+"
NUMBER_LINES = re.compile(rf"{_PLAIN_NUMBER}(?:\n{_PLAIN_NUMBER})*")
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

    ``values`` is not changed after ``build_column`` (the site and the screen only read it), so
    ``texts`` is worked out once and remembered; the memo is dropped if ``values`` is replaced
    or changes length, but an in-place edit of one element would not be seen.
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

    def __post_init__(self) -> None:
        # (values list it was made from, its length then, the texts); not a dataclass field,
        # so it is not part of asdict(), ==, or repr.
        self._texts: tuple[list[Any], int, list[str]] | None = None

    @property
    def texts(self) -> list[str]:
        """``key_of`` of every value, as a new list each time (callers may keep or change it).

        Why remembered: the summary needs it twice (distinct count, top levels) and the
        screen up to four times, and ``key_of`` per cell over a 5000-row sample is the
        costliest step after parsing."""
        values = self.values
        memo = self._texts
        if memo is None or memo[0] is not values or memo[1] != len(values):
            # an exact str's key is its stripped self (see key_of); the rest go the long way
            texts = [v.strip() if type(v) is str else key_of(v) for v in values]
            memo = self._texts = (values, len(values), texts)
        return list(memo[2])


def key_of(value: Any) -> str:
    """The text a value is shown and matched by (value labels use these keys)."""
    if type(value) is str:          # CSV cells: by far the most common, and none of the below
        return value.strip()
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
    if type(value) is str:          # CSV cells: neither None nor a float
        if value.strip() in NA_STRINGS:
            return True, False
    elif value is None or (isinstance(value, float) and math.isnan(value)):
        return True, False
    elif isinstance(value, str) and value.strip() in NA_STRINGS:
        return True, False
    if codes and _matches_code(value, codes):
        return True, True
    return False, False


def _code_matcher(codes: list[Any]) -> Callable[[Any], bool]:
    """``_matches_code`` with the codes' keys and numbers worked out once per column.

    Why: a column has one list of codes but thousands of cells, and the per-cell loop over the
    codes recomputed ``key_of(code)`` and ``float(code)`` every time. If preparing the codes
    fails (``float`` of an int too large for a float), fall back to the per-cell original, so
    an error is raised exactly when and where it was before."""
    try:
        keys = frozenset(key_of(code) for code in codes)
        numbers = [float(code) for code in codes
                   if not isinstance(code, bool) and isinstance(code, (int, float))]
    except Exception:               # noqa: BLE001 - re-raised cell by cell below, if at all
        return lambda value: _matches_code(value, codes)
    # NaN equals nothing, so leaving it out of the set changes no answer; the set then
    # answers ``number == float(code)`` for some code exactly.
    number_set = frozenset(n for n in numbers if not math.isnan(n))

    def matches(value: Any) -> bool:
        text = key_of(value)
        number = to_number(value, False)        # always computed, as _matches_code does
        return text in keys or (number is not None and number in number_set)
    return matches


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
    if type(value) is str:          # CSV cells skip the type tests below
        text = value.strip()
    elif isinstance(value, bool):
        return None
    elif isinstance(value, (int, float)):
        return float(value)
    elif not isinstance(value, str):
        return None
    else:
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
    """Split cells into present and missing, then decide the column's type.

    This is ``is_missing`` per cell, unrolled: it runs once per cell of every sampled column,
    so text cells (all of a CSV) are stripped once and tested against ``NA_STRINGS`` directly,
    and the codes are prepared once per column (``_code_matcher``) rather than per cell.
    """
    col = ColumnData(name=name, labels=labels)
    values, rows = col.values, col.rows
    add_value, add_row = values.append, rows.append
    matches = _code_matcher(codes) if codes else None
    missing = declared = 0
    plain = True                    # every present value an exact str, hence already stripped
    for row, cell in enumerate(cells):
        if type(cell) is str:
            text = cell.strip()
            if text in NA_STRINGS:
                missing += 1
                continue
        elif cell is None or (isinstance(cell, float) and math.isnan(cell)) or \
                (isinstance(cell, str) and cell.strip() in NA_STRINGS):
            missing += 1
            continue
        if matches is not None and matches(cell):
            missing += 1
            declared += 1
            continue
        if type(cell) is str:
            add_value(text)
        else:
            plain = False
            add_value(cell.strip() if isinstance(cell, str) else cell)
        add_row(row)
    col.missing, col.declared = missing, declared
    if plain:
        col._texts = (values, len(values), values)     # key_of(v) is v for a stripped str
    _classify(col, decimal_comma, plain)
    return col


def _classify(col: ColumnData, decimal_comma: bool, all_text: bool = False) -> None:
    """Set ``kind`` (and numbers, dates, precision) from ``col.values``; ``all_text`` says that
    every value is an exact ``str``, which ``build_column`` knows for free."""
    values = col.values
    if not values:
        col.kind = "empty"
        return
    if col.labels or all(isinstance(v, bool) for v in values):
        col.kind = "categorical"
        return
    numbers = _numbers(values, decimal_comma, all_text)
    if numbers is not None:
        # to_number gives exact floats; float.is_integer is False for inf (and NaN)
        col.kind, col.numbers = "numeric", numbers
        col.integers = all(map(float.is_integer, numbers))
        return
    dates = _dates(values)
    if dates is not None:
        col.kind = "date"
        col.dates, col.precision = dates
        return
    texts = col.texts
    distinct = len(set(texts))
    mean_length = sum(len(t) for t in texts) / len(texts)
    free_text = mean_length > 40 or (distinct > 20 and distinct > len(texts) / 2)
    col.kind = "text" if free_text else "categorical"


def _numbers(values: list[Any], decimal_comma: bool, all_text: bool = False
             ) -> list[float] | None:
    """``to_number`` of every value, or None when the column is not numeric: a value is not a
    number, or a text number starts with a zero and another digit (a code such as "02139").

    Why not ``to_number`` per value: the whole column is parsed for every numeric column.
    When every value is an exact ``str`` (all of a CSV), ``float`` converts the column in one
    call and one ``NUMBER_LINES`` match over the values joined by newlines checks that each is
    a ``NUMBER`` without a leading zero; a value containing a newline shows in the count of
    newlines and sends the column to the loop. Then, and for native values, decimal commas and
    infinities, each value is tried in turn: an exact ``str`` against ``NUMBER`` directly, and
    the first value that is not a number ends the parse. The values after it are still given
    to ``to_number`` if they are not ``str`` (only those can raise, e.g. an int too large for a
    float), so an error is raised exactly as when every value was converted.
    """
    if all_text:
        try:
            floats = list(map(float, values))
        except ValueError:
            pass
        else:
            # a match means no whitespace, so float(value) is to_number's float(value.strip())
            joined = "\n".join(values)
            if joined.count("\n") == len(values) - 1 and NUMBER_LINES.fullmatch(joined):
                return floats
    match = NUMBER.match
    out: list[float] = []
    add = out.append
    for value in values:
        if type(value) is str:
            # A match on the unstripped text can differ from to_number's only by one trailing
            # newline (``$``), which float() ignores as to_number's strip() does.
            number = float(value) if match(value) else to_number(value, decimal_comma)
            if number is None or (value.startswith("0") and LEADING_ZERO.match(value)):
                break
        else:
            number = to_number(value, decimal_comma)
            if number is None or (isinstance(value, str) and LEADING_ZERO.match(value)):
                break
        add(number)
    else:
        return out
    for value in values[len(out) + 1:]:
        if type(value) is not str:
            to_number(value, decimal_comma)
    return None


def _dates(values: list[Any]) -> tuple[list[dt.datetime], str] | None:
    """(datetimes, precision) when every value is a date, else None (see ``to_date``).

    Why not parse everything: a text column fails on its first value, so that is tried first
    (with either day order) before ``_day_first`` scans the column; and parsing stops at the
    first non-date. As in ``_numbers``, the values not parsed are still given to ``to_date`` if
    they are not ``str``, so an error is raised exactly as before."""
    first = values[0]
    if to_date(first, True) is None and to_date(first, False) is None:
        done = 1
    else:
        day_first = _day_first(values)
        dates: list[dt.datetime] = []
        add = dates.append
        months = True
        for value in values:
            parsed = to_date(value, day_first)
            if parsed is None:
                break
            add(parsed[0])
            months = months and parsed[1] == "month"
        else:
            return dates, "month" if months else "day"
        done = len(dates) + 1
    for value in values[done:]:
        if type(value) is not str:
            to_date(value, True)
    return None


def sig(x: float) -> float | None:
    """Round to ``SIGNIFICANT`` significant digits: enough for a summary, stable in JSON."""
    return float(f"{x:.{SIGNIFICANT}g}") if math.isfinite(x) else None


def _num(x: float, integers: bool) -> int | float | None:
    if integers and math.isfinite(x) and float(x).is_integer():
        return int(x)
    return sig(float(x))


def summarise(col: ColumnData) -> dict[str, Any]:
    """The JSON summary of one column (plain str/int/float/None values only)."""
    texts = col.texts
    out: dict[str, Any] = {"name": col.name, "type": col.kind, "count": len(col.values),
                           "missing": col.missing, "distinct": len(set(texts))}
    if col.declared:
        out["declared_missing"] = col.declared
    if col.kind == "numeric":
        out.update(numeric_summary(col.numbers, col.integers))
    elif col.kind == "categorical":
        out.update(categorical_summary(texts, col.labels))
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
