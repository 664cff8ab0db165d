"""Tiny typed-key validation shared by settings and recipe metadata.

Why not a schema library: the messages are the product here. Each problem must name the file,
the key and the fix in the group's own words, and TOML already gives us typed values.
"""
from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from figfolio.errors import FigfolioError

TYPE_WORDS = {str: "a string", int: "a whole number", float: "a number", bool: "true or false",
              list: "a list", dict: "a table"}


@dataclass(frozen=True)
class Key:
    """One allowed key: its type, an optional element type for lists, and a check."""

    name: str
    type: type
    item: type | None = None
    check: Callable[[Any], str | None] | None = None  # returns a problem description or None
    hint: str | None = None


def read_toml(path: Path, error: type[FigfolioError]) -> dict[str, Any]:
    """Parse a TOML file; syntax errors become ``error`` naming the line."""
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise error(f"cannot read the file ({exc.strerror})", path=path) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise error("is not UTF-8 text", path=path, hint="save the file as UTF-8") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"is not valid TOML: {exc}", path=path,
                    hint="check quotes, brackets and '=' on that line") from None


def type_word(t: type) -> str:
    return TYPE_WORDS.get(t, t.__name__)


def check_value(value: Any, key: Key) -> str | None:
    """Return a problem with ``value`` for ``key``, or None when it is fine."""
    expected = key.type
    ok = isinstance(value, expected) and not (expected in (int, float) and isinstance(value, bool))
    if expected is float and isinstance(value, int) and not isinstance(value, bool):
        ok = True
    if not ok:
        return f"must be {type_word(expected)}, not {type_word(type(value))}"
    if key.item is not None:
        for item in value:
            if not isinstance(item, key.item) or isinstance(item, bool) and key.item is not bool:
                return f"must be a list of {type_word(key.item)}s; found {item!r}"
    if key.check is not None:
        return key.check(value)
    return None


def validate(table: dict[str, Any], keys: list[Key], *, path: Path, error: type[FigfolioError],
             prefix: str = "") -> list[FigfolioError]:
    """Check every key of ``table`` against ``keys``; return all problems, not just the first."""
    known = {k.name: k for k in keys}
    problems: list[FigfolioError] = []
    for name, value in table.items():
        full = f"{prefix}{name}"
        spec = known.get(name)
        if spec is None:
            close = _closest(name, list(known))
            hint = f"did you mean '{prefix}{close}'?" if close else (
                "remove it; allowed keys are: " + ", ".join(sorted(known)))
            problems.append(error("unknown key", path=path, key=full, hint=hint))
            continue
        problem = check_value(value, spec)
        if problem:
            problems.append(error(problem, path=path, key=full, hint=spec.hint))
    return problems


def _closest(name: str, choices: list[str]) -> str | None:
    import difflib

    found = difflib.get_close_matches(name, choices, n=1, cutoff=0.7)
    return found[0] if found else None
