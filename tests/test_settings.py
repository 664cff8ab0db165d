"""Catalogue settings: found upward, validated with file and key in every message."""
from __future__ import annotations

import pytest

from figfolio.errors import FigfolioError, SettingsError
from figfolio.settings import load_settings


def test_defaults_from_recipes_folder(tmp_path):
    (tmp_path / "recipes").mkdir()
    s = load_settings(tmp_path)
    assert s.root == tmp_path.resolve() and s.formats == ("png", "svg", "pdf")
    assert s.site_path == tmp_path.resolve() / "build" / "site"


def test_pyproject_table_and_nested(tmp_path):
    (tmp_path / "pyproject.toml").write_text(
        '[tool.figfolio]\ndpi = 200\nformats = ["png"]\n[tool.figfolio.audit]\nmin_text_pt = 7\n')
    sub = tmp_path / "recipes" / "x"
    sub.mkdir(parents=True)
    s = load_settings(sub)  # found from a sub-folder
    assert s.dpi == 200 and s.formats == ("png",) and s.audit.min_text_pt == 7.0


@pytest.mark.parametrize("text,key", [
    ("dpi = 0\n", "dpi"), ('formats = ["gif"]\n', "formats"), ("jobs = -1\n", "jobs"),
    ("dpii = 3\n", "dpii"), ('[audit]\ncvd_severity = 2.0\n', "audit.cvd_severity"),
    ('order = "random"\n', "order"),
])
def test_bad_values(tmp_path, text, key):
    (tmp_path / "figfolio.toml").write_text(text)
    with pytest.raises(FigfolioError) as info:
        load_settings(tmp_path)
    errors = getattr(info.value, "errors", [info.value])
    assert any(e.key == key and "figfolio.toml" in e.render() for e in errors)


def test_no_catalogue(tmp_path):
    with pytest.raises(SettingsError, match="no figfolio catalogue"):
        load_settings(tmp_path)
