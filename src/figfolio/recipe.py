"""Load and validate ``recipe.toml`` (PRODUCT.md §3) into a ``Recipe``.

Every problem names the file, the key and the fix, and all problems of a recipe are reported
together so a contributor fixes them in one pass. Paths are resolved and must stay inside the
recipe folder: a symlink or ``..`` that leaves it is refused, because the site publishes these
files and the runner copies them.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from figfolio.errors import FigfolioError, ManyErrors, RecipeError
from figfolio.schema import Key, read_toml, validate
from figfolio.settings import FORMATS, Settings

SLUG = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
ORIGINS = ("synthetic", "deidentified", "aggregate", "restricted")
SCRIPT_SUFFIXES = (".py", ".ipynb")
OUTPUT_SUFFIXES = (".png", ".svg", ".pdf")
PLACEHOLDER_ALT = {"", "todo", "tbd", "figure", "image", "plot", "chart", "alt", "alt text",
                   "describe the figure", "fixme"}


def _nonempty(value: str) -> str | None:
    return None if value.strip() else "must not be empty"


def _one_sentence(value: str) -> str | None:
    if not value.strip():
        return "must not be empty"
    if "\n" in value.strip():
        return "must be one sentence on one line"
    return None


def _formats(value: list[str]) -> str | None:
    bad = [v for v in value if v not in FORMATS]
    return f"has {bad}; allowed formats are {', '.join(FORMATS)}" if bad or not value else None


def _origin(value: str) -> str | None:
    return None if value in ORIGINS else f"must be one of {', '.join(ORIGINS)}"


def _positive(value: float) -> str | None:
    return None if value > 0 else "must be greater than 0"


def _nonempty_list(value: list) -> str | None:
    return None if value else "must not be an empty list"


KEYS = [
    Key("title", str, check=_nonempty), Key("summary", str, check=_one_sentence),
    Key("alt", str, check=_nonempty, hint="describe what the figure shows for a reader who "
                                          "cannot see it"),
    Key("tags", list, str), Key("methods", list, str), Key("authors", list, str),
    Key("script", str), Key("data", list, str), Key("timeout", float, check=_positive),
    Key("formats", list, str, _formats), Key("width_mm", float, check=_positive),
    Key("data_origin", str, check=_origin), Key("data_labels", dict),
    Key("missing_codes", dict), Key("screen", dict),
    Key("command", list, str, _nonempty_list,
        hint='the program and its arguments, e.g. command = ["Rscript", "figure.R"]'),
    Key("outputs", list, str, _nonempty_list,
        hint='the image files the command writes, e.g. outputs = ["figure.png"]'),
    Key("order", int, hint="a whole number; lower comes first in the catalogue order"),
]
REQUIRED = ("title", "summary", "alt")


@dataclass(frozen=True)
class Recipe:
    """A validated recipe. Paths are absolute and inside ``folder``."""

    slug: str
    folder: Path
    title: str
    summary: str
    alt: str
    script: Path
    data: tuple[Path, ...]
    tags: tuple[str, ...] = ()
    methods: tuple[str, ...] = ()
    authors: tuple[str, ...] = ()
    timeout: float = 120.0
    formats: tuple[str, ...] = FORMATS
    width_mm: float | None = None
    data_origin: str = "synthetic"
    data_labels: dict[str, dict[str, str]] = field(default_factory=dict)
    missing_codes: dict[str, list[Any]] = field(default_factory=dict)
    acknowledged: dict[str, str] = field(default_factory=dict)
    command: tuple[str, ...] = ()
    outputs: tuple[str, ...] = ()
    order: int | None = None

    @property
    def toml_path(self) -> Path:
        return self.folder / "recipe.toml"

    @property
    def readme(self) -> Path | None:
        path = self.folder / "README.md"
        return path if path.is_file() else None

    @property
    def fingerprints_path(self) -> Path:
        return self.folder / "fingerprints.json"

    @property
    def kind(self) -> str:
        """'python', 'notebook' or 'command': how the runner executes it."""
        if self.command:
            return "command"
        return "notebook" if self.script.suffix == ".ipynb" else "python"

    @property
    def publishes_data(self) -> bool:
        return self.data_origin != "restricted"

    def rel(self, path: Path) -> str:
        """Path relative to the recipe folder, with forward slashes."""
        return path.relative_to(self.folder).as_posix()


def inside(folder: Path, candidate: Path) -> bool:
    """True when ``candidate`` (after resolving links) lies inside ``folder``."""
    try:
        candidate.resolve().relative_to(folder.resolve())
    except ValueError:
        return False
    return True


def _resolve_file(folder: Path, name: str, toml: Path, key: str) -> Path:
    path = folder / name
    if Path(name).is_absolute() or ".." in Path(name).parts or not inside(folder, path):
        raise RecipeError(f"'{name}' resolves outside the recipe folder", path=toml, key=key,
                          hint="keep every file inside the recipe folder; no '..', absolute "
                               "paths or symlinks that point elsewhere")
    if path.is_symlink():
        raise RecipeError(f"'{name}' is a symbolic link", path=toml, key=key,
                          hint="replace the link with the file itself")
    if not path.is_file():
        raise RecipeError(f"'{name}' does not exist", path=toml, key=key,
                          hint="check the spelling, or add the file to the recipe folder")
    return path


def _default_script(folder: Path, toml: Path) -> Path:
    found = sorted(p for p in folder.iterdir() if p.suffix in SCRIPT_SUFFIXES and p.is_file())
    if len(found) == 1:
        return found[0]
    if not found:
        raise RecipeError("no script: the folder has no .py or .ipynb file", path=toml,
                          key="script", hint='add figure.py, or set script = "NAME"')
    names = ", ".join(p.name for p in found)
    raise RecipeError(f"several scripts ({names}) and no 'script' key", path=toml, key="script",
                      hint='say which one runs, e.g. script = "figure.py"')


def _default_data(folder: Path, toml: Path) -> list[Path]:
    data = folder / "data"
    if not data.is_dir():
        return []
    out = []
    for path in sorted(data.rglob("*")):
        if path.is_symlink():
            raise RecipeError(f"'{path.relative_to(folder)}' is a symbolic link", path=toml,
                              key="data", hint="replace the link with the file itself")
        if path.is_file() and not path.name.startswith(".") and "__pycache__" not in path.parts:
            out.append(path)
    return out


def _column_table(raw: dict[str, Any], toml: Path, key: str, value_type: type) -> list[RecipeError]:
    problems = []
    for column, value in raw.items():
        if ":" not in column:
            problems.append(RecipeError(
                f"entry '{column}' must be written \"FILE:COLUMN\"", path=toml, key=key,
                hint=f'e.g. "visits.csv:{column}"'))
        elif not isinstance(value, value_type):
            problems.append(RecipeError(f"entry '{column}' must be a {value_type.__name__}",
                                        path=toml, key=key))
    return problems


def load_recipe(folder: Path, settings: Settings) -> Recipe:
    """Validate ``folder/recipe.toml``; raise ``RecipeError`` or ``ManyErrors``."""
    toml = folder / "recipe.toml"
    slug = folder.name
    if not SLUG.match(slug):
        raise RecipeError(f"folder name '{slug}' is not a valid slug", path=folder,
                          hint="use lowercase letters, digits and single hyphens, "
                               "e.g. 'forest-plot-2'")
    if not toml.is_file():
        raise RecipeError("recipe.toml is missing", path=toml,
                          hint=f"create it, or start over with 'figfolio new {slug}'")
    raw = read_toml(toml, RecipeError)
    problems: list[FigfolioError] = validate(raw, KEYS, path=toml, error=RecipeError)
    for key in REQUIRED:
        if key not in raw:
            problems.append(RecipeError("required key is missing", path=toml, key=key,
                                        hint=f'add {key} = "..."'))
    screen = raw.get("screen", {})
    acknowledged: dict[str, str] = {}
    if isinstance(screen, dict):
        for name in screen:
            if name != "acknowledged":
                problems.append(RecipeError("unknown key", path=toml, key=f"screen.{name}",
                                            hint="the only key under [screen] is 'acknowledged'"))
        ack = screen.get("acknowledged", {})
        if isinstance(ack, dict):
            problems += _column_table(ack, toml, "screen.acknowledged", str)
            for column, reason in ack.items():
                if isinstance(reason, str) and not reason.strip():
                    problems.append(RecipeError(f"entry '{column}' needs a reason", path=toml,
                                                key="screen.acknowledged",
                                                hint="say why the column may be published"))
            acknowledged = {k: v for k, v in ack.items() if isinstance(v, str)}
    for key, kind in (("data_labels", dict), ("missing_codes", list)):
        if isinstance(raw.get(key), dict):
            problems += _column_table(raw[key], toml, key, kind)
    if "outputs" in raw and "command" not in raw:
        problems.append(RecipeError("'outputs' only goes with 'command'", path=toml,
                                    key="outputs", hint="remove it, or add command = [...]"))
    if "command" in raw and isinstance(raw.get("command"), list) and "outputs" not in raw:
        problems.append(RecipeError("a command recipe must list its outputs", path=toml,
                                    key="outputs", hint='e.g. outputs = ["figure.png"]'))
    for name in raw.get("outputs", []) if isinstance(raw.get("outputs"), list) else []:
        if not isinstance(name, str):
            continue
        if Path(name).suffix.lower() not in OUTPUT_SUFFIXES:
            problems.append(RecipeError(f"output '{name}' is not PNG, SVG or PDF", path=toml,
                                        key="outputs"))
        if Path(name).is_absolute() or ".." in Path(name).parts:
            problems.append(RecipeError(f"output '{name}' lies outside the recipe folder",
                                        path=toml, key="outputs",
                                        hint="name a file the command writes in its own folder"))
    if problems:
        raise problems[0] if len(problems) == 1 else ManyErrors(problems)

    script_problems: list[FigfolioError] = []
    script = folder / "figure.py"
    try:
        if "script" in raw:
            script = _resolve_file(folder, raw["script"], toml, "script")
        elif "command" in raw:
            script = _command_script(folder, raw["command"], toml)
        else:
            script = _default_script(folder, toml)
    except RecipeError as exc:
        script_problems.append(exc)
    data: list[Path] = []
    try:
        if "data" in raw:
            data = [_resolve_file(folder, name, toml, "data") for name in raw["data"]]
        else:
            data = _default_data(folder, toml)
    except RecipeError as exc:
        script_problems.append(exc)
    if script_problems:
        raise script_problems[0] if len(script_problems) == 1 else ManyErrors(script_problems)

    return Recipe(
        slug=slug, folder=folder.resolve(), title=raw["title"].strip(),
        summary=raw["summary"].strip(), alt=raw["alt"].strip(), script=script.resolve(),
        data=tuple(p.resolve() for p in data), tags=tuple(raw.get("tags", ())),
        methods=tuple(raw.get("methods", ())), authors=tuple(raw.get("authors", ())),
        timeout=float(raw.get("timeout", settings.timeout)),
        formats=tuple(raw.get("formats", settings.formats)),
        width_mm=float(raw["width_mm"]) if "width_mm" in raw else None,
        data_origin=raw.get("data_origin", "synthetic"),
        data_labels={k: {str(a): str(b) for a, b in v.items()}
                     for k, v in raw.get("data_labels", {}).items()},
        missing_codes=dict(raw.get("missing_codes", {})), acknowledged=acknowledged,
        command=tuple(raw.get("command", ())), outputs=tuple(raw.get("outputs", ())),
        order=raw.get("order"),
    )


def _command_script(folder: Path, command: list[str], toml: Path) -> Path:
    """The file a command recipe runs: the first argument that names a file in the folder."""
    for arg in command[1:]:
        candidate = folder / arg
        if not Path(arg).is_absolute() and ".." not in Path(arg).parts and candidate.is_file():
            return _resolve_file(folder, arg, toml, "command")
    raise RecipeError("the command names no script file in the recipe folder", path=toml,
                      key="command", hint='name the script, e.g. command = ["Rscript", '
                                          '"figure.R"], or set script = "figure.R"')


def recipe_folders(settings: Settings) -> list[Path]:
    """Every folder under ``recipes/`` that is meant to be a recipe, sorted by name."""
    base = settings.recipes_path
    if not base.is_dir():
        raise RecipeError("the recipes folder does not exist", path=base,
                          hint="create it, or set recipes_dir in the settings")
    return sorted(p for p in base.iterdir() if p.is_dir() and not p.name.startswith((".", "_")))


def discover(settings: Settings, slugs: list[str] | None = None
             ) -> tuple[list[Recipe], list[FigfolioError]]:
    """Load the chosen recipes (all when ``slugs`` is empty). Returns (good, problems)."""
    folders = recipe_folders(settings)
    if slugs:
        by_name = {p.name: p for p in folders}
        unknown = [s for s in slugs if s not in by_name]
        if unknown:
            from figfolio.errors import UsageError
            raise UsageError(f"no recipe named {', '.join(unknown)}", path=settings.recipes_path,
                             hint="see the folder names under recipes/")
        folders = [by_name[s] for s in slugs]
    good: list[Recipe] = []
    problems: list[FigfolioError] = []
    for folder in folders:
        try:
            good.append(load_recipe(folder, settings))
        except ManyErrors as many:
            problems.extend(many.errors)
        except FigfolioError as exc:
            problems.append(exc)
    return good, problems
