"""Helpers for the demo-catalogue tests: import a recipe's figure.py without running main()."""
from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

RECIPES = Path(__file__).resolve().parents[2] / "recipes"


def load_recipe_module(slug: str, filename: str = "figure.py"):
    """Import ``recipes/<slug>/<filename>`` as a module (its ``__main__`` block does not run)."""
    path = RECIPES / slug / filename
    name = f"demo_{slug.replace('-', '_')}_{path.stem}"
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module

