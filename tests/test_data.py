"""describe_file: statistics against reference libraries, and hostile files.

References: pandas (read_csv, quantile, value_counts, to_datetime), numpy (histogram),
Python's ``statistics`` module (stdev = sample standard deviation, median), pyarrow and
openpyxl for writing the Parquet and Excel inputs.
"""
from __future__ import annotations

import json
import statistics
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings as hsettings, strategies as st

from figfolio.data import describe_file
from figfolio.recipe import Recipe
from figfolio.settings import ScreenSettings, Settings

FIXTURES = Path(__file__).parent / "data_fixtures"


def make_recipe(folder: Path, **extra) -> Recipe:
    return Recipe(slug="r", folder=folder.resolve(), title="t", summary="s", alt="a",
                  script=folder / "figure.py", data=(), **extra)


def describe(path: Path, **extra) -> dict:
    settings = Settings(root=path.parent, screen=ScreenSettings(**extra.pop("screen", {})))
    out = describe_file(path, make_recipe(path.parent, **extra), settings)
    json.dumps(out, allow_nan=False)   # plain JSON types only (RFC 8259 has no NaN)
    return out


def column(desc: dict, name: str) -> dict:
    return next(c for c in desc["columns"] if c["name"] == name)


@pytest.fixture
def measured(tmp_path: Path) -> Path:
    rng = np.random.default_rng(7)
    n = 400
    weight = rng.normal(70, 12, n).round(2)
    weight[rng.choice(n, 30, replace=False)] = np.nan
    age = rng.integers(18, 80, n).astype(float)
    age[:5] = -9                                  # declared missing code
    frame = pd.DataFrame({
        "weight": weight, "age": age.astype(int),
        "sex": rng.choice([1, 2], n), "arm": rng.choice(["A", "B", "C", "D", "E", "F", "G"], n,
                                                       p=[.3, .2, .15, .1, .1, .1, .05]),
        "visit": pd.date_range("2021-03-01", periods=n, freq="D").strftime("%Y-%m-%d")})
    path = tmp_path / "trial.csv"
    frame.to_csv(path, index=False)
    return path


def test_numeric_summary_matches_pandas_and_statistics(measured: Path) -> None:
    desc = describe(measured, missing_codes={"trial.csv:age": [-9]})
    ref = pd.read_csv(measured, na_values={"age": [-9]})
    for name in ("weight", "age"):
        col, series = column(desc, name), ref[name].dropna()
        assert col["type"] == "numeric"
        assert col["count"] == len(series)                          # pandas count
        assert col["missing"] == int(ref[name].isna().sum())
        values = series.tolist()
        # Python statistics module: mean, stdev (sample, n-1), median
        assert col["mean"] == pytest.approx(statistics.mean(values), rel=1e-5)
        assert col["sd"] == pytest.approx(statistics.stdev(values), rel=1e-5)
        assert col["median"] == pytest.approx(statistics.median(values), rel=1e-5)
        # pandas quantile, default linear interpolation
        assert col["q1"] == pytest.approx(series.quantile(0.25), rel=1e-5)
        assert col["q3"] == pytest.approx(series.quantile(0.75), rel=1e-5)
        assert col["min"] == pytest.approx(series.min())
        assert col["max"] == pytest.approx(series.max())
        assert col["histogram"] == np.histogram(series, bins=10)[0].tolist()   # numpy
        assert col["distinct"] == series.nunique()
    assert column(desc, "age")["declared_missing"] == 5
    assert isinstance(column(desc, "age")["min"], int)


def test_histogram_of_0_to_99_has_ten_per_bin(tmp_path: Path) -> None:
    path = tmp_path / "h.csv"
    path.write_text("x\n" + "\n".join(str(i) for i in range(100)) + "\n")
    # arithmetic: ten equal-width bins over [0, 99] each hold ten of the integers 0..99
    assert column(describe(path), "x")["histogram"] == [10] * 10


def test_categorical_levels_and_labels(measured: Path) -> None:
    desc = describe(measured, data_labels={"trial.csv:sex": {"1": "female", "2": "male"}})
    ref = pd.read_csv(measured)
    arm = column(desc, "arm")
    counts = ref["arm"].value_counts()                            # pandas value_counts
    assert arm["type"] == "categorical"
    assert [lvl[2] for lvl in arm["top"]] == counts.iloc[:5].tolist()
    assert {lvl[0] for lvl in arm["top"]} == set(counts.index[:5])
    assert arm["other"] == int(counts.iloc[5:].sum())
    sex = column(desc, "sex")
    assert sex["type"] == "categorical"
    assert {(v, lab) for v, lab, _ in sex["top"]} == {("1", "female"), ("2", "male")}


def test_dates_min_max_match_pandas(measured: Path) -> None:
    col = column(describe(measured), "visit")
    ref = pd.to_datetime(pd.read_csv(measured)["visit"])
    assert col["type"] == "date"
    assert col["min"] == ref.min().date().isoformat()
    assert col["max"] == ref.max().date().isoformat()


def test_preview_has_first_eight_rows(measured: Path) -> None:
    desc = describe(measured)
    ref = pd.read_csv(measured, dtype=str, keep_default_na=False)
    assert desc["preview"]["header"] == list(ref.columns)
    assert desc["preview"]["rows"] == ref.head(8).values.tolist()
    assert desc["rows"] == len(ref)


def test_cp1252_is_decoded_and_noted() -> None:
    desc = describe(FIXTURES / "cp1252.csv")
    assert "not UTF-8: decoded as cp1252" in desc["notes"]
    expected = pd.read_csv(FIXTURES / "cp1252.csv", encoding="cp1252", dtype=str)
    assert desc["preview"]["rows"] == expected.values.tolist()


def test_utf16_with_bom_is_decoded() -> None:
    desc = describe(FIXTURES / "utf16.tsv")
    assert any("utf-16" in n for n in desc["notes"])
    assert desc["preview"]["header"] == ["group", "score"]
    assert [r[0] for r in desc["preview"]["rows"]] == ["ä", "ß", "€"]
    assert column(desc, "score")["mean"] == 20


def test_utf8_bom_is_silent() -> None:
    desc = describe(FIXTURES / "utf8_bom.csv")
    assert desc["preview"]["header"] == ["colour", "n"]
    assert not any("UTF-8" in n for n in desc["notes"])


def test_empty_and_header_only() -> None:
    empty = describe(FIXTURES / "empty.csv")
    assert empty["kind"] == "table" and empty["rows"] == 0 and empty["columns"] == []
    assert any("empty file" in n for n in empty["notes"])
    header = describe(FIXTURES / "header_only.csv")
    assert header["rows"] == 0 and [c["type"] for c in header["columns"]] == ["empty"] * 3
    assert "header only: no data rows" in header["notes"]


def test_ragged_rows_are_padded_and_cut() -> None:
    desc = describe(FIXTURES / "ragged.csv")
    assert desc["preview"]["rows"] == [["1", "2", "3"], ["4", "5", ""], ["6", "", ""],
                                       ["7", "8", "9"], ["12", "13", "14"]]
    assert any(n.startswith("2 row(s) had fewer fields") for n in desc["notes"])
    assert any(n.startswith("1 row(s) had more fields") for n in desc["notes"])
    assert column(desc, "c")["missing"] == 2


def test_unknown_extension_is_download_only() -> None:
    assert describe(FIXTURES / "notes.docx") == {
        "kind": "download-only",
        "notes": ["not a table format figfolio reads; offered for download only"]}


def test_json_shapes() -> None:
    assert describe(FIXTURES / "not_table.json")["kind"] == "download-only"
    records = describe(FIXTURES / "records.json")
    assert records["preview"]["header"] == ["x", "y", "z"]
    assert column(records, "x")["mean"] == pytest.approx(statistics.mean([1, 2.5]))
    cols = describe(FIXTURES / "columns.json")
    assert cols["rows"] == 4 and column(cols, "y")["top"][0] == ["a", None, 2]


def test_parquet(tmp_path: Path) -> None:
    frame = pd.DataFrame({"when": pd.date_range("2020-01-01", periods=50, freq="W"),
                          "value": np.linspace(0, 1, 50), "group": ["x", "y"] * 25})
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)                                          # written by pyarrow
    desc = describe(path, screen={"sample_rows": 20})
    assert desc["rows"] == 50
    assert [c["type"] for c in desc["columns"]] == ["date", "numeric", "categorical"]
    assert column(desc, "value")["count"] == 20
    assert any(n.startswith("summary of the first 20 rows; file has more") for n in desc["notes"])


def test_excel_formulas_are_never_shown(tmp_path: Path) -> None:
    import openpyxl

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["a", "b", "total"])
    for i in range(1, 6):
        sheet.append([i, i * 10, f"=SUM(A{i + 1}:B{i + 1})"])
    book.create_sheet("codebook").append(["x"])
    path = tmp_path / "book.xlsx"
    book.save(path)       # openpyxl writes formulas without cached values
    desc = describe(path)
    cells = [c for row in desc["preview"]["rows"] for c in row]
    assert not any(c.startswith("=") for c in cells)
    total = column(desc, "total")
    assert total["count"] + total["missing"] == 5 and total["missing"] == 5
    assert any("formula" in n and "no saved value" in n for n in desc["notes"])
    assert any("codebook" in n for n in desc["notes"])
    assert column(desc, "b")["mean"] == statistics.mean([10, 20, 30, 40, 50])


def test_corrupt_excel_and_parquet_are_described(tmp_path: Path) -> None:
    for name in ("bad.xlsx", "bad.parquet"):
        path = tmp_path / name
        path.write_bytes(b"PK\x03\x04 garbage" * 10)
        assert describe(path)["kind"] == "download-only"


def test_semicolon_with_decimal_comma(tmp_path: Path) -> None:
    path = tmp_path / "eu.csv"
    path.write_text("x;y\n1,5;a\n2,5;b\n")
    assert column(describe(path), "x")["mean"] == pytest.approx(2.0)


def test_restricted_data_shows_nothing(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    path.write_text("a\n1\n")
    settings = Settings(root=tmp_path)
    assert describe_file(path, make_recipe(tmp_path, data_origin="restricted"), settings) is None


@pytest.mark.slow
def test_sixty_megabytes_in_bounded_time_and_memory(tmp_path: Path) -> None:
    path = tmp_path / "big.csv"
    line = "2024-01-01,Port Ellery,12345.678,some text that pads the line a little more\n"
    rows = 60_000_000 // len(line) + 1
    with path.open("w") as handle:
        handle.write("day,district,value,comment\n")
        block = line * 10_000
        for _ in range(rows // 10_000):
            handle.write(block)
    written = (rows // 10_000) * 10_000
    assert path.stat().st_size > 59_000_000
    tracemalloc.start()
    start = time.perf_counter()
    desc = describe(path)
    elapsed = time.perf_counter() - start
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert elapsed < 5.0
    assert peak < 100_000_000
    assert desc["rows"] == written
    assert column(desc, "value")["count"] == 5000
    assert any(n.startswith("summary of the first 5,000 rows; file has more")
               for n in desc["notes"])


def test_single_huge_line_is_bounded(tmp_path: Path) -> None:
    path = tmp_path / "line.csv"
    path.write_bytes(b"a,b\n" + b"x" * 3_000_000 + b",1\n2,3\n")
    start = time.perf_counter()
    desc = describe(path)
    assert time.perf_counter() - start < 5.0
    assert any("longer than" in n for n in desc["notes"])


@hsettings(max_examples=150, deadline=None,
           suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.binary(max_size=2000))
def test_arbitrary_bytes_never_raise(tmp_path: Path, data: bytes) -> None:
    path = tmp_path / "any.csv"
    path.write_bytes(data)
    desc = describe(path)
    assert desc["kind"] in ("table", "download-only")
    if desc["kind"] == "table":
        assert len(desc["preview"]["rows"]) <= 8


@hsettings(max_examples=80, deadline=None,
           suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=st.text(alphabet=st.sampled_from(list('ab1,;"\t\n\r -.eE9x')), max_size=300))
def test_arbitrary_csv_like_text_never_raises(tmp_path: Path, text: str) -> None:
    path = tmp_path / "any.csv"
    path.write_text(text, encoding="utf-8")
    describe(path)
