"""Value patterns of the data screen: what an identifier *looks like*, and how to redact it.

Why separate from the rules: each pattern is a pure function of one string, tested on invented
values one by one, and the check digits (Luhn for payment cards, mod 97 for IBANs) cut the
false positives that a bare regular expression would give on arbitrary numeric codes.
"""
from __future__ import annotations

import ipaddress
import re
from collections.abc import Callable

from figfolio.screen_names import GIVEN_NAMES

MAX_EXAMPLES = 3


EMAIL = re.compile(r"[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(?:\.[A-Za-z0-9-]+)*\.[A-Za-z]{2,}")
URL = re.compile(r"(?:https?|ftp)://[^\s/$.?#][^\s]*|www\.[A-Za-z0-9-]+\.[A-Za-z]{2,}[^\s]*",
                 re.IGNORECASE)
SSN = re.compile(r"(?<!\d)(?!000|666|9\d\d)\d{3}[- ](?!00)\d{2}[- ](?!0000)\d{4}(?!\d)")
NINO = re.compile(r"^[A-CEGHJ-PR-TW-Z][A-CEGHJ-NPR-TW-Z] ?\d{2} ?\d{2} ?\d{2} ?[A-D]$")
PHONE = re.compile(r"^(?:\+\d{1,3}[\s.-]?)?(?:\(\d{1,5}\)[\s.-]?)?\d{1,5}(?:[\s.-]\d{1,5}){0,5}$")
THOUSANDS = re.compile(r"^\d{1,3}(?:([ .,])\d{3})(?:\1\d{3})*$")
YEAR_RANGE = re.compile(r"^\d{4}\s?[-/]\s?\d{2,4}$")
DATE_LIKE = re.compile(r"^\d{1,4}[-./]\d{1,2}[-./]\d{1,4}$")
UK_POSTCODE = re.compile(r"^[A-Z]{1,2}\d[A-Z\d]? ?\d[A-Z]{2}$", re.IGNORECASE)
CA_POSTCODE = re.compile(r"^[ABCEGHJ-NPRSTVXY]\d[A-Z] ?\d[A-Z]\d$", re.IGNORECASE)
ZIP_PLUS4 = re.compile(r"^\d{5}-\d{4}$")
NL_POSTCODE = re.compile(r"^[1-9]\d{3} ?[A-Z]{2}$")
STREET = re.compile(r"^\d+[A-Za-z]?,? (?:[A-Z][\w'.-]* ){1,4}(?:Street|St|Road|Rd|Avenue|Ave|"
                    r"Lane|Ln|Drive|Dr|Boulevard|Blvd|Way|Court|Ct|Place|Pl|Terrace|Close|"
                    r"Crescent|Square|Sq|Highway|Hwy|Parkway|Pkwy)\.?\b", re.UNICODE)
VIN = re.compile(r"^[A-HJ-NPR-Z0-9]{17}$")
MAC = re.compile(r"^[0-9A-Fa-f]{2}(?:([:-])[0-9A-Fa-f]{2})(?:\1[0-9A-Fa-f]{2}){4}$")
IBAN = re.compile(r"^[A-Z]{2}\d{2}(?: ?[A-Z0-9]){11,30}$")
CARD = re.compile(r"^\d{4}(?:[ -]?\d{4}){2}[ -]?\d{1,7}$")
NAME_WORD = re.compile(r"^[^\W\d_][^\W\d_'’-]*(?:['’-][^\W\d_]+)*$")


def luhn_ok(digits: str) -> bool:
    """Luhn check digit (ISO/IEC 7812-1), used by payment card numbers."""
    total = 0
    for i, ch in enumerate(reversed(digits)):
        d = int(ch) * (2 if i % 2 else 1)
        total += d - 9 if d > 9 else d
    return total % 10 == 0


def iban_ok(text: str) -> bool:
    """IBAN mod-97 check (ISO 13616): move four characters to the end, letters to numbers."""
    s = text.replace(" ", "").upper()
    moved = s[4:] + s[:4]
    return int("".join(str(int(ch, 36)) for ch in moved)) % 97 == 1


def is_phone(text: str) -> bool:
    """Formatted phone numbers: 9-15 digits, and a leading +, parentheses or >= 3 groups;
    never a date, a year range or a number with thousands separators."""
    if not PHONE.match(text) or THOUSANDS.match(text) or YEAR_RANGE.match(text) \
            or DATE_LIKE.match(text):
        return False
    digits = sum(ch.isdigit() for ch in text)
    groups = len(re.findall(r"\d+", text))
    return 9 <= digits <= 15 and (text.startswith("+") or "(" in text or groups >= 3)


def is_ip(text: str) -> bool:
    """Dotted-quad IPv4 or IPv6 with at least two colons, validated by ``ipaddress``."""
    if not (re.fullmatch(r"\d{1,3}(?:\.\d{1,3}){3}", text) or
            (text.count(":") >= 2 and re.fullmatch(r"[0-9A-Fa-f:.]+", text))):
        return False
    try:
        ipaddress.ip_address(text)
    except ValueError:
        return False
    return True


def is_postcode(text: str) -> bool:
    return bool(UK_POSTCODE.match(text) or CA_POSTCODE.match(text) or ZIP_PLUS4.match(text)
                or NL_POSTCODE.match(text) or STREET.match(text))


def is_account(text: str) -> bool:
    if IBAN.match(text):
        return iban_ok(text)
    if CARD.match(text):
        digits = re.sub(r"\D", "", text)
        return 13 <= len(digits) <= 19 and luhn_ok(digits)
    return False


def is_vin(text: str) -> bool:
    return bool(VIN.match(text)) and sum(c.isdigit() for c in text) >= 2 and \
        sum(c.isalpha() for c in text) >= 2


def looks_like_person(text: str) -> bool:
    """'Amara Okafor', 'OKAFOR, Amara', 'Maria del Carmen Ruiz': 2-4 name words, a given name
    from the list first (or first after the comma)."""
    if "," in text:
        last, _, first = text.partition(",")
        words = first.split()
        return bool(words) and bool(last.strip()) and _name_words(last.split() + words) \
            and words[0].lower() in GIVEN_NAMES
    words = text.split()
    if not 2 <= len(words) <= 4 or not _name_words(words):
        return False
    return words[0].lower() in GIVEN_NAMES


def _name_words(words: list[str]) -> bool:
    lower_ok = {"de", "del", "da", "van", "von", "der", "den", "bin", "binti", "al", "la", "le",
                "dos", "das", "di", "ten", "ter"}
    return all(NAME_WORD.match(w) and (w[0].isupper() or w.lower() in lower_ok) for w in words)


# (category, full-match test, may also be searched inside free text)
VALUE_RULES: list[tuple[str, Callable[[str], bool]]] = [
    ("email", lambda v: bool(EMAIL.fullmatch(v))),
    ("url", lambda v: bool(URL.fullmatch(v))),
    ("national-id", lambda v: bool(SSN.fullmatch(v) or NINO.match(v))),
    ("ip-address", is_ip),
    ("device", lambda v: bool(MAC.match(v))),
    ("account", is_account),
    ("vehicle", is_vin),
    ("telephone", is_phone),
    ("geography", is_postcode),
    ("name", looks_like_person),
]
EMBEDDED = [("email", EMAIL), ("url", URL), ("national-id", SSN)]


# ---------------------------------------------------------------- redaction

def redact(text: str, category: str) -> str:
    """Show the shape of a value, not the value: 'John Smith' -> 'J*** S****',
    '123-45-6789' -> '***-**-6789', '1984-03-12' -> '19**-**-**'."""
    text = text[:40]
    if category == "name":
        return " ".join(w[0] + "*" * (len(w) - 1) for w in text.replace(",", " ").split())
    if category == "national-id":
        keep = len(text) - 4
        return "".join("*" if ch.isalnum() and i < keep else ch for i, ch in enumerate(text))
    if category in ("date", "age-over-89"):
        return _mask_after(text, 2 if category == "date" else 1)
    if category == "email":
        local, _, domain = text.partition("@")
        tld = domain.rsplit(".", 1)[-1] if "." in domain else ""
        return f"{local[:1]}***@***.{tld}"
    return _mask_after(text, 1)


def _mask_after(text: str, keep: int) -> str:
    """Keep the first ``keep`` letters/digits, star the rest, keep separators."""
    out, seen = [], 0
    for ch in text:
        if ch.isalnum():
            seen += 1
            out.append(ch if seen <= keep else "*")
        else:
            out.append(ch)
    return "".join(out)


def examples(values: list[str], category: str) -> tuple[str, ...]:
    return tuple(dict.fromkeys(redact(v, category) for v in values[:20]))[:MAX_EXAMPLES]


def given_only(texts: list[str]) -> list[str]:
    """A column of first names alone: at least 3 known given names, half the distinct values."""
    known = [t for t in texts if " " not in t and t[:1].isupper() and t.lower() in GIVEN_NAMES]
    return known if len(known) >= 3 and len(known) >= 0.5 * len(texts) else []
