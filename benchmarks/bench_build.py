"""Speed benchmark: figfolio's build against the naive way and the floor, side by side.

Run: ``make bench`` (or ``.venv/bin/python benchmarks/bench_build.py``). Prints every figure and
the ratios, and writes them to ``benchmarks/results/<date>.json`` for comparison across commits.

Measured on one synthetic catalogue of N recipes (``make_catalogue.py``), alternating the
contenders in one run so machine noise hits them alike:
  (a) naive: each recipe as its own ``python`` process, serially, then digests and thumbnails;
  (b) floor: every script in one warm interpreter, timed per script, divided by the core count;
  (c) ``figfolio build`` cold; (d) with nothing changed (answered from build/cache/noop.json;
      at scale also the full no-op path without it); (e) after one data file changed, against
      that recipe's own run in its worker and against running it by hand (``python figure.py``
      with Agg, saving like (a), interpreter start included); and as ``figfolio serve`` does
      it, on workers kept warm since the server started;
  (f) peak memory of the builder and of its biggest child; (g) the audit's and the site's share.
Also a lower bound for (c) on this machine (``limits``): importing the stack once, every script
in a fresh fork of a warm interpreter (the "forked floor": what isolating each recipe costs,
measured without figfolio), and figfolio's post step, spread perfectly over the cores.
Scale run: 1,000 tiny recipes for the no-op and site-rendering figures; search timing in
headless Chromium over a 5,000-recipe index (``search_timing.py``).

Why a parallelism probe: "the floor divided by the core count" assumes the cores run in
parallel at full speed. On shared or virtual machines two busy processes may each run much
slower than one alone; the probe measures that (``parallel_speedup``: N copies of a CPU-bound
loop at once against one alone) and the benchmark also reports the floor divided by the
measured speedup and the CPU seconds of each contender, so the ratios can be read honestly.

``--quick``: 15 recipes, 200 tiny recipes, 1,000 in the search index (a few minutes).
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
import numpy, pandas, scipy.cluster.hierarchy, scipy.stats, statsmodels.api
plt.show = lambda *a, **k: None
mode, formats, out = sys.argv[1], sys.argv[2].split(","), sys.argv[3]
def body(folder):
    os.chdir(folder)
    runpy.run_path("figure.py", run_name="__main__")
    for n in plt.get_fignums():
        fig = plt.figure(n)
        for fmt in formats:
            fig.savefig(f"{out}/{os.path.basename(folder)}-{n}.{fmt}", dpi=150)
    plt.close("all")
times = []
if mode == "forked":  # the best a fork server could start from: every script run once here
    import gc         # (all lazy imports and caches warm), the heap frozen for the children
    for folder in sys.argv[4:]:
        body(folder)
    gc.collect()
    gc.freeze()
for folder in sys.argv[4:]:
    t0 = time.perf_counter()
    if mode == "forked":  # a fresh child per script, as a fork server runs them; nothing more
        pid = os.fork()
        if pid == 0:
            try:
                body(folder)
            finally:
                os._exit(0)
        os.waitpid(pid, 0)
    else:
        body(folder)
    times.append(time.perf_counter() - t0)
print(json.dumps(times))
'''

# The stack every benchmark recipe imports; a fork server must import it once, serially, before
# its first child can start. Timed in a fresh interpreter, as the worker's warm-up begins.
STACK = ("import matplotlib; matplotlib.use('Agg'); import matplotlib.pyplot, numpy, pandas, "
         "scipy.cluster.hierarchy, scipy.stats, statsmodels.api")

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
me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
heavy = sorted(m for m in sys.modules if m.split(".")[0] in ("numpy", "pandas", "matplotlib",
                                                          "PIL", "scipy"))
print(json.dumps({"wall": wall, "ran": report.ran, "cached": report.cached,
                  "fast": report.fast, "fast_miss": report.fast_miss,
                  "timings": report.timings, "counts": report.counts(),
                  "self_kb": me.ru_maxrss, "children_kb": kids.ru_maxrss,
                  "cpu_s": me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime,
                  "heavy_modules": heavy[:5]}))
'''

WARM_POOL_CHANGE = r'''
import json, sys, time
from pathlib import Path
from figfolio.build import Options, run_pass, warm_pool
from figfolio.executor import warm
from figfolio.settings import load_settings
root = Path(sys.argv[1])
settings = load_settings(root)
pool = warm_pool(settings)
warm(pool, 2)
run_pass(settings, Options(quiet=True), pool=pool)      # nothing changed: replayed
time.sleep(4)                                           # the workers finish warming up
data = Path(sys.argv[2])
lines = data.read_text().splitlines()
data.write_text("\n".join(lines + [lines[-1]]) + "\n")
t0 = time.perf_counter()
report = run_pass(settings, Options(quiet=True), pool=pool)
wall = time.perf_counter() - t0
pool.close()
print(json.dumps({"wall": wall, "ran": report.ran, "timings": report.timings}))
'''

SPIN = r'''
import time
t0 = time.perf_counter()
x = 0
for i in range(4_000_000):
    x += i * i
print(time.perf_counter() - t0)
'''


def python() -> str:
    return sys.executable


def naive(root: Path, formats: str) -> tuple[float, float]:
    """(a): one fresh interpreter per recipe, serially; then digests and thumbnails.

    Returns (seconds, of which the digests and thumbnails).
    """
    from PIL import Image
    import hashlib

    out = Path(tempfile.mkdtemp(prefix="naive-"))
    post = 0.0
    t0 = time.perf_counter()
    for folder in sorted((root / "recipes").iterdir()):
        target = out / folder.name
        target.mkdir()
        subprocess.run([python(), "-c", NAIVE, formats, str(target)], cwd=folder, check=True,
                       env=dict(os.environ, MPLBACKEND="Agg"), capture_output=True)
        t1 = time.perf_counter()
        for png in target.glob("*.png"):
            with Image.open(png) as img:
                hashlib.sha256(img.convert("RGBA").tobytes()).hexdigest()
                img.thumbnail((320, 320))
                img.save(target / f"thumb-{png.name}")
        post += time.perf_counter() - t1
    seconds = time.perf_counter() - t0
    shutil.rmtree(out, ignore_errors=True)
    return seconds, post


def import_seconds(root: Path, times: int = 3) -> float:
    """What starting the stack costs the naive way: for each distinct script, the median time
    of a fresh interpreter that runs only its import lines; summed over the recipes."""
    by_script: dict[str, int] = {}
    for script in (root / "recipes").glob("*/figure.py"):
        head = "\n".join(line for line in script.read_text().splitlines()
                         if line.startswith(("import ", "from ")))
        by_script[head] = by_script.get(head, 0) + 1
    return sum(fresh_seconds(head, times) * count for head, count in by_script.items())


def fresh_seconds(code: str, times: int = 3, **env: str) -> float:
    """Median wall time of a fresh interpreter that runs ``code`` (Agg backend) and ends."""
    runs = []
    for _ in range(times):
        t0 = time.perf_counter()
        subprocess.run([python(), "-c", code], check=True, capture_output=True,
                       env=dict(os.environ, MPLBACKEND="Agg", **env))
        runs.append(time.perf_counter() - t0)
    return statistics.median(runs)


def floor(root: Path, formats: str, mode: str = "inline") -> tuple[float, float]:
    """(b): the scripts alone in one warm interpreter: (sum of their times, CPU seconds).

    ``mode="forked"``: each script in a fresh fork of that interpreter, timed from the fork to
    the reaping of the child, after every script ran once in the parent and its heap was
    frozen (``gc.freeze``): the best start any fork server could have. The difference from the
    inline floor is what isolating each recipe in its own process costs on this machine (fork,
    copy-on-write, exit), measured without any figfolio code.
    """
    import resource

    out = Path(tempfile.mkdtemp(prefix="floor-"))
    folders = [str(p) for p in sorted((root / "recipes").iterdir())]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    run = subprocess.run([python(), "-c", FLOOR, mode, formats, str(out), *folders],
                         check=True, capture_output=True, text=True,
                         env=dict(os.environ, MPLBACKEND="Agg", OPENBLAS_NUM_THREADS="1",
                                  OMP_NUM_THREADS="1", MKL_NUM_THREADS="1"))
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    shutil.rmtree(out, ignore_errors=True)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return sum(json.loads(run.stdout.strip().splitlines()[-1])), cpu


def stack_seconds(times: int = 3) -> float:
    """Median wall time of a fresh interpreter that imports the recipes' stack and ends."""
    return fresh_seconds(STACK, times, OPENBLAS_NUM_THREADS="1")


def parallel_speedup(copies: int = CORES) -> float:
    """How much faster ``copies`` CPU-bound processes finish together than one after another."""
    def batch(n: int) -> float:
        t0 = time.perf_counter()
        procs = [subprocess.Popen([python(), "-c", SPIN], stdout=subprocess.DEVNULL)
                 for _ in range(n)]
        for proc in procs:
            proc.wait()
        return time.perf_counter() - t0
    one = statistics.median(batch(1) for _ in range(3))
    many = statistics.median(batch(copies) for _ in range(3))
    return copies * one / many


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


def lint_passes(root: Path) -> bool:
    """The synthetic catalogue must pass ``figfolio lint`` (settings, metadata, data screen)."""
    run = subprocess.run([python(), "-m", "figfolio", "-C", str(root), "lint"],
                         capture_output=True, text=True, env=dict(os.environ, CI="1"))
    return run.returncode == 0


def by_hand(folder: Path, formats: str, times: int = 3) -> float:
    """Median wall time of running one recipe by hand: ``python figure.py`` with the Agg
    backend, saving its figures the way the naive contender does (interpreter start included)."""
    out = Path(tempfile.mkdtemp(prefix="by-hand-"))
    seconds = []
    for _ in range(times):
        t0 = time.perf_counter()
        subprocess.run([python(), "-c", NAIVE, formats, str(out)], cwd=folder, check=True,
                       env=dict(os.environ, MPLBACKEND="Agg"), capture_output=True)
        seconds.append(time.perf_counter() - t0)
    shutil.rmtree(out, ignore_errors=True)
    return statistics.median(seconds)


def change_one(root: Path, formats: str = "png,svg,pdf") -> tuple[dict, float, float]:
    """(e): append a row to one data file; return the build, that recipe's own run time in
    its worker, and the time of running it by hand (measured right after, same machine)."""
    folder = sorted((root / "recipes").iterdir())[3]
    data = next(p for p in (folder / "data").iterdir() if p.suffix == ".csv")
    lines = data.read_text().splitlines()
    data.write_text("\n".join(lines + [lines[-1]]) + "\n")
    result = builder(root)
    record_dir = root / "build" / "cache" / "runs" / folder.name
    own = 0.0
    for record in record_dir.rglob("record.json"):
        own = json.loads(record.read_text())["run"]["duration"]
    return result, own, by_hand(folder, formats)


def change_one_warm(root: Path) -> tuple[dict, float]:
    """(e) as ``figfolio serve`` does it: the workers were started with the server and kept
    warm, then one data file changes and the pass runs on them. Returns the pass and that
    recipe's own run time in its worker."""
    folder = sorted((root / "recipes").iterdir())[8]
    data = next(p for p in (folder / "data").iterdir() if p.suffix == ".csv")
    run = subprocess.run([python(), "-c", WARM_POOL_CHANGE, str(root), str(data)],
                         capture_output=True, text=True, env=dict(os.environ, CI="1"))
    if run.returncode != 0:
        raise SystemExit(f"figfolio build with a warm pool failed:\n{run.stderr[-3000:]}")
    result = json.loads(run.stdout.strip().splitlines()[-1])
    own = 0.0
    for record in (root / "build" / "cache" / "runs" / folder.name).rglob("record.json"):
        own = json.loads(record.read_text())["run"]["duration"]
    return result, own


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("-n", type=int, default=None, help="recipes in the main catalogue (60)")
    parser.add_argument("--rounds", type=int, default=1, help="alternating rounds")
    parser.add_argument("--scale", type=int, default=None, help="tiny recipes (1,000)")
    parser.add_argument("--search", type=int, default=None, help="recipes in the search index "
                                                                 "(5,000)")
    parser.add_argument("--skip-scale", action="store_true")
    parser.add_argument("--skip-naive", action="store_true", help="leave out (a), the slowest")
    parser.add_argument("--quick", action="store_true", help="a smaller run for a first look")
    args = parser.parse_args()
    n = args.n or (15 if args.quick else 60)
    scale = args.scale or (200 if args.quick else 1000)
    search = args.search or (1000 if args.quick else 5000)
    work = HERE / "work"
    shutil.rmtree(work, ignore_errors=True)
    started = time.perf_counter()
    figures: dict = {"date": datetime.now(timezone.utc).isoformat(), "cores": CORES, "n": n,
                     "quick": args.quick}
    figures["parallel_speedup"] = parallel_speedup()
    print(f"parallel speedup of {CORES} CPU-bound processes: "
          f"{figures['parallel_speedup']:.2f}x", flush=True)
    main_catalogue(figures, work, n, args.rounds, args.skip_naive)
    if not args.skip_scale:
        scale_run(figures, work, scale)
    try:
        from search_timing import search_timing
        figures.update(search_timing(search))
    except Exception as exc:  # the browser is optional for this benchmark
        figures["search_error"] = f"{type(exc).__name__}: {exc}"
    figures["benchmark_minutes"] = (time.perf_counter() - started) / 60
    report(figures)


def main_catalogue(figures: dict, work: Path, n: int, rounds: int, skip_naive: bool) -> None:
    """(a)-(g) on N recipes of realistic kinds, contenders alternating round by round.

    Each ratio is taken within a round (the contenders ran minutes apart) and the median of
    the rounds' ratios is reported; the seconds are the medians of each contender's rounds.
    """
    png_root = make_catalogue(work / "png", n, formats=("png",))
    all_root = make_catalogue(work / "all", n)
    figures["lint_passes"] = lint_passes(all_root)
    sizes = [f.stat().st_size for f in (all_root / "recipes").glob("*/data/*")]
    figures["data_kb_min"], figures["data_kb_max"] = min(sizes) / 1024, max(sizes) / 1024
    runs: dict[str, list[float]] = {k: [] for k in (
        "naive_png", "naive_post", "cold_png", "post_png", "floor_png_serial",
        "forked_png_serial", "floor_all_serial", "floor_all_cpu", "forked_all_serial", "stack",
        "cold_all", "post_all")}
    detail: dict = {}
    for r in range(rounds):  # alternate the contenders so noise hits them alike
        if not skip_naive:
            seconds, post = naive(png_root, "png")
            runs["naive_png"].append(seconds)
            runs["naive_post"].append(post)
        detail["cold_png"] = cold(png_root)
        runs["cold_png"].append(detail["cold_png"]["wall"])
        runs["post_png"].append(post_cpu(detail["cold_png"]))
        runs["floor_png_serial"].append(floor(png_root, "png")[0])
        runs["forked_png_serial"].append(floor(png_root, "png", "forked")[0])
        serial, cpu = floor(all_root, "png,svg,pdf")
        runs["floor_all_serial"].append(serial)
        runs["floor_all_cpu"].append(cpu)
        runs["forked_all_serial"].append(floor(all_root, "png,svg,pdf", "forked")[0])
        runs["stack"].append(stack_seconds())
        detail["cold_all"] = cold(all_root)
        runs["cold_all"].append(detail["cold_all"]["wall"])
        runs["post_all"].append(post_cpu(detail["cold_all"]))
        print(f"round {r + 1}: " + ", ".join(f"{k} {v[-1]:.1f} s" for k, v in runs.items()
                                             if v), flush=True)
    med = {k: statistics.median(v) for k, v in runs.items() if v}
    ratios = round_ratios(runs)
    figures["round_ratios"] = ratios
    figures.update({f"ratio_{k}": statistics.median(v) for k, v in ratios.items()})
    speedup = figures["parallel_speedup"]
    cold_all = detail["cold_all"]
    figures.update({
        "floor_png_s": med["floor_png_serial"] / CORES,
        "cold_png_s": med["cold_png"], "cold_all_s": med["cold_all"],
        "floor_all_s": med["floor_all_serial"] / CORES,
        "floor_all_serial_s": med["floor_all_serial"],
        "floor_all_effective_s": med["floor_all_serial"] / max(speedup, 1.0),
        "ratio_cold_over_effective_floor_all":
            med["cold_all"] / (med["floor_all_serial"] / max(speedup, 1.0)),
        "floor_all_cpu_s": med["floor_all_cpu"], "cold_all_cpu_s": cold_all["cpu_s"],
        "ratio_cpu_cold_over_floor_all": cold_all["cpu_s"] / med["floor_all_cpu"],
        "cold_all_counts": cold_all["counts"],
        "stack_import_s": med["stack"],
    })
    for fmt in ("png", "all"):
        figures.update({
            f"forked_floor_{fmt}_s": med[f"forked_{fmt}_serial"] / CORES,
            f"isolation_ms_per_recipe_{fmt}": 1000 * statistics.median(
                f - i for f, i in zip(runs[f"forked_{fmt}_serial"], runs[f"floor_{fmt}_serial"])
            ) / n,
            f"post_step_{fmt}_cpu_s": med[f"post_{fmt}"],
            f"limit_{fmt}_s": statistics.median(limits(runs, fmt))})
        if runs["naive_post"]:
            figures[f"bare_limit_{fmt}_s"] = statistics.median(limits(runs, fmt, bare=True))
    if "naive_png" in med:
        imports = import_seconds(png_root)
        figures.update({"naive_png_s": med["naive_png"], "naive_post_s": med["naive_post"],
                        "naive_import_s": imports,
                        "naive_import_share": imports / med["naive_png"]})
    noop = builder(all_root)
    noop_cli = statistics.median(cli_seconds(all_root, "build") for _ in range(3))
    changed, own, hand = change_one(all_root)
    warm_changed, warm_own = change_one_warm(all_root)
    figures.update({"one_changed_warm_pool_s": warm_changed["wall"],
                    "one_changed_warm_pool_own_run_s": warm_own,
                    "one_changed_warm_pool_over_own_s": warm_changed["wall"] - warm_own,
                    "one_changed_warm_pool_ran": warm_changed["ran"]})
    t = cold_all["timings"]
    work_s = post_cpu(cold_all)
    figures.update({
        "noop_s": noop["wall"], "noop_ran": noop["ran"], "noop_cli_s": noop_cli,
        "noop_fast": noop["fast"],
        "noop_heavy_modules": noop["heavy_modules"],
        "one_changed_s": changed["wall"], "one_changed_ran": changed["ran"],
        "one_changed_own_run_s": own, "one_changed_over_own_s": changed["wall"] - own,
        "one_changed_by_hand_s": hand,
        "ratio_one_changed_over_own_run": changed["wall"] / own if own else None,
        "ratio_one_changed_over_by_hand": changed["wall"] / hand,
        "one_changed_timings": changed["timings"],
        "builder_peak_mb": cold_all["self_kb"] / 1024,
        "child_peak_mb": cold_all["children_kb"] / 1024,
        "audit_cpu_s": t.get("audit", 0.0), "post_step_cpu_s": work_s,
        "audit_share_of_cpu": t.get("audit", 0.0) / cold_all["cpu_s"],
        "post_step_share_of_cpu": work_s / cold_all["cpu_s"],
        "site_s": t.get("site", 0.0), "site_share_of_wall": t.get("site", 0.0) / t["total"],
        "timings_cold_all": t,
    })


def post_cpu(build: dict) -> float:
    """The post step's seconds in one figfolio build, as figfolio timed them."""
    return sum(build["timings"].get(k, 0.0) for k in ("digests", "audit", "data"))


def limits(runs: dict[str, list[float]], fmt: str, bare: bool = False) -> list[float]:
    """Per round, the fastest a cold build that isolates each recipe in a fork could be here.

    A lower bound from parts measured in that round: importing the stack once
    (``stack_seconds``: no recipe can start in a fork before it), then every script in a fresh
    fork of a warm interpreter (the forked floor) and a post step, spread perfectly over the
    cores. The post step is figfolio's own as it timed it (digests, perceptual hash, two
    thumbnails, audit previews, data summaries) or, ``bare``, only what the naive contender
    does (one decode, a digest and one thumbnail a figure). Both leave out the builder, the
    site, the pipes and any idle core, so a real build is always slower.
    """
    post = runs["naive_post"] if bare else runs[f"post_{fmt}"]
    return [stack + (forked + p) / CORES for stack, forked, p
            in zip(runs["stack"], runs[f"forked_{fmt}_serial"], post)]


def round_ratios(runs: dict[str, list[float]]) -> dict[str, list[float]]:
    """The ratios the targets name, one per round (contenders of the same round paired)."""
    def over(a: list[float], b: list[float]) -> list[float]:
        return [round(x / y, 4) for x, y in zip(a, b)]

    floor_png = [f / CORES for f in runs["floor_png_serial"]]
    floor_all = [f / CORES for f in runs["floor_all_serial"]]
    limit_png, limit_all = limits(runs, "png"), limits(runs, "all")
    out = {"cold_over_floor_png": over(runs["cold_png"], floor_png),
           "cold_over_floor_all": over(runs["cold_all"], floor_all),
           "limit_over_floor_all": over(limit_all, floor_all),
           "cold_over_limit_png": over(runs["cold_png"], limit_png),
           "cold_over_limit_all": over(runs["cold_all"], limit_all)}
    if runs["naive_png"]:
        out.update({"cold_over_naive_png": over(runs["cold_png"], runs["naive_png"]),
                    "limit_over_naive_png": over(limit_png, runs["naive_png"]),
                    "bare_limit_over_naive_png": over(limits(runs, "png", bare=True),
                                                      runs["naive_png"]),
                    "bare_limit_over_floor_all": over(limits(runs, "all", bare=True),
                                                      floor_all)})
    return out


def scale_run(figures: dict, work: Path, count: int) -> None:
    """1,000 tiny recipes: no-op, re-rendering the whole site, builder memory."""
    tiny = make_catalogue(work / "tiny", count, tiny=True, formats=("png",))
    first = cold(tiny)
    noops = [builder(tiny) for _ in range(3)]
    noop_tiny = min(noops, key=lambda r: r["wall"])
    noop_tiny_cli = statistics.median(cli_seconds(tiny, "build") for _ in range(3))
    fulls = []
    for _ in range(2):  # the no-op without noop.json: every recipe loaded, looked up, judged
        (tiny / "build" / "cache" / "noop.json").unlink(missing_ok=True)
        fulls.append(builder(tiny))
    full = min(fulls, key=lambda r: r["wall"])
    shutil.rmtree(tiny / "build" / "site", ignore_errors=True)
    rerender = builder(tiny)
    figures.update({
        "scale_n": count, "scale_cold_s": first["wall"],
        "scale_noop_s": noop_tiny["wall"], "scale_noop_runs_s": [r["wall"] for r in noops],
        "scale_noop_cli_s": noop_tiny_cli, "scale_noop_timings": noop_tiny["timings"],
        "scale_noop_heavy_modules": noop_tiny["heavy_modules"],
        "scale_noop_fast": [r["fast"] for r in noops],
        "scale_noop_full_path_s": full["wall"], "scale_noop_full_path_timings": full["timings"],
        "scale_noop_full_path_fast": full["fast"],
        "scale_site_render_s": rerender["timings"].get("site", 0.0),
        "scale_builder_peak_mb": first["self_kb"] / 1024,
        "scale_noop_builder_peak_mb": noop_tiny["self_kb"] / 1024,
    })


def report(figures: dict) -> None:
    """Print every figure and the targets, and write them as JSON."""
    print()
    for key, value in figures.items():
        if isinstance(value, float):
            print(f"{key:36s} {value:10.3f}")
        elif not isinstance(value, dict):
            print(f"{key:36s} {value}")
    targets = [("cold/naive (png)", "ratio_cold_over_naive_png", 0.15),
               ("  limit/naive (png)", "ratio_limit_over_naive_png", 0.15),
               ("  bare limit/naive (png)", "ratio_bare_limit_over_naive_png", 0.15),
               ("cold/floor (all formats)", "ratio_cold_over_floor_all", 1.15),
               ("  limit/floor (all formats)", "ratio_limit_over_floor_all", 1.15),
               ("  bare limit/floor (all formats)", "ratio_bare_limit_over_floor_all", 1.15),
               ("no-op at scale (s)", "scale_noop_s", 0.5),
               ("one changed minus own run (s)", "one_changed_over_own_s", 1.0),
               ("  the same, serve's warm pool (s)", "one_changed_warm_pool_over_own_s", 1.0),
               ("builder peak at scale (MB)", "scale_builder_peak_mb", 250.0),
               ("search keystroke median (ms)", "search_keystroke_median_ms", 16.0)]
    print("\ntargets:")
    per_round = figures.get("round_ratios", {})
    for label, key, limit in targets:
        if key in figures:
            value = figures[key]
            rounds = per_round.get(key.removeprefix("ratio_"))
            seen = f"; rounds {', '.join(f'{x:.3f}' for x in rounds)}" if rounds else ""
            print(f"  {label:34s} {value:9.3f}  (target <= {limit:g}: "
                  f"{'met' if value <= limit else 'NOT met'}{seen})")
    if "one_changed_s" in figures:
        own, hand = figures["one_changed_own_run_s"], figures["one_changed_by_hand_s"]
        print(f"\none changed: build {figures['one_changed_s']:.2f} s; the recipe's own run in "
              f"its worker {own:.2f} s (ratio {figures['one_changed_s'] / own:.1f}x)"
              if own else "\none changed: no own-run time recorded")
        print(f"             the recipe run by hand (python figure.py, Agg, saved as the "
              f"naive contender saves) {hand:.2f} s "
              f"(ratio {figures['one_changed_s'] / hand:.2f}x)")
    out = HERE / "results"
    out.mkdir(exist_ok=True)
    path = out / f"{datetime.now(timezone.utc).strftime('%Y%m%dT%H%M%S')}.json"
    path.write_text(json.dumps(figures, indent=2, sort_keys=True))
    print(f"written: {path}")


if __name__ == "__main__":
    main()
