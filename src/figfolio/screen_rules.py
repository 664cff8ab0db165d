"""Detectors of the data screen: column-name rules and value patterns per identifier category.

The categories are those of the HIPAA Safe Harbor de-identification standard, 45 CFR
164.514(b)(2)(i)(A)-(R), plus small cell counts in aggregate tables. Each detector is a small
pure function of a column's name and its (sampled, distinct) values so that it can be tested
on invented values one by one. Deciding *whether a table describes people* is separate
(``table_shape``) because several rules depend on it: a full date is an identifier in a table
of patients, but not in a weekly time series of case counts.
"""
from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass

from figfolio.data_columns import ColumnData
from figfolio.screen_names import PERSON_WORDS
from figfolio.screen_patterns import (EMBEDDED, MAX_EXAMPLES, VALUE_RULES, examples,
                                      given_only)

# slug -> (paragraph of 45 CFR 164.514(b)(2)(i), words shown to the user)
CATEGORIES: dict[str, tuple[str, str]] = {
    "name": ("A", "names"),
    "geography": ("B", "geographic subdivisions smaller than a state"),
    "date": ("C", "dates (except year) related to an individual"),
    "age-over-89": ("C", "ages over 89"),
    "telephone": ("D", "telephone numbers"),
    "fax": ("E", "fax numbers"),
    "email": ("F", "email addresses"),
    "national-id": ("G", "social security or national identity numbers"),
    "medical-record": ("H", "medical record numbers"),
    "health-plan": ("I", "health plan beneficiary numbers"),
    "account": ("J", "account numbers"),
    "licence": ("K", "certificate or licence numbers"),
    "vehicle": ("L", "vehicle identifiers and licence plates"),
    "device": ("M", "device identifiers and serial numbers"),
    "url": ("N", "web addresses (URLs)"),
    "ip-address": ("O", "IP addresses"),
    "biometric": ("P", "biometric identifiers"),
    "photograph": ("Q", "full-face photographs and comparable images"),
    "unique-id": ("R", "other unique identifying numbers or codes"),
    "small-cell": ("", "small cell counts in an aggregate table"),
    "unscreened": ("", "a file the screen cannot read"),
}
SOURCE = "45 CFR 164.514(b)(2)(i)"
MAX_VALUES = 2000          # distinct values examined per column


@dataclass(frozen=True)
class Hit:
    """One finding before acknowledgement is applied."""

    column: str
    category: str
    reason: str
    examples: tuple[str, ...]
    count: int


# ---------------------------------------------------------------- column names

def name_tokens(name: str) -> list[str]:
    """'patientID' -> ['patient', 'id']; 'ZIPCode' -> ['zip', 'code']; 'e-mail' -> ['e', 'mail']."""
    spaced = re.sub(r"([A-Z]+)([A-Z][a-z])", r"\1 \2", name)
    spaced = re.sub(r"([a-z0-9])([A-Z])", r"\1 \2", spaced)
    return [t for t in re.split(r"[^a-z0-9]+", spaced.lower()) if t]


IDISH = frozenset({"id", "ids", "identifier", "uid", "uuid", "guid", "number", "num", "no",
                   "nr", "code", "ref", "reference", "key"})
PERSON_IDS = frozenset({"patientid", "personid", "subjectid", "subjid", "participantid", "pid",
                        "ptid", "caseid", "clientid", "userid", "respondentid", "childid",
                        "motherid", "studyid", "recordid", "patid", "mrn"})
NOT_PERSON = frozenset("""
clinic site lab laboratory district region hospital ward country state province facility
study trial arm batch plate well run model variable item question figure group cluster centre
center area zone unit school village county city town iso icd atc loinc snomed gene protein
probe snp drug product sku row index obs line page version order rank step week month year
day date time period quarter wave visit test assay panel sample specimen tube slide image file
species strain reagent kit instrument channel dose level category class type
""".split())
PLACE_WORDS = frozenset("""
district region area zone site clinic lab laboratory hospital facility ward country state
province county city town village neighbourhood neighborhood suburb location place centre
center unit school street borough parish municipality
""".split())
FINE_PLACE = frozenset({"city", "town", "village", "county", "district", "neighbourhood",
                        "neighborhood", "suburb", "precinct", "municipality", "borough",
                        "parish", "locality", "lat", "latitude", "lon", "lng", "longitude",
                        "geolocation", "coordinates", "gps"})
ALWAYS_PLACE = frozenset({"address", "addr", "street", "postcode", "postal", "zip", "zipcode",
                          "postcodes", "housenumber", "apartment", "streetaddress"})
STRONG_DATE = frozenset({"birth", "dob", "born", "birthdate", "birthday", "death", "died",
                         "dod", "deceased", "admission", "admit", "admitted", "discharge",
                         "discharged", "admissiondate", "dischargedate", "deathdate"})
AGE_UNITS = frozenset({"group", "grp", "band", "cat", "category", "class", "range", "months",
                       "month", "mo", "mos", "days", "day", "weeks", "week", "wk", "wks",
                       "gestational", "hours", "hrs", "cohort"})
COUNT_WORDS = frozenset({"count", "counts", "n", "cases", "deaths", "births", "events", "freq",
                         "frequency", "total", "visits", "admissions", "patients", "persons",
                         "people", "num", "number", "tally", "episodes", "infections",
                         "hospitalisations", "hospitalizations", "discharges", "attendances",
                         "referrals", "positives", "tests", "respondents"})
PERSON_ATTRS = frozenset({"sex", "gender", "age", "dob", "ethnicity", "race", "marital",
                          "height", "weight", "bmi", "smoker", "smoking", "occupation"})

# (category, rule) in priority order: the first rule that matches a column name wins.
NameRule = Callable[[set[str], str], bool]
NAME_RULES: list[tuple[str, NameRule]] = [
    ("email", lambda t, j: bool(t & {"email", "emails"}) or "emailaddress" in j
     or ("e" in t and "mail" in t)),
    ("ip-address", lambda t, j: j in {"ipaddress", "ipv4", "ipv6", "ipaddr"}
     or ("ip" in t and bool(t & {"address", "addr"}))),
    ("device", lambda t, j: bool(t & {"serial", "serialnumber", "imei", "udid", "macaddress"})
     or ("mac" in t and "address" in t) or ("device" in t and bool(t & IDISH))),
    ("fax", lambda t, j: bool(t & {"fax", "facsimile"})),
    ("telephone", lambda t, j: bool(t & {"phone", "telephone", "tel", "mobile", "cellphone",
                                         "landline", "phonenumber"})),
    ("national-id", lambda t, j: bool(t & {"ssn", "nino", "passport", "personnummer", "bsn",
                                           "aadhaar", "nationalid", "idcard", "nhsnumber"})
     or "socialsecurity" in j or ("national" in t and bool(t & IDISH))
     or ("nhs" in t and bool(t & IDISH))),
    ("medical-record", lambda t, j: bool(t & {"mrn", "medicalrecord", "hospitalnumber"})
     or ("medical" in t and "record" in t) or ("record" in t and bool(t & {"number", "no"}))
     or ("hospital" in t and bool(t & {"number", "no"})) or ("chart" in t and bool(t & IDISH))),
    ("health-plan", lambda t, j: bool(t & {"insurance", "insurer", "policy", "beneficiary",
                                           "medicaid", "medicare", "subscriber", "healthplan"})
     and bool(t & IDISH)),
    ("vehicle", lambda t, j: "vin" in t or any(w in j for w in ("licenseplate", "licenceplate",
                                                                "numberplate", "registrationplate"))
     or ("vehicle" in t and bool(t & IDISH))),
    ("account", lambda t, j: bool(t & {"iban", "creditcard", "cardnumber", "sortcode"})
     or ("account" in t and bool(t & IDISH)) or "bankaccount" in j
     or ("card" in t and "number" in t)),
    ("licence", lambda t, j: bool(t & {"licence", "license", "certificate", "permit"})
     and bool(t & IDISH)),
    ("biometric", lambda t, j: bool(t & {"fingerprint", "fingerprints", "voiceprint", "faceprint",
                                         "palmprint", "biometric", "biometrics", "retina"})
     or ("iris" in t and "scan" in t) or ("face" in t and bool(t & {"embedding", "encoding"}))),
    ("photograph", lambda t, j: bool(t & {"photo", "photograph", "portrait", "headshot", "selfie",
                                          "mugshot"})
     or ("face" in t and bool(t & {"image", "photo"}))),
    ("url", lambda t, j: bool(t & {"url", "uri", "website", "homepage", "webpage"})),
    ("geography", lambda t, j: bool(t & ALWAYS_PLACE) or any(w in j for w in ("address", "postcode",
                                                                               "zipcode"))),
    ("name", lambda t, j: bool(t & {"surname", "forename", "firstname", "lastname", "fullname",
                                    "givenname", "familyname", "maidenname", "middlename",
                                    "initials"})
     or ("name" in t and bool(t & PERSON_WORDS))),
]


def name_category(name: str) -> str | None:
    """The identifier category a column *name* alone indicates, or None."""
    tokens = name_tokens(name)
    found = set(tokens)
    joined = "".join(tokens)
    for category, rule in NAME_RULES:
        if rule(found, joined):
            return category
    return None


# ---------------------------------------------------------------- table shape

@dataclass(frozen=True)
class Shape:
    """Whether a table holds counts of groups (aggregate) or one row per person/event."""

    aggregate: bool
    person_level: bool
    count_columns: tuple[str, ...]


def _is_count_column(col: ColumnData) -> bool:
    return col.kind == "numeric" and col.integers and bool(col.numbers) and \
        min(col.numbers) >= 0


def _person_id(col: ColumnData) -> bool:
    tokens = name_tokens(col.name)
    joined = "".join(tokens)
    return joined in PERSON_IDS or (bool(set(tokens) & PERSON_WORDS) and bool(set(tokens) & IDISH))


def table_shape(columns: list[ColumnData], origin: str) -> Shape:
    """Aggregate: declared so, or a count-named column of non-negative integers beside a
    categorical or date column, and no person-like id. Person-level: not aggregate, and a
    person-like id or a per-person attribute (sex, age, date of birth, ...)."""
    counts = [c for c in columns if _is_count_column(c) and set(name_tokens(c.name)) & COUNT_WORDS]
    grouping = any(c.kind in ("categorical", "date") for c in columns)
    person_id = any(_person_id(c) for c in columns)
    aggregate = origin == "aggregate" or (bool(counts) and grouping and not person_id)
    if origin == "aggregate" and not counts:
        skip = {"year", "yr", "week", "wk", "month", "day", "id", "code", "age", "order", "rank",
                "index", "lat", "lon", "x", "y", "population", "pop", "denominator"}
        counts = [c for c in columns if _is_count_column(c) and not set(name_tokens(c.name)) & skip]
    attrs = any(set(name_tokens(c.name)) & PERSON_ATTRS for c in columns)
    person = not aggregate and (person_id or attrs)
    return Shape(aggregate, person, tuple(c.name for c in counts) if aggregate else ())


# ---------------------------------------------------------------- per-column checks

def check_column(col: ColumnData, shape: Shape, small_cell: int) -> list[Hit]:
    """Every finding for one column (at most one per category)."""
    hits: dict[str, Hit] = {}
    for hit in (_by_name(col, shape), *_by_values(col, shape), _dates(col, shape),
                _ages(col), _unique_id(col, shape),
                _small_cells(col, small_cell) if col.name in shape.count_columns else None):
        if hit is None:
            continue
        first = hits.get(hit.category)
        hits[hit.category] = hit if first is None else Hit(
            col.name, hit.category, f"{first.reason}; {hit.reason}",
            first.examples or hit.examples, max(first.count, hit.count))
    return list(hits.values())


def _present_texts(col: ColumnData) -> list[str]:
    return list(dict.fromkeys(col.texts))[:MAX_VALUES]


def _by_name(col: ColumnData, shape: Shape) -> Hit | None:
    tokens = set(name_tokens(col.name))
    category = name_category(col.name)
    if category is None and tokens & FINE_PLACE and shape.person_level:
        category = "geography"
    if category is None and tokens <= {"name", "names"} and tokens and not shape.aggregate:
        category = "name"
    if category is None or not col.values:
        return None
    texts = _present_texts(col)
    label = CATEGORIES[category][1]
    where = " in a table of individuals" if category == "geography" and tokens & FINE_PLACE \
        and not tokens & ALWAYS_PLACE else ""
    return Hit(col.name, category, f"column name suggests {label}{where}",
               examples(texts, category), len(col.values))


def _by_values(col: ColumnData, shape: Shape) -> list[Hit]:
    """Value patterns over the distinct values of a text column, then identifiers written
    inside longer text (an email address in a comment)."""
    if col.kind not in ("categorical", "text"):
        return []
    texts = _present_texts(col)
    tokens = set(name_tokens(col.name))
    hits = []
    for category, test in VALUE_RULES:
        if category == "name" and tokens & PLACE_WORDS:
            continue                      # district and site names are not people
        matched = [t for t in texts if test(t)]
        if category == "name" and not _enough(category, matched, texts):
            matched = given_only(texts)
        if matched and (_enough(category, matched, texts) or category == "name"):
            hits.append(Hit(col.name, category, f"{len(matched)} of {len(texts)} distinct "
                                                f"values look like {CATEGORIES[category][1]}",
                            examples(matched, category), len(matched)))
    for category, pattern in EMBEDDED:
        inside = [m.group(0) for t in texts if (m := pattern.search(t))]
        if inside and all(h.category != category for h in hits):
            hits.append(Hit(col.name, category, f"{len(inside)} value(s) contain "
                                                f"{CATEGORIES[category][1]} within the text",
                            examples(inside, category), len(inside)))
    return hits


def _enough(category: str, matched: list[str], texts: list[str]) -> bool:
    """Patterns must fit at least half the distinct values; full names 30% (mixed columns)."""
    share = 0.3 if category == "name" else 0.5
    return bool(matched) and len(matched) >= math.ceil(share * len(texts))


def _dates(col: ColumnData, shape: Shape) -> Hit | None:
    """Dates of people: strong names (birth, death, admission, discharge) at any precision
    below a year; any full (day) date in a person-level table."""
    if col.kind != "date":
        return None
    strong = bool(set(name_tokens(col.name)) & STRONG_DATE) or \
        any(w in "".join(name_tokens(col.name))
            for w in ("birth", "death", "admission", "discharge"))
    if not (strong or (shape.person_level and col.precision == "day")):
        return None
    why = "column name says a date of birth, death, admission or discharge" if strong else \
        "full dates in a table of individuals"
    return Hit(col.name, "date", why, examples(_present_texts(col), "date"), len(col.values))


def _ages(col: ColumnData) -> Hit | None:
    """Ages of 90 or more (Safe Harbor allows only a single '90 or older' category)."""
    tokens = name_tokens(col.name)
    joined = "".join(tokens)
    is_age = "age" in tokens or (joined.startswith("age") and joined[3:] in
                                 ("years", "yrs", "yr", "atdeath", "atdiagnosis", "atentry"))
    if not is_age or set(tokens) & AGE_UNITS or col.kind != "numeric":
        return None
    old = [n for n in col.numbers if math.isfinite(n) and n >= 90]
    if not old:
        return None
    shown = [str(int(n)) if float(n).is_integer() else str(n) for n in old]
    return Hit(col.name, "age-over-89", f"{len(old)} age(s) of 90 or more",
               examples(shown, "age-over-89"), len(old))


def _unique_id(col: ColumnData, shape: Shape) -> Hit | None:
    """A code column with (nearly) one row per value: a person-like id anywhere, or a
    generic id/number/code outside aggregate tables; never an id of places, sites or times."""
    tokens = set(name_tokens(col.name))
    person = _person_id(col) or (bool(tokens) and tokens <= {"patient", "person", "participant",
                                                             "subject", "client"})
    generic = bool(tokens & IDISH) and not tokens & NOT_PERSON and not shape.aggregate
    if not (person or generic) or len(col.values) < 10 or name_category(col.name):
        return None
    if col.kind == "numeric" and not col.integers:
        return None
    texts = col.texts
    if not (col.kind == "numeric" or any(ch.isdigit() for t in texts for ch in t[:12])):
        return None
    distinct = len(set(texts))
    if distinct < 0.95 * len(texts):
        return None
    return Hit(col.name, "unique-id",
               f"{distinct} distinct codes in {len(texts)} rows: an identifier per row; if "
               "the study assigned it and it is not derived from a real identifier, "
               "acknowledge it (45 CFR 164.514(c))",
               examples(list(dict.fromkeys(texts)), "unique-id"), distinct)


def _small_cells(col: ColumnData, small_cell: int) -> Hit | None:
    """Counts 1..small_cell-1 in an aggregate table; a count of 0 discloses nobody."""
    if small_cell <= 1 or col.kind != "numeric":
        return None
    rows = [r for r, n in zip(col.rows, col.numbers) if 0 < n < small_cell]
    if not rows:
        return None
    return Hit(col.name, "small-cell",
               f"{len(rows)} cell(s) with a count between 1 and {small_cell - 1}",
               tuple(f"data row {r + 1}" for r in rows[:MAX_EXAMPLES]), len(rows))
