"""Catalogue settings: where recipes live, how they run, what the audit and screen enforce.

Read from ``figfolio.toml`` (top-level keys) or ``[tool.figfolio]`` in ``pyproject.toml``,
found in the given folder or the nearest parent. Every value has a default so an empty file is
a valid catalogue; every bad value is a ``SettingsError`` naming the file and the key.
"""
from __future__ import annotations

import hashlib
import json
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from figfolio.errors import SettingsError
from figfolio.schema import Key, read_toml, validate

FORMATS = ("png", "svg", "pdf")
ORDERS = ("title", "slug", "newest")
EXECUTORS = ("local", "dask")


def _formats(value: list[str]) -> str | None:
    bad = [v for v in value if v not in FORMATS]
    if bad or not value:
        return f"has {bad or 'no formats'}; allowed formats are {', '.join(FORMATS)}"
    return None


def _positive(value: float) -> str | None:
    return None if value > 0 else "must be greater than 0"


def _not_negative(value: float) -> str | None:
    return None if value >= 0 else "must be 0 or more"


def _one_of(choices: tuple[str, ...]):
    def check(value: str) -> str | None:
        return None if value in choices else f"must be one of {', '.join(choices)}"
    return check


@dataclass(frozen=True)
class AuditSettings:
    """Thresholds of the figure audit (PRODUCT.md §7); defaults are explained in audit.py."""

    min_text_pt: float = 6.0
    min_ppi: float = 300.0
    cvd_severity: float = 1.0
    min_delta_e: float = 10.0
    errors: tuple[str, ...] = ()


@dataclass(frozen=True)
class ScreenSettings:
    """Data screen (PRODUCT.md §8). ``small_cell``: counts below it in aggregate tables are flagged."""

    small_cell: int = 11
    sample_rows: int = 5000


@dataclass(frozen=True)
class Settings:
    """Everything a build needs to know about the catalogue, resolved to absolute paths."""

    root: Path
    source: Path | None = None
    title: str = "Figure catalogue"
    description: str = ""
    recipes_dir: str = "recipes"
    build_dir: str = "build"
    formats: tuple[str, ...] = FORMATS
    dpi: int = 150
    timeout: float = 120.0
    memory_mb: int = 4096
    max_output_kb: int = 1024
    max_pixels: int = 60_000_000
    jobs: int = 0
    drift_tolerance: int = 10
    strict: bool = False
    order: str = "title"
    contribute: str = ""
    executor: str = "local"
    scheduler: str = ""
    network: bool = False
    repeat: int = 1
    audit: AuditSettings = field(default_factory=AuditSettings)
    screen: ScreenSettings = field(default_factory=ScreenSettings)

    @property
    def recipes_path(self) -> Path:
        return self.root / self.recipes_dir

    @property
    def build_path(self) -> Path:
        return self.root / self.build_dir

    @property
    def cache_path(self) -> Path:
        return self.build_path / "cache"

    @property
    def site_path(self) -> Path:
        return self.build_path / "site"

    @property
    def job_count(self) -> int:
        return self.jobs or (os.cpu_count() or 1)

    def run_digest(self) -> str:
        """Digest of the settings that change what a stored run holds; part of the cache key."""
        relevant = {"formats": list(self.formats), "dpi": self.dpi, "timeout": self.timeout,
                    "memory_mb": self.memory_mb, "max_pixels": self.max_pixels,
                    "network": self.network,
                    # the stored record also holds the audit and the data summaries
                    "audit": asdict(self.audit), "sample_rows": self.screen.sample_rows}
        return hashlib.sha256(json.dumps(relevant, sort_keys=True).encode()).hexdigest()

    def as_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["root"] = str(self.root)
        out["source"] = str(self.source) if self.source else None
        return out


TOP_KEYS = [
    Key("title", str), Key("description", str), Key("recipes_dir", str), Key("build_dir", str),
    Key("formats", list, str, _formats), Key("dpi", int, check=_positive),
    Key("timeout", float, check=_positive, hint="seconds, e.g. timeout = 120"),
    Key("memory_mb", int, check=_positive), Key("max_output_kb", int, check=_positive),
    Key("max_pixels", int, check=_positive), Key("jobs", int, check=_not_negative),
    Key("drift_tolerance", int, check=_not_negative,
        hint="bits of the 256-bit perceptual digest that may differ for 'drifted'"),
    Key("strict", bool), Key("order", str, check=_one_of(ORDERS)), Key("contribute", str),
    Key("executor", str, check=_one_of(EXECUTORS)), Key("scheduler", str),
    Key("network", bool), Key("repeat", int, check=_positive),
    Key("audit", dict), Key("screen", dict),
]
AUDIT_KEYS = [Key("min_text_pt", float, check=_positive), Key("min_ppi", float, check=_positive),
              Key("cvd_severity", float,
                  check=lambda v: None if 0 <= v <= 1 else "must be between 0 and 1"),
              Key("min_delta_e", float, check=_positive), Key("errors", list, str)]
SCREEN_KEYS = [Key("small_cell", int, check=_not_negative),
               Key("sample_rows", int, check=_positive)]


def find_settings_file(start: Path) -> tuple[Path, Path | None, dict[str, Any]]:
    """Walk up from ``start`` to the catalogue root. Returns (root, file, raw table).

    A folder counts as the root when it holds ``figfolio.toml``, a ``pyproject.toml`` with a
    ``[tool.figfolio]`` table, or a ``recipes/`` folder (settings then all default).
    """
    start = start.resolve()
    for folder in [start, *start.parents]:
        own = folder / "figfolio.toml"
        if own.is_file():
            return folder, own, read_toml(own, SettingsError)
        py = folder / "pyproject.toml"
        if py.is_file():
            data = read_toml(py, SettingsError)
            table = data.get("tool", {}).get("figfolio")
            if table is not None:
                if not isinstance(table, dict):
                    raise SettingsError("must be a table", path=py, key="tool.figfolio")
                return folder, py, table
        if (folder / "recipes").is_dir():
            return folder, None, {}
    raise SettingsError(
        "no figfolio catalogue here or in any parent folder", path=start,
        hint="run figfolio inside a catalogue (a folder with figfolio.toml, or pyproject.toml "
             "with [tool.figfolio], or a recipes/ folder), or pass -C DIR")


def load_settings(start: Path) -> Settings:
    """Find and validate the settings of the catalogue containing ``start``."""
    root, path, table = find_settings_file(start)
    where = path or root
    prefix = "tool.figfolio." if path is not None and path.name == "pyproject.toml" else ""
    problems = validate(table, TOP_KEYS, path=where, error=SettingsError, prefix=prefix)
    audit_raw = table.get("audit", {}) if isinstance(table.get("audit"), dict) else {}
    screen_raw = table.get("screen", {}) if isinstance(table.get("screen"), dict) else {}
    problems += validate(audit_raw, AUDIT_KEYS, path=where, error=SettingsError,
                         prefix=prefix + "audit.")
    problems += validate(screen_raw, SCREEN_KEYS, path=where, error=SettingsError,
                         prefix=prefix + "screen.")
    if problems:
        if len(problems) == 1:
            raise problems[0]
        from figfolio.errors import ManyErrors
        raise ManyErrors(problems)
    plain = {k: v for k, v in table.items() if k not in ("audit", "screen")}
    if "formats" in plain:
        plain["formats"] = tuple(plain["formats"])
    if "timeout" in plain:
        plain["timeout"] = float(plain["timeout"])
    audit = {k: (tuple(v) if isinstance(v, list) else float(v) if k != "errors" else v)
             for k, v in audit_raw.items()}
    return Settings(root=root, source=path, audit=AuditSettings(**audit),
                    screen=ScreenSettings(**screen_raw), **plain)
