"""build_column's fast paths for text cells, checked against references outside figfolio.

References: pandas.read_csv (default ``na_values`` and its float parsing, pandas
documentation), Python's ``float()`` and ``datetime.strptime`` (Python library reference),
and, where figfolio deliberately differs from pandas, the semantics documented in
``figfolio.data_columns`` (named at each test).
"""
from __future__ import annotations

import datetime as dt
import io
import re

import numpy as np
import pandas as pd
from hypothesis import given, settings as hsettings, strategies as st

from figfolio.data_columns import LEADING_ZERO, build_column, summarise, to_number

NON_NA = ["na", "Na", "NAN", "nil", "none", "-", "0", "N/A N/A", "#n/a"]


def test_missing_strings_are_pandas_read_csv_defaults() -> None:
    # Reference: pandas.read_csv ``na_values`` default list (pandas documentation,
    # "na_values" / "keep_default_na"): read the same tokens with pandas and compare.
    tokens = ["", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
              "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"]
    cells = tokens + NON_NA
    text = "k,v\n" + "".join(f"1,{c}\n" for c in cells)
    expected = pd.read_csv(io.StringIO(text), dtype=str)["v"].isna().tolist()
    assert expected == [True] * len(tokens) + [False] * len(NON_NA)
    col = build_column("v", cells, [], {})
    assert col.missing == sum(expected)
    assert col.values == [c for c, na in zip(cells, expected) if not na]
    assert col.rows == [i for i, na in enumerate(expected) if not na]


def test_numbers_agree_with_pandas_round_trip_parser() -> None:
    # Reference: pandas.read_csv(float_precision="round_trip"), which parses with Python's
    # float(); includes infinities, signs, bare leading and trailing points, exponents.
    rng = np.random.default_rng(3)
    cells = ["inf", "-Infinity", "+inf", "-.5", "+3.", "1E-3", "0", "-0", "0.25", "7"]
    cells += [repr(float(x)) for x in rng.normal(0, 1e6, 3000)]
    cells += [str(n) for n in rng.integers(-10**9, 10**9, 2000)]
    frame = pd.read_csv(io.StringIO("v\n" + "\n".join(cells) + "\n"),
                        float_precision="round_trip")
    assert frame["v"].dtype == np.float64
    col = build_column("v", cells, [], {})
    assert col.kind == "numeric" and not col.integers
    assert col.numbers == frame["v"].tolist()
    assert [str(x) for x in col.numbers[:10]] == \
        ["inf", "-inf", "inf", "-0.5", "3.0", "0.001", "0.0", "-0.0", "0.25", "7.0"]
    summary = summarise(col)
    assert summary["infinite"] == 3 and summary["count"] == len(cells)


def test_integer_column_like_pandas() -> None:
    # Reference: pandas.read_csv infers int64 for a column of whole numbers.
    cells = [str(n) for n in range(-500, 4500)]
    frame = pd.read_csv(io.StringIO("v\n" + "\n".join(cells) + "\n"))
    assert frame["v"].dtype == np.int64
    col = build_column("v", cells, [], {})
    assert col.kind == "numeric" and col.integers
    assert col.numbers == [float(n) for n in frame["v"]]
    assert summarise(col)["min"] == -500 and summarise(col)["distinct"] == 5000


def test_underscore_numbers_are_text_as_in_pandas() -> None:
    # Reference: Python's float() accepts "1_000" (PEP 515) but pandas.read_csv does not;
    # figfolio follows pandas, so the column is not numeric.
    assert float("1_000") == 1000.0
    assert pd.read_csv(io.StringIO("v\n1_000\n2\n"))["v"].dtype == object
    assert build_column("v", ["1_000", "2"] * 50, [], {}).kind != "numeric"


def test_leading_zero_codes_stay_codes() -> None:
    # Documented semantics (figfolio.data_columns module docstring): codes with leading zeros
    # ("02139", "007") must stay codes, not become numbers, wherever they are in the column.
    for cells in (["02139"] + ["10001"] * 99, ["10001"] * 99 + ["02139"], ["007", "8"]):
        col = build_column("zip", cells, [], {})
        assert col.kind == "categorical"
        assert "02139" in col.texts or "007" in col.texts
    # a zero not followed by another digit is an ordinary number
    col = build_column("x", ["0", "0.5", "-01", "10"] * 30, [], {})
    assert col.kind == "numeric" and col.numbers[:4] == [0.0, 0.5, -1.0, 10.0]


@hsettings(max_examples=300, deadline=None)
@given(cells=st.lists(st.text(alphabet=st.sampled_from(list("0123456789.+-eE_ ,\nianf")),
                              min_size=1, max_size=6), min_size=1, max_size=30),
       decimal_comma=st.booleans())
def test_numeric_kind_is_the_documented_definition(cells: list[str], decimal_comma: bool) -> None:
    # Documented semantics (figfolio.data_columns._numbers docstring): a column is numeric
    # when every present value is a number for to_number and no text value starts with a
    # zero and another digit; numbers are to_number of each value, in order.
    col = build_column("v", cells, [], {}, decimal_comma)
    # the pandas default missing strings this alphabet can spell ("", "nan", "-nan")
    present = [c.strip() for c in cells if c.strip() not in {"", "nan", "-nan"}]
    assert col.values == present
    numbers = [to_number(v, decimal_comma) for v in present]
    numeric = bool(present) and all(n is not None for n in numbers) and \
        not any(LEADING_ZERO.match(v) for v in present)
    assert (col.kind == "numeric") == numeric
    if numeric:
        assert col.numbers == numbers
        # Python library reference: float() reads every plain decimal literal the same way
        plain = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")
        assert all(float(v) == n for v, n in zip(present, numbers) if plain.fullmatch(v))


def test_day_first_and_month_first_dates_match_strptime() -> None:
    # Reference: datetime.strptime (Python library reference) with the order the data shows:
    # a first part over 12 means day first, a middle part over 12 means month first
    # (documented in figfolio.data_columns._day_first).
    day_first = ["31/12/2024", "01/02/2024", "05/06/2023"]
    col = build_column("d", day_first, [], {})
    assert col.kind == "date"
    assert col.dates == [dt.datetime.strptime(c, "%d/%m/%Y") for c in day_first]
    month_first = ["12/31/2024", "01/02/2024", "05/06/2023"]
    col = build_column("d", month_first, [], {})
    assert col.dates == [dt.datetime.strptime(c, "%m/%d/%Y") for c in month_first]
    months = ["2024-01", "2023-12"]
    col = build_column("m", months, [], {})
    assert col.precision == "month"
    assert col.dates == [dt.datetime.strptime(c, "%Y-%m") for c in months]
    assert summarise(col)["min"] == "2023-12"


def test_texts_are_a_fresh_list_and_follow_new_values() -> None:
    # Documented semantics (figfolio.data_columns.ColumnData docstring): texts is a new list
    # each time, and is worked out again when values is replaced or changes length.
    col = build_column("c", [" a ", "b", "a"], [], {})
    first = col.texts
    first.append("changed")
    assert col.texts == ["a", "b", "a"]
    col.values.append(dt.date(2024, 1, 2))
    assert col.texts == ["a", "b", "a", "2024-01-02"]
    col.values = [True, 2.0, 2.5]
    assert col.texts == ["true", "2", "2.5"]
