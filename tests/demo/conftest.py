"""Fixtures for the demo-catalogue tests (helpers live in demo_support.py)."""
from __future__ import annotations

import pytest

from demo_support import RECIPES, load_recipe_module  # noqa: F401


@pytest.fixture
def recipe_module():
    return load_recipe_module


@pytest.fixture(autouse=True)
def _restore_matplotlib_settings():
    """Recipes may set rcParams at import; keep that from leaking into other tests."""
    import matplotlib
    import matplotlib.pyplot as plt

    saved = matplotlib.rcParams.copy()
    yield
    plt.close("all")
    matplotlib.rcParams.update(saved)
