"""Decode text data files and read delimited text (CSV, TSV) as a bounded sample.

Why a module of its own: contributors' files come from every kind of program and locale. A file
saved by a Windows spreadsheet is cp1252, a file from some statistics packages is UTF-16 with a
byte-order mark, a file copied from a server may hold a 60 MB single line. The catalogue must
still show something sensible and must never spend unbounded time or memory on one file, so
every read here is capped (``MAX_CHARS`` of text, ``LINE_LIMIT`` per line, a row sample).
"""
from __future__ import annotations

import codecs
import csv
import io
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import charset_normalizer

MAX_CHARS = 50_000_000          # never parse more than ~50 MB of text for one file
LINE_LIMIT = 1_000_000          # a physical line longer than this is cut (and noted)
DETECT_BYTES = 512 * 1024       # bytes looked at to decide the encoding
COUNT_LIMIT = 1 << 30           # newline counting reads at most 1 GiB; beyond that rows = None
SNIFF_CHARS = 64 * 1024
DELIMITERS = (",", ";", "\t", "|")
BOMS = ((codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
        (codecs.BOM_UTF8, "utf-8-sig"), (codecs.BOM_UTF16_LE, "utf-16"),
        (codecs.BOM_UTF16_BE, "utf-16"))


@dataclass
class Table:
    """A bounded sample of a tabular file, as the reader found it.

    ``rows`` hold raw cells: ``str`` for text formats, native values (int, float, datetime,
    bool, None) for JSON, Parquet and Excel. ``total_rows`` is the whole file's data-row count
    when it can be had cheaply, else None. ``sampled`` is True when the file has more rows than
    ``rows``. ``kind`` is "table", or "download-only" when the file is not read as a table.
    """

    header: list[str] = field(default_factory=list)
    rows: list[list[Any]] = field(default_factory=list)
    total_rows: int | None = 0
    sampled: bool = False
    notes: list[str] = field(default_factory=list)
    kind: str = "table"
    decimal_comma: bool = False


@dataclass
class Encoding:
    """The codec chosen for a file and, when it is not plain UTF-8, the note that says so."""

    codec: str
    note: str | None = None


def detect_encoding(head: bytes) -> Encoding:
    """Choose a codec from the first bytes of a file.

    Order: a byte-order mark decides; then strict UTF-8 (the overwhelmingly common case);
    then charset-normalizer's guess. Its guess on short Western European text is often an
    exotic code page whose decoding is identical to cp1252 ('could_be_from_charset'), so among
    the equally good guesses cp1252 is preferred; the note names what was used.
    """
    for bom, codec in BOMS:
        if head.startswith(bom):
            note = None if codec == "utf-8-sig" else \
                f"not UTF-8: decoded as {codec} (byte-order mark)"
            return Encoding(codec, note)
    try:
        codecs.getincrementaldecoder("utf-8")().decode(head, final=False)
        return Encoding("utf-8")
    except UnicodeDecodeError:
        pass
    guess = _charset_guess(head)
    if guess:
        return Encoding(guess, f"not UTF-8: decoded as {guess}")
    for codec in ("cp1252", "latin-1"):
        try:
            head.decode(codec)
        except UnicodeDecodeError:
            continue
        return Encoding(codec, f"not UTF-8: decoded as {codec}")
    # latin-1 decodes every byte, so the loop above always returns; this satisfies the type
    return Encoding("latin-1", "not UTF-8: decoded as latin-1")  # pragma: no cover


def _charset_guess(head: bytes) -> str | None:
    """charset-normalizer's best guess, preferring cp1252 among equally plausible decodings."""
    matches = list(charset_normalizer.from_bytes(head))
    if not matches:
        return None
    least = min(m.chaos for m in matches)
    for match in matches:
        if match.chaos <= least + 1e-9 and "cp1252" in match.could_be_from_charset:
            return "cp1252"
    best = min(matches, key=lambda m: (m.chaos, -m.coherence))
    return best.encoding


def decode_bytes(data: bytes) -> tuple[str, str | None]:
    """Decode a whole (already size-bounded) byte string; returns (text, note or None)."""
    enc = detect_encoding(data[:DETECT_BYTES])
    try:
        return data.decode(enc.codec), enc.note
    except UnicodeDecodeError:
        extra = "some bytes could not be decoded and were replaced"
        return (data.decode(enc.codec, errors="replace"),
                f"{enc.note}; {extra}" if enc.note else extra)


def count_lines(path: Path) -> int | None:
    """Number of lines (newline count, plus one for a last line without newline).

    Cheap because it only counts bytes; None beyond ``COUNT_LIMIT`` so a huge file costs no
    more than a second or so. Quoted fields that span lines make this an over-count.
    """
    size = path.stat().st_size
    if size > COUNT_LIMIT:
        return None
    count, last = 0, b""
    with path.open("rb") as handle:
        while chunk := handle.read(1 << 20):
            count += chunk.count(b"\n")
            last = chunk[-1:]
    return count + (1 if last and last != b"\n" else 0)


@dataclass
class _LineStats:
    long_lines: int = 0
    budget_hit: bool = False
    nul: bool = False


def _bounded_lines(stream: io.TextIOBase, stats: _LineStats) -> Iterator[str]:
    """Physical lines of ``stream``, each at most ``LINE_LIMIT`` chars, ``MAX_CHARS`` in all."""
    used = 0
    while used < MAX_CHARS:
        line = stream.readline(LINE_LIMIT)
        if not line:
            return
        used += len(line)
        if len(line) >= LINE_LIMIT and not line.endswith(("\n", "\r")):
            stats.long_lines += 1
            while used < MAX_CHARS:
                rest = stream.readline(LINE_LIMIT)
                used += len(rest)
                if not rest or rest.endswith(("\n", "\r")):
                    break
            line += "\n"
        if "\x00" in line:
            stats.nul = True
            line = line.replace("\x00", "")
        yield line
    stats.budget_hit = True


def sniff_delimiter(head: str, suffix: str) -> str:
    """Pick the delimiter that splits the first lines into the most consistent width.

    Our own rule instead of ``csv.Sniffer`` because that raises on many real files. For each
    candidate the modal field count must exceed 1; the score is the share of lines with the
    modal width (plus a bonus when the header has it too). Ties go to tab for .tsv, else comma.
    """
    lines = [ln for ln in head.splitlines()[:60] if ln.strip()]
    if len(head) >= SNIFF_CHARS and len(lines) > 1:
        lines = lines[:-1]                      # the last line may be cut in the middle
    order = ("\t", ",", ";", "|") if suffix == ".tsv" else DELIMITERS
    best, best_score = order[0], -1.0
    for delim in order:
        try:
            rows = list(csv.reader(lines, delimiter=delim))
        except csv.Error:
            continue
        if not rows:
            continue
        width, freq = Counter(len(r) for r in rows).most_common(1)[0]
        if width < 2:
            continue
        score = freq / len(rows) + (0.5 if len(rows[0]) == width else 0.0)
        if score > best_score + 1e-9:
            best, best_score = delim, score
    return best


def read_delimited(path: Path, sample_rows: int) -> Table:
    """Read the header and at most ``sample_rows`` data rows of a CSV/TSV/text table."""
    with path.open("rb") as handle:
        head = handle.read(DETECT_BYTES)
    table = Table()
    if not head.strip(b" \t\r\n\x00"):
        table.notes.append("empty file: no header and no rows")
        return table
    enc = detect_encoding(head)
    if enc.note:
        table.notes.append(enc.note)
    with path.open("rb") as raw:
        stream = io.TextIOWrapper(raw, encoding=enc.codec, errors="replace", newline="")
        delim = sniff_delimiter(stream.read(SNIFF_CHARS), path.suffix.lower())
    stats = _LineStats()
    with path.open("rb") as raw:
        stream = io.TextIOWrapper(raw, encoding=enc.codec, errors="replace", newline="")
        _parse_rows(csv.reader(_bounded_lines(stream, stats), delimiter=delim), table,
                    sample_rows)
    _line_notes(table, stats, delim, "\t" if path.suffix.lower() == ".tsv" else ",")
    if enc.codec == "utf-8" and any("\ufffd" in c for row in table.rows for c in row):
        table.notes.append("some bytes are not valid UTF-8 and were replaced")
    if table.sampled and not enc.codec.startswith(("utf-16", "utf-32")):
        lines = count_lines(path)
        table.total_rows = None if lines is None else max(lines - 1, len(table.rows))
    elif table.sampled:
        table.total_rows = None
    return table


def _parse_rows(reader: Iterator[list[str]], table: Table, sample_rows: int) -> None:
    """Fill ``table`` from a csv reader; malformed records are skipped and counted."""
    broken = 0
    while True:
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error:
            broken += 1
            if broken > 1000:
                table.notes.append("too many malformed records; reading stopped")
                break
            continue
        if not row:
            continue
        if not table.header and not table.rows:
            table.header = list(row)
            continue
        if len(table.rows) >= sample_rows:
            table.sampled = True
            break
        table.rows.append(row)
    table.total_rows = len(table.rows)
    if broken:
        table.notes.append(f"{broken} malformed record(s) could not be parsed and were skipped")


def _line_notes(table: Table, stats: _LineStats, delim: str, usual: str) -> None:
    """Notes worth a reader's attention; the usual delimiter of the extension goes unsaid."""
    names = {",": "comma", ";": "semicolon", "\t": "tab", "|": "vertical bar"}
    if len(table.header) > 1 and delim != usual:
        table.notes.append(f"delimiter: {names[delim]}")
    if stats.long_lines:
        table.notes.append(f"{stats.long_lines} line(s) longer than {LINE_LIMIT:,} characters "
                           "were cut")
    if stats.nul:
        table.notes.append("file contains NUL bytes: probably not a text table")
    if stats.budget_hit and not table.sampled:
        table.sampled = True
        table.notes.append(f"only the first {MAX_CHARS // 1_000_000} MB were read")
    if delim == ";":
        table.decimal_comma = True
