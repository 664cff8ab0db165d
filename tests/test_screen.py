"""The data screen: every claimed identifier category is flagged on invented values, clean
columns are not, acknowledgements and restriction work, and the CLI text is redacted.

Categories follow the HIPAA Safe Harbor standard, 45 CFR 164.514(b)(2)(i)(A)-(R) (eCFR).
All values below are invented.
"""
from __future__ import annotations

import csv
import ipaddress
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings as hsettings, strategies as st

from figfolio.recipe import load_recipe
from figfolio.screen import ScreenFinding, false_positive_rate, format_findings, screen_file, \
    screen_recipe
from figfolio.screen_patterns import iban_ok, is_ip, luhn_ok, redact
from figfolio.screen_rules import CATEGORIES, name_tokens
from figfolio.settings import ScreenSettings, Settings


def write_csv(folder: Path, name: str, header: list[str], rows: list[list[object]]) -> Path:
    path = folder / name
    with path.open("w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)
    return path


def categories(path: Path, origin: str = "synthetic") -> dict[str, set[str]]:
    """column -> categories flagged."""
    out: dict[str, set[str]] = {}
    for hit in screen_file(path, origin, ScreenSettings()):
        out.setdefault(hit.column, set()).add(hit.category)
    return out


def person_table(tmp_path: Path, column: str, values: list[str]) -> Path:
    """A 12-row table of individuals (sex, sbp) with one column under test."""
    rows = [[values[i % len(values)], "F" if i % 2 else "M", 110 + i] for i in range(12)]
    return write_csv(tmp_path, "people.csv", [column, "sex", "sbp"], rows)


# One invented column per category: (column name, values, expected category, paragraph).
FLAGGED = [
    ("full_name", ["Amara Okafor", "Lars Berg", "Sofia Rossi"], "name", "A"),
    ("respondent", ["Okafor, Amara", "Berg, Lars", "Rossi, Sofia", "Tanaka, Yuki"], "name", "A"),
    ("interviewer", ["Maria", "Kwame", "Priya", "Ivan"], "name", "A"),
    ("home", ["12 Harbour Street", "7 Mill Road", "3b Quarry Lane"], "geography", "B"),
    ("pc", ["SW1A 1AA", "M1 1AE", "EH8 9YL", "B33 8TH"], "geography", "B"),
    ("zip_code", ["02139", "10001", "94105"], "geography", "B"),
    ("post", ["02139-4307", "10001-2233"], "geography", "B"),
    ("city", ["Port Ellery", "Marlow"], "geography", "B"),
    ("dob", ["1950-03-12", "1961-07-01", "1988-11-30"], "date", "C"),
    ("visit_date", ["2023-03-12", "2023-07-01", "2023-11-30"], "date", "C"),
    ("contact", ["(555) 123-4567", "+44 20 7946 0958", "555-987-6543"], "telephone", "D"),
    ("fax", ["555-123-4567", "555-123-4568"], "fax", "E"),
    ("reach", ["amara@example.org", "lars.b@example.net"], "email", "F"),
    ("ref", ["123-45-6789", "234-56-7890", "345-67-8901"], "national-id", "G"),
    ("ni", ["AB 12 34 56 C", "CE123456D"], "national-id", "G"),
    ("MRN", ["H00123", "H00456"], "medical-record", "H"),
    ("insurance_id", ["XK-7781", "XK-7782"], "health-plan", "I"),
    ("payment", ["GB82 WEST 1234 5698 7654 32", "4111 1111 1111 1111"], "account", "J"),
    ("licence_number", ["D1234-5678", "D2234-5678"], "licence", "K"),
    ("car", ["1HGCM82633A004352", "2FTRX18W1XCA01234"], "vehicle", "L"),
    ("license_plate", ["AB12 CDE", "XY34 ZZZ"], "vehicle", "L"),
    ("nic", ["00:1a:2b:3c:4d:5e", "00-1A-2B-3C-4D-5F"], "device", "M"),
    ("pump_serial", ["SN-0001", "SN-0002"], "device", "M"),
    ("page", ["https://example.org/u/1", "http://example.net/p?q=2"], "url", "N"),
    ("host", ["192.0.2.10", "198.51.100.7", "2001:db8::1"], "ip-address", "O"),
    ("fingerprint_template", ["a1b2", "c3d4"], "biometric", "P"),
    ("photo", ["img_001.jpg", "img_002.jpg"], "photograph", "Q"),
]


@pytest.mark.parametrize("column,values,category,letter", FLAGGED,
                         ids=[f[0] for f in FLAGGED])
def test_each_category_is_flagged(tmp_path: Path, column: str, values: list[str],
                                  category: str, letter: str) -> None:
    found = categories(person_table(tmp_path, column, values))
    assert category in found.get(column, set())


def test_finding_cites_the_paragraph(tmp_path: Path) -> None:
    finding = ScreenFinding("data/x.csv", "dob", "date", "r")
    assert finding.standard == "45 CFR 164.514(b)(2)(i)(C)"     # eCFR, Safe Harbor (C)
    assert finding.ack_key == "x.csv:dob"


def test_age_over_89(tmp_path: Path) -> None:
    path = write_csv(tmp_path, "p.csv", ["age", "sex"], [[34, "F"], [91, "M"], [90, "F"]])
    hits = [h for h in screen_file(path, "synthetic", ScreenSettings()) if h.column == "age"]
    assert [h.category for h in hits] == ["age-over-89"] and hits[0].count == 2
    young = write_csv(tmp_path, "q.csv", ["age", "age_months"], [[34, 120], [89, 200]])
    assert categories(young) == {}


def test_unique_patient_id(tmp_path: Path) -> None:
    rows = [[f"P{i:04d}", 100 + i] for i in range(30)]
    path = write_csv(tmp_path, "p.csv", ["patient_id", "sbp"], rows)
    assert categories(path) == {"patient_id": {"unique-id"}}
    repeated = write_csv(tmp_path, "long.csv", ["patient_id", "sbp"],
                         [[f"P{i % 5:04d}", 100 + i] for i in range(30)])
    assert categories(repeated) == {}


def test_image_file_is_a_finding(tmp_path: Path) -> None:
    image = tmp_path / "face.jpg"
    image.write_bytes(b"\xff\xd8\xff\xe0 not really a jpeg")
    hits = screen_file(image, "synthetic", ScreenSettings())
    assert [(h.column, h.category, h.reason) for h in hits] == \
        [("*", "photograph", "image file: may show a person")]


def test_small_cells_in_aggregate_tables(tmp_path: Path) -> None:
    rows = [["2024-01-01", "Port Ellery", 3], ["2024-01-01", "Marlow", 25],
            ["2024-01-08", "Port Ellery", 0], ["2024-01-08", "Marlow", 10],
            ["2024-01-15", "Port Ellery", 11]]
    path = write_csv(tmp_path, "agg.csv", ["week_start", "district", "cases"], rows)
    hits = screen_file(path, "synthetic", ScreenSettings())
    assert [(h.column, h.category, h.count) for h in hits] == [("cases", "small-cell", 2)]
    assert hits[0].examples == ("data row 1", "data row 4")
    # the CMS cell-size suppression policy suppresses 1-10 (from memory): 11 is the default
    assert [h.count for h in screen_file(path, "synthetic", ScreenSettings(small_cell=4))] == [1]
    assert screen_file(path, "synthetic", ScreenSettings(small_cell=0)) == []


def test_clean_aggregate_table_is_not_flagged(tmp_path: Path) -> None:
    districts = ["Port Ellery", "Marlow Heights", "Kestrel Bay", "Ashford Vale", "Lindqvist",
                 "Old Harbour", "Victoria Park", "Santa Lucia"]
    rows = []
    for week in range(1, 9):
        for i, district in enumerate(districts):
            start = f"2024-{(week - 1) // 4 + 1:02d}-{(week * 3) % 28 + 1:02d}"
            rows.append([f"2024-W{week:02d}", start,
                         district, f"VC-{i + 1:02d}", "Lab North" if i % 2 else "Lab South",
                         11 + i * week, round(0.1 * i + week, 2), "2019-2020"])
    header = ["iso_week", "week_start", "district", "clinic_code", "lab", "visits",
              "rate_per_1000", "season"]
    path = write_csv(tmp_path, "weekly.csv", header, rows)
    assert categories(path) == {}
    assert categories(path, origin="aggregate") == {}


def test_clean_measurements_are_not_flagged(tmp_path: Path) -> None:
    rows = [[i, 1000 + i * 37, round(20 + i * 0.37, 2), f"{1 + i % 3} 234 567",
             ["aspirin", "placebo"][i % 2], "2023-01-01"] for i in range(40)]
    path = write_csv(tmp_path, "m.csv", ["dose_mg", "count", "temperature", "population",
                                         "drug_name", "batch_date"], rows)
    assert categories(path) == {}


def test_clinic_ids_unique_per_row_in_aggregate_table(tmp_path: Path) -> None:
    rows = [[f"VC-{i:02d}", f"District {i}", 20 + i] for i in range(24)]
    path = write_csv(tmp_path, "clinics.csv", ["clinic_id", "district", "visits"], rows)
    assert categories(path) == {}


def test_full_dates_in_time_series_are_not_flagged(tmp_path: Path) -> None:
    rows = [[f"2024-01-{d:02d}", 20.5 + d] for d in range(1, 29)]
    path = write_csv(tmp_path, "ts.csv", ["date", "temperature"], rows)
    assert categories(path) == {}


def test_ip_detector_agrees_with_ipaddress_module() -> None:
    # reference: Python's ipaddress module (stdlib)
    for text in ["192.0.2.1", "10.0.0.255", "2001:db8::8a2e:370:7334", "256.1.1.1", "1.2.3",
                 "12:30", "aa:bb:cc:dd:ee:ff"]:
        try:
            ipaddress.ip_address(text)
            valid = True
        except ValueError:
            valid = False
        assert is_ip(text) == valid


def test_check_digits() -> None:
    # Luhn (ISO/IEC 7812-1): 4111 1111 1111 1111 is a well-known valid test number (from memory)
    assert luhn_ok("4111111111111111") and not luhn_ok("4111111111111112")
    # IBAN mod 97 (ISO 13616): GB82 WEST 1234 5698 7654 32 is the standard's example (from memory)
    assert iban_ok("GB82 WEST 1234 5698 7654 32") and not iban_ok("GB82 WEST 1234 5698 7654 33")


def test_redaction_shapes() -> None:
    assert redact("John Smith", "name") == "J*** S****"
    assert redact("123-45-1234", "national-id") == "***-**-1234"
    assert redact("1984-03-12", "date") == "19**-**-**"
    assert redact("amara@example.org", "email") == "a***@***.org"
    assert name_tokens("patientID") == ["patient", "id"]
    assert name_tokens("ZIPCode") == ["zip", "code"]


def make_recipe_folder(tmp_path: Path, toml_extra: str = "", origin: str = "synthetic") -> Path:
    folder = tmp_path / "recipes" / "clinic"
    (folder / "data").mkdir(parents=True)
    (folder / "figure.py").write_text("print('figure')\n")
    (folder / "recipe.toml").write_text(
        f'title = "t"\nsummary = "s"\nalt = "a"\ndata_origin = "{origin}"\n{toml_extra}')
    write_csv(folder / "data", "visits.csv", ["full_name", "sex", "sbp"],
              [["Amara Okafor", "F", 120], ["Lars Berg", "M", 130], ["Sofia Rossi", "F", 125]])
    return folder


@pytest.mark.parametrize("key", ["visits.csv:full_name", "data/visits.csv:full_name"])
def test_acknowledged_by_either_key(tmp_path: Path, key: str) -> None:
    folder = make_recipe_folder(tmp_path, f'[screen.acknowledged]\n"{key}" = "invented names"\n')
    settings = Settings(root=tmp_path)
    findings = screen_recipe(load_recipe(folder, settings), settings)
    assert [(f.column, f.acknowledged, f.ack_reason, f.blocking) for f in findings] == \
        [("full_name", True, "invented names", False)]


def test_restricted_findings_do_not_block(tmp_path: Path) -> None:
    folder = make_recipe_folder(tmp_path, origin="restricted")
    settings = Settings(root=tmp_path)
    findings = screen_recipe(load_recipe(folder, settings), settings)
    assert findings and not any(f.blocking for f in findings)
    assert "restricted" in findings[0].reason


def test_format_findings_is_redacted_and_actionable(tmp_path: Path) -> None:
    folder = make_recipe_folder(tmp_path)
    settings = Settings(root=tmp_path)
    findings = screen_recipe(load_recipe(folder, settings), settings)
    text = format_findings(findings, "recipes/clinic/recipe.toml")
    assert "data/visits.csv, column 'full_name'" in text
    assert "A**** O*****" in text and "Amara" not in text
    assert '[screen.acknowledged]\n  "visits.csv:full_name" = ' in text
    assert "45 CFR 164.514(b)(2)(i)(A)" in text
    assert format_findings([]) == ""


def test_false_positive_rate(tmp_path: Path) -> None:
    clean = write_csv(tmp_path, "clean.csv", ["week", "district", "cases"],
                      [["2024-W01", "Kestrel Bay", 40], ["2024-W02", "Kestrel Bay", 42]])
    risky = write_csv(tmp_path, "risky.csv", ["email", "score"], [["a@example.org", 1]])
    report = false_positive_rate([clean, risky])
    assert (report.flagged, report.columns) == (1, 5)
    assert report.rate == pytest.approx(0.2)


def test_unreadable_files_must_be_reviewed_but_code_is_not(tmp_path: Path) -> None:
    doc = tmp_path / "forms.docx"
    doc.write_bytes(b"PK\x03\x04 not really a document")
    assert [h.category for h in screen_file(doc, "synthetic", ScreenSettings())] == ["unscreened"]
    script = tmp_path / "generate.py"
    script.write_text("print('makes the data')\n")
    assert screen_file(script, "synthetic", ScreenSettings()) == []
    assert false_positive_rate([script]).columns == 0


@hsettings(max_examples=100, deadline=None,
           suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.lists(st.text(max_size=30), min_size=3, max_size=3), max_size=25))
def test_screen_never_raises_on_arbitrary_cells(tmp_path: Path, rows: list[list[str]]) -> None:
    path = write_csv(tmp_path, "any.csv", ["name", "date", "count"], rows)
    for hit in screen_file(path, "aggregate", ScreenSettings()):
        assert hit.category in CATEGORIES and len(hit.examples) <= 3
