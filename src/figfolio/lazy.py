"""Modules imported on first use.

Why: a no-op build must answer in milliseconds, and importing numpy, scipy and Pillow costs a
few hundred of them. Modules that need the heavy stack only when they actually touch pixels
hold a ``lazy("numpy")`` stand-in that imports the real module at the first attribute access.
"""
from __future__ import annotations

import importlib
from types import ModuleType
from typing import Any


class LazyModule:
    """Stands in for a module until an attribute is first read."""

    def __init__(self, name: str) -> None:
        self._name = name
        self._module: ModuleType | None = None

    def __getattr__(self, attr: str) -> Any:
        if self._module is None:
            self._module = importlib.import_module(self._name)
        return getattr(self._module, attr)


def lazy(name: str) -> Any:
    return LazyModule(name)
