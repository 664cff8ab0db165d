"""Fixtures for the demo-catalogue tests (helpers live in demo_support.py)."""
from __future__ import annotations

import pytest

from demo_support import RECIPES, load_recipe_module  # noqa: F401


@pytest.fixture
def recipe_module():
    return load_recipe_module
