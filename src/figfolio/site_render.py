"""Jinja environment, filters and server-side pictures for the site templates.

Why server-side SVG: the CSP forbids inline scripts and style attributes, and the site must
work without JavaScript, so the small distribution pictures beside each data column are plain
``<svg>`` with numeric ``rect`` attributes computed here (never text from the view).
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import jinja2
from markupsafe import Markup, escape

from figfolio.site_files import SiteError

DEFAULT_THEME_NAME = "site_template"


def default_theme() -> Path:
    """The theme shipped with figfolio: inside the package when installed, else the repo's."""
    here = Path(__file__).resolve().parent
    for candidate in (here / DEFAULT_THEME_NAME, here.parents[1] / DEFAULT_THEME_NAME):
        if (candidate / "layouts").is_dir():
            return candidate
    raise SiteError("the default site theme is missing from this figfolio installation",
                    path=here, hint="reinstall figfolio")


def theme_folders(root: Path) -> list[Path]:
    """Catalogue theme first (overrides file by file), then the default theme."""
    own = root / DEFAULT_THEME_NAME
    default = default_theme()
    folders = [own] if own.is_dir() and own.resolve() != default.resolve() else []
    return folders + [default]


def make_env(root: Path) -> jinja2.Environment:
    """Autoescaping environment over the theme folders; missing optional fields render empty."""
    loader = jinja2.ChoiceLoader([jinja2.FileSystemLoader(str(f)) for f in theme_folders(root)])
    env = jinja2.Environment(loader=loader, autoescape=True, undefined=jinja2.ChainableUndefined,
                             trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    env.filters.update(num=fmt_number, filesize=fmt_size, spark=spark_svg)
    return env


def render(env: jinja2.Environment, name: str, context: dict[str, Any]) -> str:
    """Render one template; template mistakes become a SiteError naming the template file."""
    try:
        return env.get_template(name).render(**context)
    except jinja2.TemplateSyntaxError as exc:
        raise SiteError(f"template syntax error on line {exc.lineno}: {exc.message}",
                        path=exc.filename or name, key="site_template",
                        hint="fix the template, or delete it to use the default") from None
    except jinja2.TemplateError as exc:
        raise SiteError(f"template error: {exc}", path=name, key="site_template",
                        hint="a catalogue template may name a field the view does not have; "
                             "compare it with figfolio's default template") from None


def fmt_number(value: Any) -> str:
    """Numbers for people: integers with thousands separators, others to 4 significant digits."""
    if value is None or value == "":
        return "–"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)
    if float(value).is_integer() and abs(value) < 1e15:
        return f"{int(value):,}"
    return f"{value:,.4g}" if abs(value) < 1e6 else f"{value:.3e}"


def fmt_size(size: Any) -> str:
    """Bytes as B / kB / MB (powers of 1000, as file managers on most systems show them)."""
    if not isinstance(size, (int, float)):
        return "–"
    for unit in ("B", "kB", "MB", "GB"):
        if size < 1000 or unit == "GB":
            return f"{size:,.0f} {unit}" if unit == "B" else f"{size:,.1f} {unit}"
        size /= 1000
    return f"{size} GB"


def spark_svg(counts: Any, label: str = "distribution") -> Markup:
    """A small bar picture of counts (histogram bins or top levels) as inline SVG.

    Only numbers go into the markup; ``label`` is escaped. Bars get a minimum height of 1 so a
    non-empty bin stays visible next to a tall one.
    """
    values = [float(c) for c in (counts or []) if isinstance(c, (int, float)) and c >= 0]
    if not values or max(values) <= 0:
        return Markup("")
    width, height, gap = 96, 24, 1
    bar = max((width - gap * (len(values) - 1)) / len(values), 1.0)
    top = max(values)
    rects = []
    for i, v in enumerate(values):
        h = 0.0 if v == 0 else max(1.0, v / top * height)
        x = i * (bar + gap)
        rects.append(f'<rect x="{x:.2f}" y="{height - h:.2f}" width="{bar:.2f}" height="{h:.2f}"/>')
    text = escape(f"{label}: {len(values)} bars, largest {fmt_number(top)}")
    return Markup(f'<svg class="fol-spark" viewBox="0 0 {width} {height}" width="{width}" '
                  f'height="{height}" role="img" aria-label="{text}"><title>{text}</title>'
                  + "".join(rects) + "</svg>")
