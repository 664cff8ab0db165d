"""Speed benchmark: figfolio's build against the naive way and the floor, side by side.

Run: ``make bench`` (or ``.venv/bin/python benchmarks/bench_build.py``). Prints every figure and
the ratios, and writes them to ``benchmarks/results/<date>.json`` for comparison across commits.

Measured on one synthetic catalogue of N recipes (``make_catalogue.py``), alternating the
contenders in one run so machine noise hits them alike:
  (a) naive: each recipe as its own ``python`` process, serially, then digests and thumbnails;
  (b) floor: every script in one warm interpreter, timed per script, divided by the core count;
  (c) ``figfolio build`` cold; (d) with nothing changed; (e) after one data file changed;
  (f) peak memory of the builder and of its biggest child; (g) the audit's and the site's share.
Scale run: 1,000 tiny recipes for the no-op and site-rendering figures; search timing in
headless Chromium over a 5,000-recipe index.
"""
from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from make_catalogue import make_catalogue  # noqa: E402

CORES = os.cpu_count() or 1

NAIVE = r'''
import runpy, sys, matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
plt.show = lambda *a, **k: None
runpy.run_path("figure.py", run_name="__main__")
formats = sys.argv[1].split(",")
for n in plt.get_fignums():
    fig = plt.figure(n)
    for fmt in formats:
        fig.savefig(f"{sys.argv[2]}/figure-{n}.{fmt}", dpi=150)
'''

FLOOR = r'''
import json, os, runpy, sys, time, matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy, pandas, scipy.cluster.hierarchy
plt.show = lambda *a, **k: None
formats = sys.argv[1].split(",")
out = sys.argv[2]
times = []
for folder in sys.argv[3:]:
    os.chdir(folder)
    t0 = time.perf_counter()
    runpy.run_path("figure.py", run_name="__main__")
    for n in plt.get_fignums():
        fig = plt.figure(n)
        for fmt in formats:
            fig.savefig(f"{out}/{os.path.basename(folder)}-{n}.{fmt}", dpi=150)
    plt.close("all")
    times.append(time.perf_counter() - t0)
print(json.dumps(times))
'''

BUILDER = r'''
import json, resource, sys, time
t0 = time.perf_counter()
from figfolio.build import Options, run_pass
from figfolio.settings import load_settings
from pathlib import Path
settings = load_settings(Path(sys.argv[1]))
opts = Options(force=sys.argv[2] == "force", quiet=True)
report = run_pass(settings, opts)
wall = time.perf_counter() - t0
print(json.dumps({"wall": wall, "ran": report.ran, "cached": report.cached,
                  "timings": report.timings,
                  "self_kb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
                  "children_kb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss}))
'''


def python() -> str:
    return sys.executable


def naive(root: Path, formats: str) -> float:
    """(a): one fresh interpreter per recipe, serially; then digests and thumbnails."""
    from PIL import Image
    import hashlib

    out = Path(tempfile.mkdtemp(prefix="naive-"))
    t0 = time.perf_counter()
    for folder in sorted((root / "recipes").iterdir()):
        target = out / folder.name
        target.mkdir()
        subprocess.run([python(), "-c", NAIVE, formats, str(target)], cwd=folder, check=True,
                       env=dict(os.environ, MPLBACKEND="Agg"), capture_output=True)
        for png in target.glob("*.png"):
            with Image.open(png) as img:
                hashlib.sha256(img.convert("RGBA").tobytes()).hexdigest()
                img.thumbnail((320, 320))
                img.save(target / f"thumb-{png.name}")
    seconds = time.perf_counter() - t0
    shutil.rmtree(out, ignore_errors=True)
    return seconds


def floor(root: Path, formats: str) -> float:
    """(b): the scripts alone in one warm interpreter, divided by the core count."""
    out = Path(tempfile.mkdtemp(prefix="floor-"))
    folders = [str(p) for p in sorted((root / "recipes").iterdir())]
    run = subprocess.run([python(), "-c", FLOOR, formats, str(out), *folders], check=True,
                         capture_output=True, text=True, env=dict(os.environ, MPLBACKEND="Agg"))
    shutil.rmtree(out, ignore_errors=True)
    return sum(json.loads(run.stdout.strip().splitlines()[-1])) / CORES


def builder(root: Path, force: bool = False) -> dict:
    """Run one figfolio pass in a fresh process and return its figures."""
    run = subprocess.run([python(), "-c", BUILDER, str(root), "force" if force else "plain"],
                         capture_output=True, text=True, env=dict(os.environ, CI="1"))
    if run.returncode != 0:
        raise SystemExit(f"figfolio build failed:\n{run.stderr[-3000:]}")
    return json.loads(run.stdout.strip().splitlines()[-1])


def cli_seconds(root: Path, *args: str) -> float:
    """Wall time of the real command, as a user sees it (interpreter start included)."""
    t0 = time.perf_counter()
    subprocess.run([python(), "-m", "figfolio", "-C", str(root), *args], capture_output=True,
                   env=dict(os.environ, CI="1"))
    return time.perf_counter() - t0


def cold(root: Path) -> dict:
    shutil.rmtree(root / "build", ignore_errors=True)
    return builder(root)


def change_one(root: Path) -> tuple[dict, float]:
    """(e): append a row to one data file; return the build and that recipe's own run time."""
    folder = sorted((root / "recipes").iterdir())[3]
    data = next(p for p in (folder / "data").iterdir() if p.suffix == ".csv")
    lines = data.read_text().splitlines()
    data.write_text("\n".join(lines + [lines[-1]]) + "\n")
    result = builder(root)
    record_dir = root / "build" / "cache" / "runs" / folder.name
    own = 0.0
    for record in record_dir.rglob("record.json"):
        own = json.loads(record.read_text())["run"]["duration"]
    return result, own


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("-n", type=int, default=60, help="recipes in the main catalogue")
    parser.add_argument("--rounds", type=int, default=1, help="alternating rounds")
    parser.add_argument("--scale", type=int, default=1000, help="tiny recipes for the scale run")
    parser.add_argument("--search", type=int, default=5000, help="recipes in the search index")
    parser.add_argument("--skip-scale", action="store_true")
    args = parser.parse_args()
    work = HERE / "work"
    shutil.rmtree(work, ignore_errors=True)
    figures: dict = {"date": datetime.now(timezone.utc).isoformat(), "cores": CORES, "n": args.n}

    png_root = make_catalogue(work / "png", args.n, formats=("png",))
    all_root = make_catalogue(work / "all", args.n)
    runs: dict[str, list[float]] = {k: [] for k in ("naive_png", "cold_png", "floor_all",
                                                     "cold_all")}
    detail = {}
    for r in range(args.rounds):  # alternate the contenders so noise hits them alike
        runs["naive_png"].append(naive(png_root, "png"))
        detail["cold_png"] = cold(png_root)
        runs["cold_png"].append(detail["cold_png"]["wall"])
        runs["floor_all"].append(floor(all_root, "png,svg,pdf"))
        detail["cold_all"] = cold(all_root)
        runs["cold_all"].append(detail["cold_all"]["wall"])
        print(f"round {r + 1}: " + ", ".join(f"{k} {v[-1]:.1f} s" for k, v in runs.items()),
              flush=True)
    med = {k: statistics.median(v) for k, v in runs.items()}
    noop = builder(all_root)
    noop_cli = cli_seconds(all_root, "build")
    changed, own = change_one(all_root)
    t = detail["cold_all"]["timings"]
    figures.update({
        "naive_png_s": med["naive_png"], "cold_png_s": med["cold_png"],
        "floor_all_s": med["floor_all"], "cold_all_s": med["cold_all"],
        "ratio_cold_over_naive_png": med["cold_png"] / med["naive_png"],
        "ratio_cold_over_floor_all": med["cold_all"] / med["floor_all"],
        "noop_s": noop["wall"], "noop_ran": noop["ran"], "noop_cli_s": noop_cli,
        "one_changed_s": changed["wall"], "one_changed_ran": changed["ran"],
        "one_changed_own_run_s": own,
        "builder_peak_mb": detail["cold_all"]["self_kb"] / 1024,
        "worker_peak_mb": detail["cold_all"]["children_kb"] / 1024,
        "audit_share": t.get("audit", 0.0) / t["total"],
        "site_share": t.get("site", 0.0) / t["total"],
        "timings_cold_all": t,
    })
    if not args.skip_scale:
        tiny = make_catalogue(work / "tiny", args.scale, tiny=True, formats=("png",))
        first = cold(tiny)
        noop_tiny = builder(tiny)
        noop_tiny_cli = cli_seconds(tiny, "build")
        shutil.rmtree(tiny / "build" / "site", ignore_errors=True)
        rerender = builder(tiny)
        figures.update({
            "scale_n": args.scale, "scale_cold_s": first["wall"],
            "scale_noop_s": noop_tiny["wall"], "scale_noop_cli_s": noop_tiny_cli,
            "scale_site_render_s": rerender["timings"].get("site", 0.0),
            "scale_builder_peak_mb": first["self_kb"] / 1024,
        })
    try:
        from search_timing import search_timing
        figures.update(search_timing(args.search))
    except Exception as exc:  # the browser is optional for this benchmark
        figures["search_error"] = str(exc)

    print()
    for key, value in figures.items():
        if isinstance(value, float):
            print(f"{key:32s} {value:10.3f}")
        elif not isinstance(value, dict):
            print(f"{key:32s} {value}")
    print(f"\ntargets: cold/naive (png) <= 0.15 -> {figures['ratio_cold_over_naive_png']:.3f}; "
          f"cold/floor (all formats) <= 1.15 -> {figures['ratio_cold_over_floor_all']:.3f}")
    out = HERE / "results"
    out.mkdir(exist_ok=True)
    path = out / f"{datetime.now(timezone.utc).strftime('%Y%m%dT%H%M%S')}.json"
    path.write_text(json.dumps(figures, indent=2, sort_keys=True))
    print(f"written: {path}")


if __name__ == "__main__":
    main()
