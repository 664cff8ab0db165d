"""The figure audit on real matplotlib figures, checked against outside references."""
from __future__ import annotations

import json
import time
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from colorspacious import cspace_convert  # noqa: E402
from PIL import Image  # noqa: E402


@pytest.fixture(autouse=True)
def _matplotlib_defaults():
    """These tests reason about matplotlib's default sizes; start each from the defaults."""
    with matplotlib.rc_context():
        matplotlib.rcdefaults()
        yield


from figfolio.audit import CODES, audit_recipe, collect_facts, colormap_shape  # noqa: E402
from figfolio.audit_pixels import simulate_image  # noqa: E402
from figfolio.colour import rgb_to_hex  # noqa: E402
from figfolio.errors import SettingsError  # noqa: E402
from figfolio.settings import AuditSettings, Settings  # noqa: E402

GOOD_ALT = "Two line charts of weekly visits, treated above control after week 3."
# Okabe & Ito (2008), "Color Universal Design" palette, from memory: orange, sky blue, blue,
# vermilion.
OKABE_ITO = {"orange": "#E69F00", "sky blue": "#56B4E9", "blue": "#0072B2",
             "vermilion": "#D55E00"}


def recipe(**kw: Any) -> SimpleNamespace:
    base = {"alt": GOOD_ALT, "title": "Visits by group", "width_mm": None}
    base.update(kw)
    return SimpleNamespace(**base)


def settings(tmp_path: Path, **audit: Any) -> Settings:
    return Settings(root=tmp_path, audit=AuditSettings(**audit))


def two_lines(c1: str, c2: str, width_in: float = 6.0) -> plt.Figure:
    fig, ax = plt.subplots(figsize=(width_in, 4))
    x = np.linspace(0, 10, 50)
    ax.plot(x, np.sin(x), color=c1, label="treated")
    ax.plot(x, np.cos(x), color=c2, label="control")
    ax.set_xlabel("week")
    ax.set_ylabel("visits")
    ax.legend()
    return fig


def run_audit(fig: plt.Figure, tmp_path: Path, rec: SimpleNamespace | None = None,
              with_facts: bool = True, formats: tuple[str, ...] = ("png", "svg"),
              **audit: Any) -> dict[str, Any]:
    facts = [collect_facts(fig)] if with_facts else []
    outputs = []
    for fmt in formats:
        path = tmp_path / f"figure-1.{fmt}"
        fig.savefig(path, dpi=100)
        outputs.append({"name": path.name, "format": fmt, "figure": 1, "path": str(path)})
    plt.close(fig)
    return audit_recipe(rec or recipe(), settings(tmp_path, **audit), outputs, facts,
                        tmp_path / "audit")


def codes(result: dict[str, Any]) -> set[str]:
    return {f["code"] for f in result["findings"]}


@pytest.mark.parametrize("red,green", [("#d62728", "#2ca02c"), ("#ff0000", "#00a000")])
def test_red_green_is_flagged_for_protan_and_deutan(tmp_path: Path, red: str, green: str) -> None:
    result = run_audit(two_lines(red, green), tmp_path)
    assert {"cvd-protan", "cvd-deutan"} <= codes(result)
    deutan = next(f for f in result["findings"] if f["code"] == "cvd-deutan")
    assert red in deutan["message"] and green in deutan["message"]
    assert "deuteranopia" in deutan["message"] and "threshold 10" in deutan["message"]
    # Outside check, colorspacious (PyPI): in its CAM02-UCS space the deutan-simulated pair is
    # far closer than in normal vision, so the finding reflects a real collapse.
    rgb = np.array([[int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)] for h in (red, green)])
    sim = cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": "deuteranomaly",
                               "severity": 100}, "sRGB1")
    ucs = cspace_convert(np.clip(sim, 0, 1), "sRGB1", "CAM02-UCS")
    ucs0 = cspace_convert(rgb, "sRGB1", "CAM02-UCS")
    assert np.linalg.norm(ucs[0] - ucs[1]) < 0.25 * np.linalg.norm(ucs0[0] - ucs0[1])


@pytest.mark.parametrize("a,b", [("orange", "sky blue"), ("blue", "vermilion")])
def test_okabe_ito_pairs_pass_cvd(tmp_path: Path, a: str, b: str) -> None:
    # Okabe & Ito (2008) designed these pairs to stay distinct for protan and deutan viewers.
    result = run_audit(two_lines(OKABE_ITO[a], OKABE_ITO[b]), tmp_path)
    assert not codes(result) & {"cvd-protan", "cvd-deutan", "cvd-tritan"}


def test_cvd_finding_can_be_an_error_and_unknown_codes_are_refused(tmp_path: Path) -> None:
    result = run_audit(two_lines("#d62728", "#2ca02c"), tmp_path, errors=("cvd-deutan",))
    by_code = {f["code"]: f["severity"] for f in result["findings"]}
    assert by_code["cvd-deutan"] == "error" and by_code["cvd-protan"] == "warning"
    with pytest.raises(SettingsError) as err:
        run_audit(two_lines("#d62728", "#2ca02c"), tmp_path, errors=("cvd-deuteran",))
    assert err.value.key == "audit.errors" and "cvd-deutan" in (err.value.hint or "")


def test_small_text_at_print_width_is_flagged(tmp_path: Path) -> None:
    # Printed size = size_pt * (width_mm / 25.4) / figure width in inches (scaling a drawing;
    # common practice). A 6 in figure printed 76.2 mm (3 in) wide halves its text: 10 pt -> 5 pt.
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=76.2))
    found = [f for f in result["findings"] if f["code"] == "text-size"]
    assert found and "5.0 pt at 76.2 mm" in found[0]["message"]
    # the same figure at 101.6 mm (4 in): 10 pt -> 6.7 pt, above the 6 pt floor
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=101.6))
    assert "text-size" not in codes(result)


def test_resolution_at_print_width(tmp_path: Path) -> None:
    # ppi = pixels / (width_mm / 25.4): 600 px over 2 in (50.8 mm) is 300 ppi (definition).
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=50.8))
    assert "resolution" not in codes(result)  # 6 in at 100 dpi = 600 px over 2 in: 300 ppi
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=101.6),
                       formats=("png",))
    found = next(f for f in result["findings"] if f["code"] == "resolution")
    assert "600 px wide: 150 ppi at 101.6 mm" in found["message"]
    # With an SVG beside the PNG, print uses the vector output: no resolution finding.
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=101.6))
    assert "resolution" not in codes(result)


def test_no_width_is_a_note_not_a_finding(tmp_path: Path) -> None:
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(width_mm=None))
    assert not codes(result) & {"text-size", "resolution"}
    assert any("no width_mm" in n for n in result["notes"])


def colormap_figure(cmap: str) -> plt.Figure:
    fig, ax = plt.subplots()
    mesh = ax.pcolormesh(np.arange(20).reshape(4, 5), cmap=cmap)
    fig.colorbar(mesh, ax=ax, label="value")
    ax.set_xlabel("column")
    ax.set_ylabel("row")
    return fig


@pytest.mark.parametrize("cmap,flagged", [("jet", True), ("hsv", True), ("viridis", False),
                                          ("Greys", False), ("RdBu", False)])
def test_colormap_lightness(tmp_path: Path, cmap: str, flagged: bool) -> None:
    # Source: colorspacious CAM02-UCS lightness J' of the same map, an independent lightness
    # scale: rainbow maps reverse direction, viridis/Greys do not, and a diverging map (RdBu)
    # reverses once in the middle -- common practice: viridis/Greys/RdBu are the usual advice,
    # jet and hsv the usual warnings.
    result = run_audit(colormap_figure(cmap), tmp_path)
    assert ("colormap-lightness" in codes(result)) is flagged
    samples = matplotlib.colormaps[cmap](np.linspace(0, 1, 33))[:, :3]
    jp = cspace_convert(samples, "sRGB1", "CAM02-UCS")[:, 0]
    steps = np.sign(np.diff(jp)[np.abs(np.diff(jp)) > 0.5])
    reversals = int(np.sum(steps[1:] != steps[:-1]))
    assert (reversals >= 2 or (reversals == 1 and cmap == "jet")) is flagged
    if flagged:
        message = next(f["message"] for f in result["findings"]
                       if f["code"] == "colormap-lightness")
        assert "rainbow/jet-like colour map: lightness not monotone" in message


def test_colormap_shape_classes() -> None:
    profile = [rgb_to_hex(c[:3]) for c in matplotlib.colormaps["coolwarm"](np.linspace(0, 1, 33))]
    assert colormap_shape(profile)[0] == "diverging"
    profile = [rgb_to_hex(c[:3]) for c in matplotlib.colormaps["magma"](np.linspace(0, 1, 33))]
    assert colormap_shape(profile)[0] == "monotone"


def test_completeness_checks(tmp_path: Path) -> None:
    for alt, flagged in [("TODO", True), ("Visits by group", True), ("A line chart", True),
                         (GOOD_ALT, False)]:
        result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, recipe(alt=alt))
        assert ("alt-text" in codes(result)) is flagged, alt
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, formats=("png",))
    assert "no-vector" in codes(result)
    result = run_audit(two_lines("#0072B2", "#D55E00"), tmp_path, formats=("png", "pdf"))
    assert "no-vector" not in codes(result)


def test_axes_labels(tmp_path: Path) -> None:
    fig, ax = plt.subplots()
    ax.bar([1, 2], [3, 4])
    result = run_audit(fig, tmp_path)
    found = next(f for f in result["findings"] if f["code"] == "axes-labels")
    assert "axes 1 has no x or y label" in found["message"]
    # small multiples: inner panels hide tick labels, the figure carries sup-labels
    fig, axs = plt.subplots(2, 2, sharex=True, sharey=True)
    for ax in axs.flat:
        ax.plot([0, 1], [0, 1])
        ax.label_outer()
    fig.supxlabel("week")
    fig.supylabel("visits")
    assert "axes-labels" not in codes(run_audit(fig, tmp_path))
    # a colour bar is not a data axes (colormap_figure labels its own axes)
    assert "axes-labels" not in codes(run_audit(colormap_figure("viridis"), tmp_path))


def test_facts_are_plain_data_fast_and_never_raise(capsys: pytest.CaptureFixture[str]) -> None:
    fig, axs = plt.subplots(2, 2, figsize=(8, 6))
    rng = np.random.default_rng(3)
    axs[0, 0].plot(rng.random(100), label="a")
    axs[0, 0].legend(title="group")
    axs[0, 1].bar(list("abcde"), rng.random(5), color="#0072B2")
    axs[1, 0].scatter(rng.random(50), rng.random(50), c=rng.random(50))
    axs[1, 1].fill_between(np.arange(10), 0, rng.random(10), alpha=0.4)
    axs[1, 1].annotate("peak", (3, 0.5), fontsize=7)
    fig.suptitle("Four panels")
    collect_facts(fig)  # warm the code paths once
    start = time.perf_counter()
    facts = collect_facts(fig)
    elapsed = (time.perf_counter() - start) * 1000
    with capsys.disabled():
        print(f"\ncollect_facts on a 4-panel figure: {elapsed:.1f} ms")
    assert elapsed < 250  # target 50 ms; generous for a loaded 2-core CI machine
    assert "error" not in facts
    json.dumps(facts)
    assert facts["canvas"] == {"width_in": 8.0, "height_in": 6.0, "dpi": fig.dpi}
    roles = {t["role"] for t in facts["texts"]}
    assert {"suptitle", "legend", "legend-title", "annotation", "xtick", "ytick"} <= roles
    assert min(t["size_pt"] for t in facts["texts"]) == 7.0
    assert "#0072b2" in {c["hex"] for c in facts["colours"]}
    assert [m["name"] for m in facts["colormaps"]] == ["viridis"]
    assert len(facts["colormaps"][0]["samples"]) == 7
    plt.close(fig)
    broken = collect_facts(object())
    assert "error" in broken and isinstance(broken["colours"], list)


def test_pixel_fallback_when_facts_are_missing(tmp_path: Path) -> None:
    result = run_audit(two_lines("#d62728", "#2ca02c"), tmp_path, with_facts=False)
    assert "cvd-deutan" in codes(result)
    assert any("pixel colours" in n for n in result["notes"])
    assert "axes-labels" not in codes(result)
    result = run_audit(two_lines("#E69F00", "#56B4E9"), tmp_path, with_facts=False)
    assert not codes(result) & {"cvd-protan", "cvd-deutan"}


def test_unreadable_png_is_a_note(tmp_path: Path) -> None:
    bad = tmp_path / "plot.png"
    bad.write_bytes(b"not a png")
    result = audit_recipe(recipe(), settings(tmp_path),
                          [{"name": "plot.png", "format": "png", "figure": None,
                            "path": str(bad)}], [], tmp_path / "audit")
    assert any("cannot read plot.png" in n for n in result["notes"])
    assert {f["code"] for f in result["findings"]} == {"no-vector"}


def test_simulated_images_match_colorspacious(tmp_path: Path) -> None:
    # A flat image of four colours; each preview pixel must equal colorspacious's simulation
    # (Machado 2009, deuteranomaly 100) / the WCAG 2.1 luminance gray, within rounding.
    colours = np.array([[214, 39, 40], [44, 160, 44], [0, 114, 178], [230, 159, 0]], np.uint8)
    img = np.repeat(np.repeat(colours[None], 40, axis=0), 40, axis=1)
    src = tmp_path / "flat.png"
    Image.fromarray(img).save(src)
    out = simulate_image(src, "deutan", tmp_path / "d.png", width=80)
    got = np.asarray(Image.open(out).convert("RGB"))[10, 10::20][:4] / 255
    ref = cspace_convert(colours / 255, {"name": "sRGB1+CVD", "cvd_type": "deuteranomaly",
                                         "severity": 100}, "sRGB1")
    assert np.max(np.abs(got - np.clip(ref, 0, 1))) <= 1.5 / 255
    gray = np.asarray(Image.open(simulate_image(src, "grayscale", tmp_path / "g.png",
                                                width=80)).convert("RGB"))[10, 10::20][:4]
    y = cspace_convert(colours / 255, "sRGB1", "XYZ1")[:, 1]
    expect = cspace_convert(np.repeat(y[:, None], 3, axis=1), "sRGB1-linear", "sRGB1")[:, 0]
    assert np.max(np.abs(gray[:, 0] / 255 - expect)) <= 1.5 / 255
    assert Image.open(out).size == (80, 20)


def test_audit_cost_and_images(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    fig = two_lines("#d62728", "#2ca02c", width_in=7)
    start = time.perf_counter()
    result = run_audit(fig, tmp_path, recipe(width_mm=180))
    elapsed = (time.perf_counter() - start) * 1000
    with capsys.disabled():
        print(f"\naudit_recipe (collect, save png+svg, audit, 4 previews): {elapsed:.0f} ms")
    images = result["images"]["1"]
    assert set(images) == {"protan", "deutan", "tritan", "grayscale"}
    for path in images.values():
        assert Image.open(path).width == 360
    assert set(codes(result)) <= set(CODES)
    assert all(f["figure"] in (1, None) for f in result["findings"])


def styled_lines(first: str, second: str, style_a: str, style_b: str) -> plt.Figure:
    fig, ax = plt.subplots(figsize=(6, 4))
    ax.plot([0, 1, 2], [0, 1, 2], color=first, linestyle=style_a, label="a")
    ax.plot([0, 1, 2], [2, 1, 0], color=second, linestyle=style_b, label="b")
    ax.set_xlabel("week")
    ax.set_ylabel("rate")
    return fig


def test_red_green_separated_by_line_style_is_not_flagged(tmp_path: Path) -> None:
    # Redundant encoding (common practice): when the two groups also differ by line style,
    # losing the red/green difference under deuteranopia does not lose the groups.
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    same = run_audit(styled_lines("#d62728", "#2ca02c", "-", "-"), tmp_path / "a")
    assert {"cvd-deutan", "cvd-protan"} <= codes(same)
    styled = run_audit(styled_lines("#d62728", "#2ca02c", "-", "--"), tmp_path / "b")
    assert not {"cvd-deutan", "cvd-protan", "grayscale"} & codes(styled)


def test_previews_by_distinct_colour_equal_the_pixel_path_and_colorspacious(
        tmp_path: Path) -> None:
    """transform_each (one transform per distinct colour) gives the same pixels as
    transform_pixels, and the deutan preview of a real anti-aliased chart agrees with
    colorspacious (Machado 2009, deuteranomaly 100) for every pixel within rounding."""
    from figfolio.audit_pixels import IMAGE_KINDS, load_rgb, transform_each, transform_pixels

    fig = two_lines("#d62728", "#2ca02c", width_in=5)
    src = tmp_path / "chart.png"
    fig.savefig(src, dpi=100)
    rgb = load_rgb(src, 360)
    each = transform_each(rgb, IMAGE_KINDS, 1.0)
    for kind in IMAGE_KINDS:
        assert np.array_equal(each[kind], transform_pixels(rgb, kind, 1.0)), kind
    flat = rgb.reshape(-1, 3)
    assert len(np.unique(flat, axis=0)) > 50  # anti-aliasing: many colours, the test bites
    ref = cspace_convert(flat / 255, {"name": "sRGB1+CVD", "cvd_type": "deuteranomaly",
                                      "severity": 100}, "sRGB1")
    got = each["deutan"].reshape(-1, 3) / 255
    assert np.max(np.abs(got - np.clip(ref, 0, 1))) <= 1.5 / 255


def test_facts_after_the_first_save_count_only_the_tick_labels_drawn(tmp_path: Path) -> None:
    """The runner saves first, then reads the ticks that draw showed (audit_facts.TickRecorder).
    Reference: matplotlib's public API: the locator's ticks (Axes.get_xticks) that lie inside
    the view limits (Axes.get_xlim) are the labels a reader sees."""
    import matplotlib.axis

    from figfolio.runner_capture import save_open_figures

    plt.close("all")
    original = matplotlib.axis.Axis.__dict__["_update_ticks"]
    fig, ax = plt.subplots(figsize=(4, 3))
    ax.plot([0, 10], [0, 10], color="#0072B2")
    ax.set_xlim(0.5, 9.5)
    ax.set_xlabel("x")
    ax.set_ylabel("y")
    _outputs, facts, warnings = save_open_figures(tmp_path, ["png", "svg"], 72)
    plt.close("all")
    assert warnings == [] and len(facts) == 1
    low, high = ax.get_xlim()
    shown = [t for t in ax.get_xticks() if low <= t <= high]
    xtick = [t for t in facts[0]["texts"] if t["role"] == "xtick"]
    assert [t["count"] for t in xtick] == [len(shown)]
    assert len(shown) < len(ax.get_xticks())  # the locator did give ticks outside the view
    assert xtick[0]["text"] == ", ".join(f"{v:g}" for v in shown[:6])
    assert matplotlib.axis.Axis.__dict__["_update_ticks"] is original  # patch removed
