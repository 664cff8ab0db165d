"""Read audit facts from an open matplotlib figure (``collect_facts``), in the recipe's process.

Why from the objects and not from pixels: the artists know which colours separate data (a
line's colour, a bar's fill, a colour map's name), the size in points of every text, and which
axes are colour bars. Pixels only know anti-aliased blends. The runner calls ``collect_facts``
while the figure is still open, right after its first save; the result is plain JSON data that travels back
to the builder with the run result, where ``figfolio.audit`` judges it.

Contract: never raises (a failing step adds to ``"error"`` and the other steps still run), and
stays cheap (no draw; a typical figure takes a few milliseconds).

Shape (version 1)::

    {"version": 1, "number": 1,
     "canvas": {"width_in": 6.4, "height_in": 4.8, "dpi": 150.0},
     "colours": [{"hex": "#d62728", "kinds": ["line"], "label": "treated", "count": 2,
                  "role": "line"}],
     "colormaps": [{"name": "viridis", "kinds": ["QuadMesh"], "count": 1, "qualitative": false,
                    "samples": ["#440154", ...7], "profile": [33 colours, 0..1]}],
     "texts": [{"role": "xtick", "size_pt": 10.0, "text": "0, 5, 10", "count": 3, "axes": 1}],
     "axes": [{"index": 1, "kind": "data", "has_xlabel": true, "has_ylabel": false,
               "missing_xlabel": false, "missing_ylabel": true, "title": "..."}],
     "elapsed_ms": 3.1, "error": "only when a step failed"}
"""
from __future__ import annotations

import time
from typing import Any, Iterable

import numpy as np

from figfolio.colour import rgb_to_hex

SNIPPET = 40          # characters of text kept per text element
PROFILE_SAMPLES = 33  # colour-map samples kept for the lightness check
QUALITATIVE_MAX = 32  # a listed colour map with at most this many entries is categorical
NONE_STYLES = {"None", "none", "", " "}


def collect_facts(fig: Any, drawn: "TickRecorder | None" = None) -> dict[str, Any]:
    """Facts about one open figure for the audit; partial facts plus ``error`` on trouble.

    ``drawn``: a TickRecorder that was active while the figure was last saved; the tick
    labels are then read from the ticks that draw showed instead of being computed again.
    """
    start = time.perf_counter()
    if drawn is not None:
        for axis, ticks in drawn.ticks.values():
            _TICK_MEMO[id(axis)] = (axis, _drawn_labels(axis, ticks))
    facts: dict[str, Any] = {"version": 1, "number": getattr(fig, "number", None),
                             "canvas": {}, "colours": [], "colormaps": [], "texts": [],
                             "axes": []}
    problems: list[str] = []
    try:
        for step in (_figure_size, _colours, _texts, _axes):
            try:
                step(fig, facts)
            except Exception as exc:  # noqa: BLE001 -- the contract is "never raise"
                problems.append(f"{step.__name__.strip('_')}: {type(exc).__name__}: {exc}")
    finally:
        _TICK_MEMO.clear()
    facts["elapsed_ms"] = round((time.perf_counter() - start) * 1000, 2)
    if problems:
        facts["error"] = "; ".join(problems)
    return facts


def _figure_size(fig: Any, facts: dict[str, Any]) -> None:
    width, height = fig.get_size_inches()
    facts["canvas"] = {"width_in": round(float(width), 4), "height_in": round(float(height), 4),
                       "dpi": float(fig.dpi)}


def all_axes(fig: Any) -> list[Any]:
    """Axes of the figure and of its sub-figures, in creation order."""
    out = list(fig.axes)
    for sub in getattr(fig, "subfigs", []) or []:
        out.extend(a for a in all_axes(sub) if a not in out)
    return out


def is_colorbar(ax: Any) -> bool:
    """Colour-bar axes repeat the colour map of the data they explain; skip their colours."""
    return getattr(ax, "_colorbar", None) is not None or ax.get_label() == "<colorbar>"


# ---------------------------------------------------------------- colours

class _Palette:
    """Accumulates data colours (by hex) and colour maps (by name) across a figure."""

    def __init__(self) -> None:
        self.colours: dict[str, dict[str, Any]] = {}
        self.maps: dict[str, dict[str, Any]] = {}

    def add(self, rgba: Iterable[float], backdrop: np.ndarray, kind: str, label: str,
            role: str, cue: str | None = None) -> None:
        """``cue``: the non-colour encoding of the artist (line style, marker, hatch), so the
        audit can tell a pair that colour alone separates from one that shape also separates."""
        r, g, b, a = (float(v) for v in rgba)
        if a <= 0.02:
            return
        rgb = a * np.array([r, g, b]) + (1 - a) * backdrop  # what the reader actually sees
        code = rgb_to_hex(rgb)
        entry = self.colours.setdefault(code, {"hex": code, "kinds": [], "label": "",
                                               "count": 0, "role": role, "cues": []})
        entry["count"] += 1
        if cue is not None and cue not in entry["cues"]:
            entry["cues"].append(cue)
        if kind not in entry["kinds"]:
            entry["kinds"].append(kind)
        if not entry["label"] and label and not label.startswith("_"):
            entry["label"] = label[:SNIPPET]

    def add_map(self, cmap: Any, kind: str) -> None:
        name = str(getattr(cmap, "name", "unnamed"))
        if name in self.maps:
            self.maps[name]["count"] += 1
            if kind not in self.maps[name]["kinds"]:
                self.maps[name]["kinds"].append(kind)
            return
        samples = np.asarray(cmap(np.linspace(0, 1, 7)))[:, :3]
        profile = np.asarray(cmap(np.linspace(0, 1, PROFILE_SAMPLES)))[:, :3]
        n = int(getattr(cmap, "N", 256))
        self.maps[name] = {
            "name": name, "kinds": [kind], "count": 1,
            "qualitative": type(cmap).__name__ == "ListedColormap" and n <= QUALITATIVE_MAX,
            "samples": [rgb_to_hex(c) for c in samples],
            "profile": [rgb_to_hex(c) for c in profile],
        }


def _backdrop(ax: Any) -> np.ndarray:
    """The colour behind the data: the axes face, else the figure face, else white paper."""
    from matplotlib.colors import to_rgba
    for face in (ax.patch.get_facecolor(), ax.figure.patch.get_facecolor()):
        rgba = np.asarray(to_rgba(face))
        if rgba[3] > 0.5:
            return rgba[:3]
    return np.ones(3)


def _colours(fig: Any, facts: dict[str, Any]) -> None:
    palette = _Palette()
    for ax in all_axes(fig):
        if is_colorbar(ax) or not ax.get_visible():
            continue
        back = _backdrop(ax)
        _line_colours(ax, back, palette)
        _patch_colours(ax, back, palette)
        _collection_colours(ax, back, palette)
        for image in ax.images:
            if image.get_visible() and np.ndim(image.get_array()) == 2:
                palette.add_map(image.get_cmap(), type(image).__name__)
    facts["colours"] = sorted(palette.colours.values(), key=lambda c: (-c["count"], c["hex"]))
    facts["colormaps"] = list(palette.maps.values())


def _line_colours(ax: Any, back: np.ndarray, palette: _Palette) -> None:
    from matplotlib.colors import to_rgba
    for line in ax.get_lines():
        if not line.get_visible():
            continue
        alpha = line.get_alpha()
        label = str(line.get_label())
        drawn = line.get_linestyle() not in NONE_STYLES and line.get_linewidth() > 0
        marked = str(line.get_marker()) not in NONE_STYLES
        cue = f"line {line.get_linestyle() if drawn else 'none'}, marker " \
              f"{line.get_marker() if marked else 'none'}"
        if drawn:
            palette.add(to_rgba(line.get_color(), alpha), back, "line", label, "line", cue)
        if marked:
            face = line.get_markerfacecolor()
            if str(face).lower() != "none" and to_rgba(face)[3] > 0:
                palette.add(to_rgba(face, alpha), back, "marker", label, "fill", cue)
            else:
                palette.add(to_rgba(line.get_markeredgecolor(), alpha), back, "marker",
                            label, "edge", cue)


def _patch_colours(ax: Any, back: np.ndarray, palette: _Palette) -> None:
    for patch in ax.patches:
        if not patch.get_visible():
            continue
        kind, label = type(patch).__name__.lower(), str(patch.get_label())
        face = patch.get_facecolor()
        cue = f"hatch {patch.get_hatch() or 'none'}, line {patch.get_linestyle()}"
        if patch.get_fill() and face[3] > 0.02:
            palette.add(face, back, kind, label, "fill", cue)
        elif patch.get_linewidth() > 0:
            palette.add(patch.get_edgecolor(), back, kind, label, "edge", cue)


def _unique_rows(rgba: np.ndarray) -> np.ndarray:
    if rgba.size == 0:
        return rgba.reshape(0, 4)
    keys = np.round(np.asarray(rgba, dtype=float).reshape(-1, 4) * 255).astype(np.int64)
    return np.unique(keys, axis=0) / 255.0


def _collection_colours(ax: Any, back: np.ndarray, palette: _Palette) -> None:
    for coll in ax.collections:
        if not coll.get_visible():
            continue
        kind, label = type(coll).__name__, str(coll.get_label())
        values = coll.get_array() if hasattr(coll, "get_array") else None
        if values is not None and np.size(values) > 0:
            palette.add_map(coll.get_cmap(), kind)
            continue
        faces = _unique_rows(np.asarray(coll.get_facecolor()))
        faces = faces[faces[:, 3] > 0.02] if len(faces) else faces
        if len(faces):
            for rgba in faces[:64]:
                palette.add(rgba, back, kind, label, "fill")
            continue
        for rgba in _unique_rows(np.asarray(coll.get_edgecolor()))[:64]:
            palette.add(rgba, back, kind, label, "edge")


# ---------------------------------------------------------------- texts

def _snippet(text: str) -> str:
    flat = " ".join(text.split())
    return flat if len(flat) <= SNIPPET else flat[:SNIPPET - 1] + "…"


def _shown(text: Any) -> bool:
    return bool(text is not None and text.get_visible() and text.get_text().strip())


def _texts(fig: Any, facts: dict[str, Any]) -> None:
    out: list[dict[str, Any]] = []
    fig_roles = {id(getattr(fig, "_suptitle", None)): "suptitle",
                 id(getattr(fig, "_supxlabel", None)): "supxlabel",
                 id(getattr(fig, "_supylabel", None)): "supylabel"}
    for text in fig.texts:
        if _shown(text):
            out.append(_text_entry(text, fig_roles.get(id(text), "figure-text"), None))
    for legend in getattr(fig, "legends", []):
        out.extend(_legend_texts(legend, None))
    for index, ax in enumerate(all_axes(fig), start=1):
        if ax.get_visible():
            out.extend(_axes_texts(ax, index))
    facts["texts"] = out


def _text_entry(text: Any, role: str, axes: int | None) -> dict[str, Any]:
    return {"role": role, "size_pt": round(float(text.get_fontsize()), 2),
            "text": _snippet(text.get_text()), "count": 1, "axes": axes}


def _legend_texts(legend: Any, axes: int | None) -> list[dict[str, Any]]:
    if legend is None or not legend.get_visible():
        return []
    out = [_text_entry(t, "legend", axes) for t in legend.get_texts() if _shown(t)]
    title = legend.get_title()
    if _shown(title):
        out.append(_text_entry(title, "legend-title", axes))
    return out


def _axes_texts(ax: Any, index: int) -> list[dict[str, Any]]:
    from matplotlib.text import Annotation
    out: list[dict[str, Any]] = []
    for attr in ("title", "_left_title", "_right_title"):
        if _shown(getattr(ax, attr, None)):
            out.append(_text_entry(getattr(ax, attr), "title", index))
    if ax.axison:
        for name, axis in (("x", ax.xaxis), ("y", ax.yaxis)):
            if not axis.get_visible():
                continue
            if _shown(axis.label):
                out.append(_text_entry(axis.label, f"{name}label", index))
            out.extend(_tick_texts(axis, f"{name}tick", index))
            if _shown(axis.get_offset_text()):
                out.append(_text_entry(axis.get_offset_text(), f"{name}offset", index))
    for text in ax.texts:
        if _shown(text):
            role = "annotation" if isinstance(text, Annotation) else "text"
            out.append(_text_entry(text, role, index))
    out.extend(_legend_texts(ax.get_legend(), index))
    for table in getattr(ax, "tables", []):
        cells = [c.get_text() for c in table.get_celld().values() if _shown(c.get_text())]
        out.extend(_grouped(cells, "table", index))
    return out


# Tick labels per axis, for the length of one collect_facts call. Why: every public
# get_ticklabels() call runs the axis' locators and formatters again (about a millisecond per
# axis), and the texts and the axes steps both need the labels; a 24-panel figure asked for
# them 144 times, which cost more than the rest of the facts together.
_TICK_MEMO: dict[int, tuple[Any, list[Any]]] = {}


def _tick_labels(axis: Any) -> list[Any]:
    """Major then minor tick labels of ``axis``, as get_ticklabels(minor=False/True) gives them.

    One ``get_majorticklabels()`` call updates (and formats) the major and the minor ticks
    alike, so the minor labels are read from the minor ticks without a second update.
    """
    memo = _TICK_MEMO.get(id(axis))
    if memo is not None and memo[0] is axis:
        return memo[1]
    labels = list(axis.get_majorticklabels())
    minor = axis.get_minor_ticks(len(axis.get_minorticklocs()))
    labels += [t.label1 for t in minor if t.label1.get_visible()]
    labels += [t.label2 for t in minor if t.label2.get_visible()]
    _TICK_MEMO[id(axis)] = (axis, labels)
    return labels


class TickRecorder:
    """While active (``with``), remembers the ticks each axis last drew.

    Why: the public ``get_ticklabels()`` runs an axis' locators and formatters again and
    builds the Tick objects a draw builds anyway: 38 ms a figure on average in the benchmark
    catalogue, 107 ms for 24 panels, nearly all of the facts' cost. The runner saves a figure
    first and collects its facts after, with the ticks that draw left. They are also the
    ticks a reader sees: placed after the layout engine moved the axes, and only those inside
    the view. Where matplotlib has no ``Axis._update_ticks`` (or a subclass has its own), no
    axis is recorded and the facts read the labels the public way.
    """

    def __init__(self) -> None:
        self.ticks: dict[int, tuple[Any, list[Any]]] = {}
        self._original: Any = None

    def __enter__(self) -> "TickRecorder":
        try:
            from matplotlib.axis import Axis
        except ImportError:
            return self
        original = Axis.__dict__.get("_update_ticks")
        if not callable(original):
            return self
        seen = self.ticks

        def _update_ticks(axis: Any) -> Any:
            shown = original(axis)
            seen[id(axis)] = (axis, list(shown))
            return shown

        self._original = original
        Axis._update_ticks = _update_ticks  # type: ignore[attr-defined]
        return self

    def __exit__(self, *exc: object) -> None:
        if self._original is not None:
            from matplotlib.axis import Axis
            Axis._update_ticks = self._original  # type: ignore[attr-defined]
            self._original = None


def _drawn_labels(axis: Any, ticks: list[Any]) -> list[Any]:
    """The visible labels of drawn ``ticks``, in ``_tick_labels``' order (major label1, major
    label2, minor label1, minor label2)."""
    majors = {id(t) for t in axis.majorTicks}
    major = [t for t in ticks if id(t) in majors]
    minor = [t for t in ticks if id(t) not in majors]
    out: list[Any] = []
    for group in (major, minor):
        out += [t.label1 for t in group if t.label1.get_visible()]
        out += [t.label2 for t in group if t.label2.get_visible()]
    return out


def _tick_texts(axis: Any, role: str, index: int) -> list[dict[str, Any]]:
    return _grouped([t for t in _tick_labels(axis) if _shown(t)], role, index)


def _grouped(texts: list[Any], role: str, index: int) -> list[dict[str, Any]]:
    """One entry per font size: tick labels and table cells are many texts of one kind."""
    by_size: dict[float, list[str]] = {}
    for text in texts:
        by_size.setdefault(round(float(text.get_fontsize()), 2), []).append(text.get_text())
    return [{"role": role, "size_pt": size, "text": _snippet(", ".join(words[:6])),
             "count": len(words), "axes": index} for size, words in by_size.items()]


# ---------------------------------------------------------------- axes

def _axes_kind(ax: Any) -> str:
    """'colorbar', 'axis-off', 'table', 'image', 'polar' or 'data' (labels expected)."""
    if is_colorbar(ax):
        return "colorbar"
    if not ax.axison:
        return "axis-off"
    drawn = len(ax.lines) + len(ax.collections) + len(ax.patches)
    if getattr(ax, "tables", None) and not drawn and not ax.images:
        return "table"
    if ax.images and not drawn and all(np.ndim(i.get_array()) == 3 for i in ax.images):
        return "image"
    if getattr(ax, "name", "") == "polar":
        return "polar"
    return "data"


def _axes(fig: Any, facts: dict[str, Any]) -> None:
    axes = all_axes(fig)
    sup = {"x": _shown(getattr(fig, "_supxlabel", None)),
           "y": _shown(getattr(fig, "_supylabel", None))}
    out = []
    for index, ax in enumerate(axes, start=1):
        kind = _axes_kind(ax)
        entry: dict[str, Any] = {"index": index, "kind": kind,
                                 "title": _snippet(ax.get_title()) if ax.get_title() else ""}
        for name in ("x", "y"):
            axis = getattr(ax, f"{name}axis")
            own = _shown(axis.label)
            ticks = axis.get_visible() and any(_shown(t) for t in _tick_labels(axis))
            shared = getattr(ax, f"get_shared_{name}_axes")().get_siblings(ax)
            elsewhere = sup[name] or any(_shown(getattr(o, f"{name}axis").label)
                                         for o in shared if o is not ax)
            entry[f"has_{name}label"] = own
            entry[f"missing_{name}label"] = bool(kind == "data" and ticks and not own
                                                 and not elsewhere)
        out.append(entry)
    facts["axes"] = out
