"""figfolio: a living, verified, searchable catalogue of figure recipes."""
from __future__ import annotations

__version__ = "0.1.0"
