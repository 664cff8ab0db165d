"""Prepare matplotlib for a recipe, then capture what it drew: figures, written images, imports.

Used by ``runner.run_job`` in the child process and, for notebook recipes, inside the Jupyter
kernel (``kernel_setup`` / ``kernel_finish``), so a notebook gets exactly the same treatment as
a script. Why a separate module: the kernel imports it, and it must stay light (no executor).
"""
from __future__ import annotations

import builtins
import contextlib
import functools
import json
import os
import sys
from pathlib import Path
from typing import Any, Callable

IMAGE_SUFFIXES = (".png", ".svg", ".pdf")
SKIP_PARTS = ("__pycache__", ".ipynb_checkpoints")
# Fixed vector metadata: no dates, so the bytes of SVG and PDF are the same on every run.
SAVE_METADATA = {"svg": {"Date": None}, "pdf": {"CreationDate": None, "ModDate": None}}
SVG_SALT = "figfolio"


class CanvasTooLarge(Exception):
    """A figure would be rendered at an absurd pixel size; refused before any memory is spent."""


# True in a warm worker that prepared matplotlib (keep_prepared) and ran nothing since.
_prepared = False


def prepare_matplotlib(max_pixels: int) -> None:
    """Put matplotlib and Pillow in a known state before the recipe runs.

    Why each step: Agg is the one backend that renders identically everywhere; rcdefaults()
    undoes any style a previous recipe or a matplotlibrc set; the SVG hash salt fixes the ids
    SVG output would otherwise draw at random; show() must not block or warn on a headless
    builder. Nothing is seeded: an unseeded recipe must show up as unstable.
    """
    global _prepared
    if not _prepared:  # a fork of a worker that prepared itself starts in this state already
        import matplotlib

        matplotlib.use("Agg", force=True)
        matplotlib.rcdefaults()
        import matplotlib.pyplot as plt

        plt.close("all")
        matplotlib.rcParams["svg.hashsalt"] = SVG_SALT
        plt.show = _no_show
    _prepared = False  # good for one recipe: whatever runs next may change the state
    _guard_canvas(max_pixels)
    try:
        from PIL import Image
        Image.MAX_IMAGE_PIXELS = max_pixels
    except ImportError:  # Pillow is a dependency, but the guard must not depend on it
        pass


def keep_prepared(max_pixels: int) -> None:
    """Prepare matplotlib now, in the warm worker, so that its forks skip the work.

    Why: ``rcdefaults()`` and closing figures took each forked recipe 3-5 ms, to reach the
    state its parent was already in. The worker runs no recipe code after this, so a fork's
    first ``prepare_matplotlib`` can trust it; that call uses the mark up, so a second recipe
    in the same process (the spawn mode, a kernel) would prepare in full again.
    """
    global _prepared
    _prepared = False
    prepare_matplotlib(max_pixels)
    _prepared = True


def _no_show(*args: Any, **kwargs: Any) -> None:
    """plt.show() replacement: figures stay open so figfolio can save them afterwards."""


def _save_dpi(canvas: Any, dpi: Any) -> float:
    """The dpi print_figure will really use (mirrors matplotlib's own defaulting)."""
    import matplotlib

    if dpi is None:
        dpi = matplotlib.rcParams["savefig.dpi"]
    if dpi == "figure":
        dpi = getattr(canvas.figure, "_original_dpi", canvas.figure.dpi)
    return float(dpi)


def _guard_canvas(max_pixels: int) -> None:
    """Wrap print_figure so an absurd canvas fails with a reason instead of eating memory."""
    from matplotlib.backend_bases import FigureCanvasBase

    original = getattr(FigureCanvasBase, "_figfolio_original", FigureCanvasBase.print_figure)

    def print_figure(self: Any, filename: Any, dpi: Any = None, *args: Any, **kwargs: Any
                     ) -> Any:
        used = _save_dpi(self, dpi)
        width, height = (float(v) * used for v in self.figure.get_size_inches())
        if width * height > max_pixels:
            number = getattr(self.figure, "number", None)
            which = f"figure {number}" if number is not None else "a figure"
            raise CanvasTooLarge(
                f"{which} would be {width:,.0f} x {height:,.0f} px at {used:g} dpi "
                f"({width * height:,.0f} px, more than max_pixels = {max_pixels:,}): "
                f"make the figure smaller or lower its dpi")
        return original(self, filename, dpi, *args, **kwargs)

    FigureCanvasBase._figfolio_original = original  # type: ignore[attr-defined]
    FigureCanvasBase.print_figure = print_figure  # type: ignore[method-assign]


def _tick_recorder() -> Any:
    """audit_facts.TickRecorder, or a do-nothing context when the audit is unavailable (then
    ``_figure_facts`` has nothing to collect either)."""
    try:
        from figfolio.audit_facts import TickRecorder
    except ImportError:
        return contextlib.nullcontext()
    return TickRecorder()


def _figure_facts(fig: Any, number: int, warnings: list[str], drawn: Any = None
                  ) -> dict[str, Any] | None:
    """audit.collect_facts(fig) when the audit module provides it; its failure is not ours."""
    try:
        from figfolio.audit import collect_facts  # type: ignore[attr-defined]
    except (ImportError, AttributeError):
        return None
    try:
        facts = dict(collect_facts(fig, drawn))
    except Exception as exc:  # a bug in the audit must not break the recipe
        warnings.append(f"figure {number}: audit facts unavailable ({type(exc).__name__}: {exc})")
        return None
    facts["figure"] = number
    return facts


def _save_atomic(fig: Any, path: Path, fmt: str, dpi: int) -> None:
    """savefig to a temporary name, then rename: a reader never sees half a file."""
    tmp = path.with_name(f".tmp-{path.name}")
    fig.savefig(tmp, format=fmt, dpi=dpi, metadata=SAVE_METADATA.get(fmt))
    os.replace(tmp, path)


def save_open_figures(out: Path, formats: tuple[str, ...] | list[str], dpi: int
                      ) -> tuple[list[dict[str, Any]], list[dict[str, Any]], list[str]]:
    """Save every open figure as ``figure-<n>.<fmt>``; n counts from 1 in figure-number order.

    Returns (outputs as dicts, facts per figure, warnings). Facts come from the live
    artists, not the file, and are collected after the saves: the first save's draw placed
    the ticks, which the facts then read instead of computing them again (see
    ``audit_facts.TickRecorder``).
    """
    import matplotlib.pyplot as plt

    out.mkdir(parents=True, exist_ok=True)
    outputs: list[dict[str, Any]] = []
    facts: list[dict[str, Any]] = []
    warnings: list[str] = []
    for n, number in enumerate(sorted(plt.get_fignums()), start=1):
        fig = plt.figure(number)
        drawn = _tick_recorder()
        for k, fmt in enumerate(formats):
            path = out / f"figure-{n}.{fmt}"
            with drawn if k == 0 else contextlib.nullcontext():
                _save_atomic(fig, path, fmt, dpi)
            outputs.append({"name": path.name, "format": fmt, "figure": n, "path": str(path)})
        found = _figure_facts(fig, n, warnings, drawn)
        if found is not None:
            facts.append(found)
    return outputs, facts, warnings


def snapshot(folder: Path | str) -> dict[str, tuple[int, int]]:
    """(size, mtime_ns) of every file under ``folder`` by relative path; {} if it is absent."""
    root = Path(folder)
    found: dict[str, tuple[int, int]] = {}
    if not root.is_dir():
        return found
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = [d for d in dirnames if d not in SKIP_PARTS]
        for name in filenames:
            path = Path(dirpath) / name
            try:
                info = path.lstat()
            except OSError:
                continue
            found[path.relative_to(root).as_posix()] = (info.st_size, info.st_mtime_ns)
    return found


def changed_files(before: dict[str, tuple[int, int]], after: dict[str, tuple[int, int]]
                  ) -> list[str]:
    """Relative paths that are new or whose size or mtime changed, sorted."""
    return sorted(rel for rel, stat in after.items() if before.get(rel) != stat)


def output_name(rel: str) -> str:
    """A written file's output name: its relative path with '/' replaced by '--'."""
    return rel.replace("/", "--")


def copy_output(src: Path, out: Path, rel: str) -> dict[str, Any]:
    """Copy one file the recipe wrote into ``out`` (atomic) and describe it as an Output dict."""
    out.mkdir(parents=True, exist_ok=True)
    target = out / output_name(rel)
    tmp = target.with_name(f".tmp-{target.name}")
    tmp.write_bytes(src.read_bytes())
    os.replace(tmp, target)
    return {"name": target.name, "format": src.suffix.lower().lstrip("."), "figure": None,
            "path": str(target)}


def collect_written(recipe_dir: Path, before: dict[str, tuple[int, int]], out: Path
                    ) -> list[dict[str, Any]]:
    """Image files the script wrote itself under its folder that were not there before."""
    after = snapshot(recipe_dir)
    return [copy_output(recipe_dir / rel, out, rel) for rel in sorted(after)
            if rel not in before and Path(rel).suffix.lower() in IMAGE_SUFFIXES]


class ImportRecorder:
    """Remember the top-level packages that code inside the recipe folder imports.

    Why not only a diff of sys.modules: the warm worker has already imported numpy, pandas
    and matplotlib, so the diff would miss exactly the packages every recipe uses.
    """

    def __init__(self, recipe_dir: Path, main_too: bool = False) -> None:
        self.prefix = str(recipe_dir.resolve()) + os.sep
        self.main_too = main_too  # in a kernel, cells run as __main__ with no __file__
        self.names: set[str] = set()
        self._original: Callable[..., Any] | None = None

    def install(self) -> None:
        self._original = builtins.__import__
        original = self._original
        recorder = self

        def recording_import(name: str, globals: Any = None, locals: Any = None,
                             fromlist: Any = (), level: int = 0) -> Any:
            if level == 0 and globals is not None and recorder._from_recipe(globals):
                recorder.names.add(name.partition(".")[0])
            return original(name, globals, locals, fromlist, level)

        builtins.__import__ = recording_import

    def _from_recipe(self, globals: Any) -> bool:
        try:
            origin = globals.get("__file__") or ""
            name = globals.get("__name__")
        except AttributeError:
            return False
        return str(origin).startswith(self.prefix) or (self.main_too and name == "__main__"
                                                       and not origin)

    def remove(self) -> None:
        if self._original is not None:
            builtins.__import__ = self._original
            self._original = None


OWNERS_CACHE_ENV = "FIGFOLIO_OWNERS_CACHE"


@functools.lru_cache(maxsize=1)
def distribution_owners() -> dict[str, list[str]]:
    """Top-level module -> distributions. Cached: scanning every dist-info takes 0.2-0.3 s, so
    the warm worker computes it once and every forked child inherits it; and when the builder
    names a file in $FIGFOLIO_OWNERS_CACHE, the scan is kept there for the next worker, valid
    while no folder on sys.path changed (installing or removing a package changes the
    modification time of its site-packages folder)."""
    from importlib import metadata

    cache = os.environ.get(OWNERS_CACHE_ENV)
    key = _path_state()
    if cache:
        try:
            saved = json.loads(Path(cache).read_text(encoding="utf-8"))
            if saved.get("key") == key and isinstance(saved.get("owners"), dict):
                return {str(k): list(v) for k, v in saved["owners"].items()}
        except (OSError, ValueError, AttributeError, TypeError):
            pass
    try:
        owners = dict(metadata.packages_distributions())
    except Exception:  # a broken dist-info must not break the run
        return {}
    if cache:
        _save_owners(Path(cache), key, owners)
    return owners


def _path_state() -> list[list[Any]]:
    """What the owner table depends on: per sys.path folder, the modification time of a
    ``*-packages`` folder (it changes when a package is installed or removed), or for any
    other folder (the working directory, a source tree) the names of its ``.dist-info`` and
    ``.egg-info`` entries, since its modification time changes with every file written."""
    state: list[list[Any]] = [[sys.executable, sys.prefix]]
    for entry in sys.path:
        folder = entry or "."
        try:
            if folder.endswith(("site-packages", "dist-packages")):
                state.append([entry, os.stat(folder).st_mtime_ns])
            elif os.path.isdir(folder):
                state.append([entry, sorted(n for n in os.listdir(folder)
                                            if n.endswith((".dist-info", ".egg-info")))])
            else:
                state.append([entry, None])
        except OSError:
            state.append([entry, None])
    return state


def _save_owners(path: Path, key: list[list[Any]], owners: dict[str, list[str]]) -> None:
    """Write the owner table atomically; a read-only or missing folder just means no cache."""
    tmp = path.with_name(f".tmp-{path.name}.{os.getpid()}")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text(json.dumps({"key": key, "owners": owners}), encoding="utf-8")
        os.replace(tmp, path)
    except OSError:
        try:
            tmp.unlink()
        except OSError:
            pass


# Versions of distributions whose modules the warm worker had already imported before it
# forked (see remember_loaded_versions): a child runs exactly that loaded code, so the version
# read then is the one that ran, and looking it up again cost each child about 7 ms.
_LOADED_VERSIONS: dict[str, str] = {}


def package_versions(names: set[str]) -> dict[str, str]:
    """Map top-level module names to {distribution: version}; stdlib names map to nothing."""
    from importlib import metadata

    owners = distribution_owners()
    versions: dict[str, str] = {}
    for name in sorted(names - {"figfolio"}):  # figfolio's version is recorded on its own
        for dist in owners.get(name, []):
            known = _LOADED_VERSIONS.get(dist)
            if known is not None:
                versions[dist] = known
                continue
            try:
                versions[dist] = metadata.version(dist)
            except metadata.PackageNotFoundError:
                continue
    return dict(sorted(versions.items()))


def remember_loaded_versions() -> None:
    """In the warm worker, before any fork: note the versions of the distributions whose
    modules are loaded now. Modules imported later (in a child) are looked up on disk."""
    _LOADED_VERSIONS.update(package_versions(top_level(set(sys.modules))))


def top_level(modules: set[str] | list[str]) -> set[str]:
    """Top-level package names of a set of module names, without private ones."""
    return {m.partition(".")[0] for m in modules if not m.startswith("_")}


# --- used inside a Jupyter kernel by notebook recipes -------------------------------------

def kernel_setup(max_pixels: int, recipe_dir: str) -> tuple[set[str], ImportRecorder]:
    """First injected cell: same matplotlib state as a script; start watching imports."""
    prepare_matplotlib(max_pixels)
    recorder = ImportRecorder(Path(recipe_dir), main_too=True)
    recorder.install()
    return set(sys.modules), recorder


def kernel_finish(out: str, formats: list[str], dpi: int, result_path: str,
                  state: tuple[set[str], ImportRecorder]) -> None:
    """Last injected cell: save still-open figures and write what the runner needs as JSON."""
    modules_before, recorder = state
    recorder.remove()
    outputs, facts, warnings = save_open_figures(Path(out), formats, dpi)
    new = recorder.names | top_level(set(sys.modules) - modules_before) | {"matplotlib"}
    record = {"outputs": outputs, "facts": facts, "warnings": warnings,
              "packages": package_versions(new)}
    tmp = Path(result_path).with_name(f".tmp-{Path(result_path).name}")
    tmp.write_text(json.dumps(record, default=plain), encoding="utf-8")
    os.replace(tmp, result_path)


def plain(value: Any) -> Any:
    """json.dumps fallback: numpy scalars and arrays become Python numbers and lists."""
    if hasattr(value, "tolist"):
        return value.tolist()
    if hasattr(value, "item"):
        return value.item()
    if isinstance(value, (set, tuple, Path)):
        return list(value) if not isinstance(value, Path) else str(value)
    return str(value)
