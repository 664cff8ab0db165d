"""Tests of figfolio.approval: fingerprints.json, the verdict table, exit status, JUnit XML.

References used:
- PRODUCT.md §4/§5 for verdict words and exit statuses (the product contract, not code).
- JSON (RFC 8259) via the standard library's json module for the file format.
- The Jenkins JUnit XML schema, tests/reference/junit-10.xsd ("from memory", see the file),
  validated with xmlschema (PyPI); the same schema is checked against pytest's own
  ``--junitxml`` output (pytest, PyPI: a reference JUnit writer) so a mistake in the recalled
  schema would show up here.
"""
from __future__ import annotations

import datetime as dt
import json
import subprocess
import sys
from pathlib import Path

import pytest
import xmlschema

from figfolio import approval as ap
from figfolio.approval import OutputPrint, OutputVerdict
from figfolio.errors import RecipeError
from figfolio.fingerprint import ImageFacts

SCHEMA = Path(__file__).parent / "reference" / "junit-10.xsd"
A = "sha256:" + "a" * 64
B = "sha256:" + "b" * 64
P0 = "0" * 64
P3 = "7" + "0" * 63            # 3 bits set (0x7 = 0111)
P40 = "f" * 10 + "0" * 54      # 40 bits set


def png(exact: str = A, perceptual: str = P0, w: int = 900, h: int = 600) -> OutputPrint:
    return OutputPrint("png", exact, perceptual, w, h)


def approved(**outputs: OutputPrint) -> ap.Approved:
    names = {k.replace("_", "-").replace("-png", ".png").replace("-svg", ".svg")
             .replace("-pdf", ".pdf"): v for k, v in outputs.items()}
    return ap.Approved(Path("fingerprints.json"), "0.1.0", "2024-05-01",
                       {"matplotlib": "3.9.2"}, names)


def one(rows: list[OutputVerdict], name: str) -> OutputVerdict:
    return next(r for r in rows if r.name == name)


# --- the verdict table (PRODUCT.md §5) ------------------------------------------------------

CASES = [
    # (case, approved outputs, current outputs, expected verdict of figure-1.png or the row)
    ("exact equal", {"figure_1_png": png()}, {"figure-1.png": png()}, "reproduced"),
    ("within tolerance", {"figure_1_png": png()}, {"figure-1.png": png(B, P3)}, "drifted"),
    ("pixels differ, hash equal", {"figure_1_png": png()}, {"figure-1.png": png(B, P0)},
     "drifted"),
    ("beyond tolerance", {"figure_1_png": png()}, {"figure-1.png": png(B, P40)}, "changed"),
    ("size changed", {"figure_1_png": png()}, {"figure-1.png": png(B, P0, w=1000)}, "changed"),
    ("not produced", {"figure_1_png": png()}, {}, "missing"),
    ("not approved", {}, {"figure-1.png": png()}, "unapproved"),
]


@pytest.mark.parametrize("case, old, new, expected", CASES, ids=[c[0] for c in CASES])
def test_png_verdicts(case: str, old: dict, new: dict, expected: str) -> None:
    # Reference: PRODUCT.md §5 verdict table; tolerance in bits (settings.drift_tolerance).
    rows = ap.verdicts(approved(**old) if old else None, new, "ok", tolerance=10, slug="demo")
    row = one(rows, "figure-1.png")
    assert row.verdict == expected, row
    assert row.detail


def test_drift_detail_counts_bits() -> None:
    rows = ap.verdicts(approved(figure_1_png=png()), {"figure-1.png": png(B, P40)}, "ok", 10,
                       stack={"matplotlib": "3.10.0"})
    row = rows[0]
    assert row.distance == 40
    assert "40 of 256 perceptual bits differ (tolerance 10)" in row.detail
    assert "matplotlib 3.9.2 -> 3.10.0" in row.detail
    assert ap.verdicts(approved(figure_1_png=png()), {"figure-1.png": png(B, P40)}, "ok",
                       40)[0].verdict == "drifted"          # the boundary is inclusive


@pytest.mark.parametrize("png_now, expected", [(png(), "drifted"), (png(B, P3), "drifted"),
                                               (png(B, P40), "changed")])
def test_vector_takes_the_png_verdict(png_now: OutputPrint, expected: str) -> None:
    # Reference: PRODUCT.md §5 (vector outputs judged with the PNG of the same figure).
    old = approved(figure_1_png=png(), figure_1_svg=OutputPrint("svg", A))
    rows = ap.verdicts(old, {"figure-1.png": png_now, "figure-1.svg": OutputPrint("svg", B)},
                       "ok", 10)
    svg = one(rows, "figure-1.svg")
    assert svg.verdict == expected
    assert "figure-1.png" in svg.detail


def test_vector_alone() -> None:
    old = approved(figure_1_pdf=OutputPrint("pdf", A))
    same = ap.verdicts(old, {"figure-1.pdf": OutputPrint("pdf", A)}, "ok", 10)
    other = ap.verdicts(old, {"figure-1.pdf": OutputPrint("pdf", B)}, "ok", 10)
    assert same[0].verdict == "reproduced" and other[0].verdict == "changed"


def test_broken_marks_every_approved_output() -> None:
    old = approved(figure_1_png=png(), figure_1_svg=OutputPrint("svg", A))
    rows = ap.verdicts(old, {}, "broken", 10, reason="timed out after 120 s")
    assert [(r.name, r.verdict, r.detail) for r in rows] == [
        ("figure-1.png", "broken", "timed out after 120 s"),
        ("figure-1.svg", "broken", "timed out after 120 s")]
    alone = ap.verdicts(None, {}, "broken", 10, reason="NameError")
    assert [(r.verdict, r.detail) for r in alone] == [("broken", "NameError")]


def test_unstable_overrides_and_facts_accepted() -> None:
    facts = ImageFacts(A, P0, 900, 600)
    rows = ap.verdicts(approved(figure_1_png=png()), {"figure-1.png": facts}, "ok", 10,
                       unstable={"figure-1.png": "2 of 3 runs differ"})
    assert rows[0].verdict == "unstable" and rows[0].detail == "2 of 3 runs differ"


def test_rows_in_natural_order() -> None:
    current = {f"figure-{n}.png": png() for n in (10, 2, 1)}
    assert [r.name for r in ap.verdicts(None, current, "ok", 10)] == [
        "figure-1.png", "figure-2.png", "figure-10.png"]


@pytest.mark.parametrize("verdicts, worst", [
    (["reproduced", "drifted"], "drifted"), (["drifted", "unapproved"], "unapproved"),
    (["unapproved", "changed"], "changed"), (["changed", "missing"], "missing"),
    (["missing", "unstable"], "unstable"), (["unstable", "broken"], "broken"),
    (["reproduced"], "reproduced")])
def test_recipe_verdict_worst_first(verdicts: list[str], worst: str) -> None:
    rows = [OutputVerdict(f"f{i}", v, "") for i, v in enumerate(verdicts)]
    assert ap.recipe_verdict(rows) == worst


@pytest.mark.parametrize("verdict, normal, strict", [
    ("reproduced", 0, 0), ("drifted", 0, 0), ("unapproved", 0, 1), ("changed", 1, 1),
    ("missing", 1, 1), ("broken", 1, 1), ("unstable", 1, 1)])
def test_exit_status(verdict: str, normal: int, strict: int) -> None:
    # Reference: PRODUCT.md §4 exit statuses.
    rows = [OutputVerdict("a", "reproduced", ""), OutputVerdict("b", verdict, "")]
    assert ap.exit_status(rows, strict=False) == normal
    assert ap.exit_status(rows, strict=True) == strict


# --- fingerprints.json ----------------------------------------------------------------------

def _outputs() -> dict[str, OutputPrint]:
    return {"figure-2.png": png(B, P3, 640, 480), "figure-1.svg": OutputPrint("svg", A),
            "figure-1.png": png()}


def test_write_twice_is_byte_identical_and_sorted(tmp_path: Path) -> None:
    # Reference: RFC 8259 JSON, parsed by the standard library; sort order checked directly.
    target = tmp_path / "demo" / "fingerprints.json"
    target.parent.mkdir()
    stack = {"python": "3.11.7", "numpy": "1.26.4", "matplotlib": "3.9.2"}
    ap.write_approved(target, _outputs(), stack, today=dt.date(2024, 5, 1))
    first = target.read_bytes()
    ap.write_approved(target, dict(reversed(list(_outputs().items()))), dict(stack),
                      today=dt.date(2024, 5, 1))
    assert target.read_bytes() == first
    doc = json.loads(first)

    def check_sorted(node: object) -> None:
        if isinstance(node, dict):
            assert list(node) == sorted(node)
            for value in node.values():
                check_sorted(value)
    check_sorted(doc)
    assert doc["approved"] == "2024-05-01" and doc["stack"]["matplotlib"] == "3.9.2"
    text = first.decode()
    assert text.count('\n    "figure-') == 3          # one block per output
    assert not list(target.parent.glob(".tmp-*"))


def test_round_trip(tmp_path: Path) -> None:
    target = tmp_path / "fingerprints.json"
    ap.write_approved(target, _outputs(), {"python": "3.11.7"})
    back = ap.read_approved(target)
    assert back is not None and back.outputs == _outputs()
    assert ap.read_approved(tmp_path / "nothing.json") is None


def test_builder_dicts_accepted_and_extra_keys_dropped(tmp_path: Path) -> None:
    target = tmp_path / "fingerprints.json"
    images = {"figure-1.png": {"format": "png", "exact": A, "perceptual": P0, "width": 9,
                               "height": 6, "thumbs": {"320": "thumbs/figure-1-320.webp"}},
              "figure-1.pdf": {"format": "pdf", "exact": B}}
    ap.write_approved(target, images, {"python": "3.11.7"})
    doc = json.loads(target.read_text())
    assert "thumbs" not in doc["outputs"]["figure-1.png"]
    back = ap.read_approved(target)
    assert back is not None
    assert back.outputs["figure-1.png"].get("exact") == A
    assert back.outputs["figure-1.pdf"].get("perceptual", "none") == "none"
    rows = ap.verdicts(back, images, "ok", 10)
    assert [r.verdict for r in rows] == ["reproduced", "reproduced"]
    rows[0].diff_image = tmp_path / "d.png"                    # the builder attaches it
    assert json.dumps(rows[0].to_dict())


def test_stack_versions_from_metadata() -> None:
    # Reference: importlib.metadata (standard library) and platform.python_version().
    import platform
    from importlib import metadata
    stack = ap.stack_versions()
    assert stack["python"] == platform.python_version()
    assert stack["numpy"] == metadata.version("numpy")
    assert stack["matplotlib"] == metadata.version("matplotlib")


@pytest.mark.parametrize("content, key", [
    ("{not json", None), ("[]", None), ('{"outputs": 3}', "outputs"),
    ('{"outputs": {"figure-1.png": {"format": "gif", "exact": "x"}}}',
     "outputs.figure-1.png.format"),
    ('{"outputs": {"figure-1.png": {"format": "png", "exact": "sha256:12"}}}',
     "outputs.figure-1.png.exact"),
    ('{"outputs": {"figure-1.png": {"format": "png", "exact": "%s", "perceptual": "zz",'
     ' "width": 1, "height": 1}}}' % A, "outputs.figure-1.png.perceptual"),
    ('{"outputs": {"figure-1.png": {"format": "png", "exact": "%s", "perceptual": "%s",'
     ' "width": 0, "height": 1}}}' % (A, P0), "outputs.figure-1.png.width"),
])
def test_malformed_file_names_file_key_and_fix(tmp_path: Path, content: str,
                                               key: str | None) -> None:
    folder = tmp_path / "forest-plot"
    folder.mkdir()
    (folder / "fingerprints.json").write_text(content)
    with pytest.raises(RecipeError) as info:
        ap.read_approved(folder / "fingerprints.json")
    assert info.value.key == key
    assert info.value.path == str(folder / "fingerprints.json")
    assert "figfolio approve forest-plot" in (info.value.hint or "")


def test_crash_during_write_keeps_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch
                                           ) -> None:
    # Reference: POSIX rename() replaces the target atomically (POSIX.1-2017, rename), from
    # memory; simulated here by failing before the rename.
    target = tmp_path / "fingerprints.json"
    ap.write_approved(target, _outputs(), {"python": "3.11.7"})
    before = target.read_bytes()

    def boom(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt
    monkeypatch.setattr("figfolio.atomic.os.replace", boom)
    with pytest.raises(KeyboardInterrupt):
        ap.write_approved(target, {"figure-9.png": png()}, {"python": "3.11.7"})
    assert target.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["fingerprints.json"]


# --- JUnit XML ------------------------------------------------------------------------------

def _suites() -> dict[str, list[OutputVerdict]]:
    return {
        "forest-plot": [OutputVerdict("figure-1.png", "reproduced", "pixel-identical"),
                        OutputVerdict("figure-1.svg", "drifted", "3 of 256 bits <differ> & so")],
        "growth-curves": [OutputVerdict("figure-1.png", "changed", "40 of 256 bits differ"),
                          OutputVerdict("figure-2.png", "unapproved", "not approved yet"),
                          OutputVerdict("figure-3.png", "missing", "approved but not produced")],
        "broken-one": [OutputVerdict("(recipe)", "broken", "ZeroDivisionError\x1b[0m")],
    }


def test_junit_validates_against_schema(tmp_path: Path) -> None:
    # Reference: Jenkins JUnit schema (tests/reference/junit-10.xsd, from memory), xmlschema.
    schema = xmlschema.XMLSchema10(SCHEMA)
    path = ap.write_junit(tmp_path / "verify.xml", _suites(), durations={"forest-plot": 1.5})
    schema.validate(str(path))
    tree = schema.to_dict(str(path))
    suites = {s["@name"]: s for s in tree["testsuite"]}
    assert suites["growth-curves"]["@failures"] == "2"
    assert suites["growth-curves"]["@skipped"] == "1"
    assert suites["forest-plot"]["@failures"] == "0"
    assert suites["forest-plot"]["@time"] == "1.500"
    cases = suites["growth-curves"]["testcase"]
    assert [c["@name"] for c in cases] == ["figure-1.png", "figure-2.png", "figure-3.png"]
    assert {c["@classname"] for c in cases} == {"growth-curves"}
    assert cases[0]["failure"][0]["@type"] == "changed"
    assert "skipped" in cases[1]
    assert tree["@tests"] == "6" and tree["@failures"] == "3"


def test_junit_strict_fails_unapproved(tmp_path: Path) -> None:
    schema = xmlschema.XMLSchema10(SCHEMA)
    path = ap.write_junit(tmp_path / "verify.xml", _suites(), strict=True)
    schema.validate(str(path))
    suites = {s["@name"]: s for s in schema.to_dict(str(path))["testsuite"]}
    assert suites["growth-curves"]["@failures"] == "3"
    assert suites["growth-curves"]["@skipped"] == "0"


def test_reference_schema_accepts_pytest_junit(tmp_path: Path) -> None:
    # Cross-check of the from-memory schema: pytest's own JUnit writer (PyPI) must validate.
    test = tmp_path / "test_sample.py"
    test.write_text("import pytest\n"
                    "def test_ok():\n    print('out')\n"
                    "def test_bad():\n    assert 1 == 2\n"
                    "@pytest.mark.skip(reason='later')\n"
                    "def test_skip():\n    pass\n")
    report = tmp_path / "report.xml"
    subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider",
                    f"--junitxml={report}", "-o", "junit_family=xunit2", str(test)],
                   cwd=tmp_path, capture_output=True, timeout=60)
    xmlschema.XMLSchema10(SCHEMA).validate(str(report))
    bad = tmp_path / "bad.xml"
    bad.write_text('<testsuites><testsuite name="x"><testcase/></testsuite></testsuites>')
    assert not xmlschema.XMLSchema10(SCHEMA).is_valid(str(bad))   # the schema can say no
