"""Every error a user can cause, one class each, with the exit status the CLI returns.

Why a hierarchy: the CLI catches ``FigfolioError`` at one place and prints ``message`` and
``hint`` without a traceback. Anything that is *not* a ``FigfolioError`` is a bug in figfolio
and is shown as such. Exit statuses follow PRODUCT.md §4: 1 for a verdict that fails, 2 for a
usage, settings or metadata error.
"""
from __future__ import annotations

from pathlib import Path


class FigfolioError(Exception):
    """Base of every user-facing error. ``exit_code`` is what the process exits with."""

    exit_code = 2

    def __init__(self, message: str, *, path: Path | str | None = None, key: str | None = None,
                 hint: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.path = str(path) if path is not None else None
        self.key = key
        self.hint = hint

    def render(self) -> str:
        """One readable block: where, which key, what is wrong, how to fix it."""
        where = self.path or ""
        if self.key:
            where = f"{where} [{self.key}]" if where else f"[{self.key}]"
        head = f"{where}: {self.message}" if where else self.message
        return f"error: {head}" + (f"\n  fix: {self.hint}" if self.hint else "")


class UsageError(FigfolioError):
    """The command line itself is wrong (unknown slug, bad option value)."""


class SettingsError(FigfolioError):
    """``figfolio.toml`` or ``[tool.figfolio]`` is missing, malformed or has a bad value."""


class RecipeError(FigfolioError):
    """A ``recipe.toml`` is malformed, or names a file that does not exist or lies outside."""


class ManyErrors(FigfolioError):
    """Several independent user errors found in one pass (lint reports them all at once)."""

    def __init__(self, errors: list[FigfolioError]) -> None:
        super().__init__(f"{len(errors)} problem(s) found")
        self.errors = errors
        self.exit_code = max((e.exit_code for e in errors), default=2)

    def render(self) -> str:
        return "\n".join(e.render() for e in self.errors)


class DataScreenError(FigfolioError):
    """The data screen found likely identifiers that the recipe has not acknowledged."""


class AuditError(FigfolioError):
    """An audit finding that the catalogue's settings turn into an error."""

    exit_code = 1


class SiteError(FigfolioError):
    """The site cannot be written: a bad file name in the view, a template error, a disk error."""


class BuildLockedError(FigfolioError):
    """Another figfolio process holds the catalogue's build lock."""

    exit_code = 2


class ProgramMissingError(FigfolioError):
    """A command recipe names a program that is not installed on this machine."""


class ExecutorError(FigfolioError):
    """The chosen executor cannot start (e.g. no Dask scheduler at the given address)."""
