"""recipe.toml loading (PRODUCT.md §3): every bad input is a figfolio error naming file and key."""
from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings as hsettings, strategies as st

from figfolio.errors import FigfolioError, ManyErrors, RecipeError
from figfolio.recipe import discover, load_recipe
from figfolio.settings import Settings

GOOD = '''title = "Weekly visits"
summary = "Small multiples of weekly visits."
alt = "Grid of line charts, one per district, each rising slowly."
tags = ["small multiples"]
'''


def make(tmp_path: Path, toml: str, slug: str = "weekly-visits", files: dict | None = None
         ) -> Path:
    folder = tmp_path / "recipes" / slug
    folder.mkdir(parents=True)
    (folder / "recipe.toml").write_text(toml, encoding="utf-8")
    for name, text in (files if files is not None else {"figure.py": "print(1)\n"}).items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    return folder


def settings_for(tmp_path: Path) -> Settings:
    return Settings(root=tmp_path)


def messages(exc: FigfolioError) -> list[FigfolioError]:
    return exc.errors if isinstance(exc, ManyErrors) else [exc]


def test_good_recipe_defaults(tmp_path):
    folder = make(tmp_path, GOOD, files={"figure.py": "", "data/a.csv": "x\n1\n",
                                         "data/b.tsv": "y\n2\n"})
    r = load_recipe(folder, settings_for(tmp_path))
    assert r.script.name == "figure.py"
    assert [p.name for p in r.data] == ["a.csv", "b.tsv"]  # default: every file under data/
    assert r.formats == ("png", "svg", "pdf") and r.timeout == 120.0
    assert r.kind == "python" and r.data_origin == "synthetic"


@pytest.mark.parametrize("toml,key,words", [
    (GOOD.replace('title = "Weekly visits"\n', ""), "title", "missing"),
    (GOOD + "colour = 3\n", "colour", "unknown"),
    (GOOD + "timeout = \"soon\"\n", "timeout", "number"),
    (GOOD + "tags2 = []\n", "tags2", "unknown"),
    (GOOD + 'formats = ["png", "gif"]\n', "formats", "gif"),
    (GOOD + 'data_origin = "secret"\n', "data_origin", "one of"),
    (GOOD + 'script = "nothere.py"\n', "script", "does not exist"),
    (GOOD + 'data = ["../../etc/passwd"]\n', "data", "outside"),
    (GOOD + 'summary2 = "x"\n', "summary2", "summary"),
])
def test_bad_keys_name_file_and_key(tmp_path, toml, key, words):
    folder = make(tmp_path, toml)
    with pytest.raises(FigfolioError) as info:
        load_recipe(folder, settings_for(tmp_path))
    errors = messages(info.value)
    hit = [e for e in errors if e.key == key]
    assert hit, [e.render() for e in errors]
    text = hit[0].render()
    assert "recipe.toml" in text and words in text.lower()


def test_symlink_out_of_folder_is_refused(tmp_path):
    secret = tmp_path / "secret.csv"
    secret.write_text("a\n1\n")
    folder = make(tmp_path, GOOD)
    (folder / "data").mkdir()
    os.symlink(secret, folder / "data" / "leak.csv")
    with pytest.raises(RecipeError) as info:
        load_recipe(folder, settings_for(tmp_path))
    assert "symbolic link" in info.value.message


def test_bad_slug_and_toml_syntax(tmp_path):
    folder = make(tmp_path, GOOD, slug="Bad_Slug")
    with pytest.raises(RecipeError, match="slug"):
        load_recipe(folder, settings_for(tmp_path))
    folder = make(tmp_path, 'title = "unclosed\n', slug="broken-toml")
    with pytest.raises(RecipeError, match="not valid TOML"):
        load_recipe(folder, settings_for(tmp_path))


def test_two_scripts_need_script_key(tmp_path):
    folder = make(tmp_path, GOOD, files={"a.py": "", "b.ipynb": "{}"})
    with pytest.raises(RecipeError) as info:
        load_recipe(folder, settings_for(tmp_path))
    assert info.value.key == "script" and "script =" in info.value.hint


def test_command_recipe_needs_outputs(tmp_path):
    folder = make(tmp_path, GOOD + 'command = ["Rscript", "figure.R"]\n',
                  files={"figure.R": "plot(1)\n"})
    with pytest.raises(RecipeError) as info:
        load_recipe(folder, settings_for(tmp_path))
    assert info.value.key == "outputs"
    folder2 = make(tmp_path, GOOD + 'command = ["Rscript", "figure.R"]\noutputs = ["f.png"]\n',
                   slug="r-ok", files={"figure.R": "plot(1)\n"})
    r = load_recipe(folder2, settings_for(tmp_path))
    assert r.kind == "command" and r.script.name == "figure.R"


def test_discover_reports_bad_and_keeps_good(tmp_path):
    make(tmp_path, GOOD, slug="good-one")
    make(tmp_path, "title = 1\n", slug="bad-one")
    good, problems = discover(settings_for(tmp_path))
    assert [r.slug for r in good] == ["good-one"]
    assert problems and all("bad-one" in p.render() for p in problems)


# Property: whatever bytes a contributor puts in recipe.toml, the loader raises only figfolio's
# own errors (issue 5: "no input raises anything but the project's own error").
toml_values = st.recursive(
    st.one_of(st.text(max_size=20), st.integers(), st.floats(allow_nan=False), st.booleans()),
    lambda inner: st.one_of(st.lists(inner, max_size=3),
                            st.dictionaries(st.text(min_size=1, max_size=8), inner, max_size=3)),
    max_leaves=6)
keys = st.sampled_from(["title", "summary", "alt", "tags", "methods", "script", "data", "timeout",
                        "formats", "width_mm", "data_origin", "data_labels", "missing_codes",
                        "screen", "command", "outputs", "order", "other"])


@hsettings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(table=st.dictionaries(keys, toml_values, max_size=8))
def test_loader_never_raises_foreign_errors(tmp_path_factory, table):
    import tomli_w

    root = tmp_path_factory.mktemp("cat")
    folder = root / "recipes" / "prop"
    folder.mkdir(parents=True)
    (folder / "figure.py").write_text("")
    try:
        text = tomli_w.dumps(table)
    except Exception:
        return
    (folder / "recipe.toml").write_text(text)
    try:
        load_recipe(folder, Settings(root=root))
    except FigfolioError as exc:
        assert exc.render()


@hsettings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(raw=st.binary(max_size=200))
def test_loader_survives_arbitrary_bytes(tmp_path_factory, raw):
    root = tmp_path_factory.mktemp("cat")
    folder = root / "recipes" / "bytes"
    folder.mkdir(parents=True)
    (folder / "figure.py").write_text("")
    (folder / "recipe.toml").write_bytes(raw)
    try:
        load_recipe(folder, Settings(root=root))
    except FigfolioError:
        pass
