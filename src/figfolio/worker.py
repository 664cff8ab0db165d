"""The warm worker: imports the rendering stack once, then forks one child per recipe.

Started by ``executor.LocalExecutor`` as ``python -m figfolio.worker`` with PYTHONHASHSEED=0
(the hash seed is fixed when an interpreter starts, so it must be set here, not in the child).
Why fork from a warm process: importing numpy, pandas and matplotlib and loading the font list
costs about a second; a forked child gets them for free and still cannot disturb the next
recipe, because it dies afterwards.

Protocol on stdin/stdout, one frame = 8-byte big-endian length + pickle:
  worker -> builder  ("ready", {"pid", "warm_seconds"})
  builder -> worker  (Job, work_dir)
  worker -> builder  ("started", child_pid)  then, when the job carries a post step,
                     ("posting", post_server_pid), then  ("result", RunResult dict)
The post step (poststep.py: digests, thumbnails, audit, data summaries) runs after the recipe's
child ended, in this worker's post server (``poststep.PostServer``, a fork of this warm process
made before it staged anything), so it uses the worker's core instead of the builder's main
thread, and never runs in a process that recipe code touched.
EOF on stdin ends the worker. ``python -m figfolio.worker --one WORK`` runs the single job
pickled in ``WORK/job.pickle`` in this very process (spawn mode, for platforms without fork).
``--preload a.b,c`` also imports those modules before answering "ready" (see ``PRELOADABLE``).
``--twins IN:OUT,IN:OUT`` makes the worker, once warm, fork one twin server per pair of pipe
ends the builder passed it (``serve_twin``): N workers then pay for one warm-up, not N.
"""
from __future__ import annotations

import os
import pickle
import select
import sys
import time
import traceback
from pathlib import Path
from typing import Any, NoReturn

HEADER = 8
JOB_FILE = "job.pickle"
# Packages whose modules the builder may ask a worker to import ahead (because the recipes it
# is about to run import them): heavy to import, and importing them changes no state a recipe
# could see (no matplotlib styles or colour maps registered, no options set). Packages that
# register colour maps or styles on import (seaborn, for one) are left to the recipe, so a
# recipe that forgot its import fails here as it would when run by hand.
PRELOADABLE = ("scipy", "statsmodels", "sklearn", "patsy", "lifelines", "skimage")


class ProtocolEOF(Exception):
    """The other side closed the pipe."""


def send_frame(fd: int, message: Any) -> None:
    """Write one length-prefixed pickle frame, all of it."""
    data = pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL)
    view = memoryview(len(data).to_bytes(HEADER, "big") + data)
    while view:
        written = os.write(fd, view)
        view = view[written:]


def _read_exact(fd: int, size: int, deadline: float | None) -> bytes:
    chunks = bytearray()
    while len(chunks) < size:
        if deadline is not None:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([fd], [], [], left)[0]:
                raise TimeoutError("no answer from the worker in time")
        data = os.read(fd, min(size - len(chunks), 1 << 20))
        if not data:
            raise ProtocolEOF("pipe closed")
        chunks += data
    return bytes(chunks)


def recv_frame(fd: int, deadline: float | None = None) -> Any:
    """Read one frame; ProtocolEOF when the pipe closed, TimeoutError after ``deadline``."""
    size = int.from_bytes(_read_exact(fd, HEADER, deadline), "big")
    return pickle.loads(_read_exact(fd, size, deadline))


def preload(modules: list[str]) -> list[str]:
    """Import each allowed module (see PRELOADABLE); return those that imported."""
    import importlib

    done = []
    for name in modules:
        if name.partition(".")[0] not in PRELOADABLE:
            continue
        try:
            importlib.import_module(name)
            done.append(name)
        except Exception:  # the recipe will meet (and report) the same error itself
            continue
    return done


def warm_up(modules: list[str] | None = None) -> float:
    """Import what nearly every recipe imports, and build matplotlib's font list once."""
    start = time.perf_counter()
    preload(modules or [])
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.font_manager
    import matplotlib.pyplot  # noqa: F401
    import numpy  # noqa: F401
    import pandas  # noqa: F401
    import PIL.Image  # noqa: F401

    import figfolio.containment  # noqa: F401
    import figfolio.runner  # noqa: F401
    import figfolio.runner_capture  # noqa: F401
    matplotlib.font_manager.fontManager.findfont("DejaVu Sans")
    figfolio.runner_capture.distribution_owners()
    try:
        import figfolio.audit  # noqa: F401
    except Exception:  # the audit module is optional for the runner
        pass
    _warm_post()
    _rehearse()
    import platform
    platform.platform()  # cached by the platform module; every run's provenance asks for it
    figfolio.runner_capture.remember_loaded_versions()
    from figfolio.fingerprint import DEFAULT_MAX_PIXELS
    figfolio.runner_capture.keep_prepared(DEFAULT_MAX_PIXELS)
    return time.perf_counter() - start


def _warm_post() -> None:
    """Import what the post step uses, so each post fork starts with it loaded."""
    try:
        import scipy.fft  # noqa: F401

        import figfolio.data  # noqa: F401
        import figfolio.poststep  # noqa: F401
        from figfolio import fingerprint
        fingerprint.thumb_suffix()  # loads Pillow's WebP plugin
    except Exception:  # a missing piece only means the post fork imports it itself
        pass


REHEARSAL_TOML = """title = "Rehearsal"
summary = "figfolio's own tiny recipe, staged once in the warm worker."
alt = "A line chart of three invented points."
data = ["data/values.csv"]
data_origin = "synthetic"
"""


def _rehearse() -> None:
    """Do once, here in the warm parent, what every fork does first, so it is inherited.

    Why: much of a fork's cost was first-call set-up that each child rebuilt and threw away:
    fonts, mathtext and the PNG, SVG and PDF writers, the WebP codec, FFT plans, pandas' CSV
    parser, the audit's lookup tables and code paths. Staging one output took a fresh fork
    65 ms before this and 17 ms after (a 450 x 300 figure). The rehearsal stages figfolio's
    own three-point recipe in a temporary folder, never recipe code, and leaves no figure open
    and no file behind. Any failure only means the forks pay the set-up themselves.
    """
    import io
    import shutil
    import tempfile

    tmp = Path(tempfile.mkdtemp(prefix="figfolio-rehearsal-"))
    try:
        import matplotlib.pyplot as plt
        import pandas

        from figfolio import poststep
        from figfolio.audit_facts import collect_facts
        from figfolio.recipe import load_recipe
        from figfolio.runner import Output, RunResult
        from figfolio.settings import Settings

        folder = tmp / "recipes" / "rehearsal"
        (folder / "data").mkdir(parents=True)
        (folder / "recipe.toml").write_text(REHEARSAL_TOML, encoding="utf-8")
        (folder / "figure.py").write_text("", encoding="utf-8")
        csv = folder / "data" / "values.csv"
        csv.write_text("week,rate,group\n1,2.5,a\n2,3.0,b\n3,2.0,a\n", encoding="utf-8")
        frame = pandas.read_csv(csv)
        fig, ax = plt.subplots(figsize=(2, 1.5))
        ax.plot(frame["week"], frame["rate"], color="#0072B2", label="rate")
        ax.scatter(frame["week"], frame["rate"], color="#D55E00", s=4)
        ax.set_title("rehearsal $x^2$")
        ax.set_xlabel("Week")
        ax.legend()
        facts = collect_facts(fig)
        png = tmp / "figure-1.png"
        fig.savefig(png, dpi=100)
        for fmt in ("svg", "pdf"):
            fig.savefig(io.BytesIO(), format=fmt)
        plt.close("all")
        settings = Settings(root=tmp)
        result = RunResult(slug="rehearsal", outputs=[Output("figure-1.png", "png", 1, str(png))],
                           facts=[{**facts, "figure": 1}])
        poststep.stage(result, load_recipe(folder, settings), settings, tmp / "stage")
    except Exception:  # noqa: BLE001 - see docstring
        pass
    finally:
        import matplotlib.pyplot as plt
        plt.close("all")
        shutil.rmtree(tmp, ignore_errors=True)


def freeze_heap() -> None:
    """Move every object the warm-up made into the garbage collector's permanent generation.

    Why: with numpy, pandas, matplotlib, scipy and statsmodels loaded the parent holds over a
    million tracked objects. A full collection in a forked child walked all of them and wrote
    to each one's header, so the child both spent the time and copied most of the parent's
    heap page by page (copy-on-write). Frozen objects are skipped (the ``gc.freeze`` recipe
    for pre-fork servers in Python's documentation). Measured: 60 benchmark recipes forked
    one after another from one warm worker took 31.8 s without and 27.9 s with it (means of
    three alternating runs). The parent never frees them anyway: it lives until the build ends.
    """
    import gc

    gc.collect()
    gc.freeze()
    gc.enable()  # the children collect their own garbage as any Python process does


def run_forked(job: Any, work: Path, private_fds: list[int], on_start: Any) -> dict[str, Any]:
    """Fork a child for ``job``, supervise it, and return the RunResult as a dict."""
    from figfolio.containment import finish, supervise
    from figfolio.runner_capture import snapshot

    work.mkdir(parents=True, exist_ok=True)
    before = snapshot(job.folder)
    out_r, out_w = os.pipe()
    err_r, err_w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child never returns from here
        _child(job, work, out_w, err_w, [out_r, err_r, *private_fds])
    os.close(out_w)
    os.close(err_w)
    on_start(pid)
    outcome = supervise(pid, {"stdout": out_r, "stderr": err_r}, job.timeout,
                        job.max_output_kb * 1024)
    return finish(job, work, outcome, before).to_dict()


def _child(job: Any, work: Path, out_w: int, err_w: int, close: list[int]) -> None:
    """In the forked child: own session, fds onto the pipes, run, and _exit without cleanup."""
    import signal

    code = 70
    try:
        os.setsid()
        for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGPIPE):
            signal.signal(sig, signal.SIG_DFL)
        for fd in close:
            os.close(fd)
        null = os.open(os.devnull, os.O_RDONLY)
        os.dup2(null, 0)
        os.dup2(out_w, 1)
        os.dup2(err_w, 2)
        for fd in (null, out_w, err_w):
            os.close(fd)
        from figfolio.containment import child_body
        code = child_body(job, work)
    except BaseException:  # noqa: BLE001 - report and leave; never return into the worker
        traceback.print_exc()
    finally:
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except Exception:
                pass
        os._exit(code)


def serve(modules: list[str] | None = None, twins: list[tuple[int, int]] | None = None
          ) -> NoReturn:
    """Warm up, fork the twins, then serve jobs from stdin until it closes; then leave."""
    proto_out = os.dup(1)
    os.dup2(2, 1)  # stray prints from imports must not corrupt the protocol
    import gc
    gc.disable()  # imports make many objects and few cycles: one collection at the end
    warm = warm_up(modules)   # (1.76 s instead of 2.0 s with scipy and statsmodels preloaded)
    freeze_heap()
    kids = []
    for k, (job_in, result_out) in enumerate(twins or []):
        others = [fd for pair in (twins or [])[k + 1:] for fd in pair]
        kids.append(serve_twin(job_in, result_out, [proto_out, *others], warm))
    code = _loop(0, proto_out, warm)
    for pid in kids:  # the builder closes the twins' pipes first (LocalExecutor.close)
        if pid is not None:
            os.waitpid(pid, 0)
    # Nothing is left to flush or clean, and tearing down an interpreter with the stack
    # loaded takes 0.2 s: leave at once, the twins reaped (so their CPU time is accounted).
    os._exit(code)


def serve_twin(job_in: int, result_out: int, close: list[int], warm: float) -> int | None:
    """Fork a second server from this warm process, talking over its own pair of pipes.

    Why: each worker used to import the stack and rehearse on its own, about 1.8 s of CPU
    apiece, and on a 2-core machine the second warm-up also competed with the builder's data
    screen. A twin shares the warm pages (copy-on-write) and is ready in milliseconds. It
    leads its own session like a worker the builder started, and ends when the builder
    closes its pipe, as any worker does. Returns its pid; None when the fork failed, which
    only closes the pipes: the builder then starts that worker the ordinary way.
    """
    try:
        pid = os.fork()
    except OSError:
        pid = None
    if pid == 0:
        code = 1
        try:
            os.setsid()
            for fd in close:
                os.close(fd)
            os.dup2(job_in, 0)
            os.close(job_in)
            code = _loop(0, result_out, warm)
        except BaseException:  # noqa: BLE001 - the builder sees the pipe close and copes
            code = 1
        finally:
            os._exit(code)
    os.close(job_in)
    os.close(result_out)
    return pid


def _loop(job_in: int, proto_out: int, warm: float) -> int:
    """The fork-server loop: read a job, fork, answer, until ``job_in`` closes."""
    from figfolio.poststep import PostServer

    send_frame(proto_out, ("ready", {"pid": os.getpid(), "warm_seconds": warm}))
    posts = PostServer([job_in, proto_out])
    try:
        return _jobs(job_in, proto_out, posts)
    finally:
        posts.stop()  # reaped here, so its CPU time counts with this worker's


def _jobs(job_in: int, proto_out: int, posts: Any) -> int:
    while True:
        try:
            job, work = recv_frame(job_in)
        except ProtocolEOF:
            return 0
        try:
            result = run_forked(job, Path(work), [0, proto_out, *posts.fds()],
                                lambda pid: send_frame(proto_out, ("started", pid)))
        except Exception as exc:  # a worker bug: report it as this job's failure, keep serving
            from figfolio.runner import broken
            result = broken(job.slug, f"figfolio worker error: {type(exc).__name__}: {exc}",
                            traceback=traceback.format_exc()).to_dict()
        if getattr(job, "post", None) is not None:
            result["staged"] = posts.stage(result, job.post, Path(work),
                                           lambda pid: send_frame(proto_out, ("posting", pid)))
        send_frame(proto_out, ("result", result))


def run_one(work: Path) -> int:
    """Spawn mode: run the pickled job of ``work`` here; the parent supervises this process."""
    from figfolio.containment import child_body

    job = pickle.loads((work / JOB_FILE).read_bytes())
    return child_body(job, work)


USAGE = "usage: python -m figfolio.worker [--one WORK_DIR | [--preload MODULE,...] " \
        "[--twins IN:OUT,...]]"


def main(argv: list[str]) -> int:
    if argv[:1] == ["--one"] and len(argv) == 2:
        return run_one(Path(argv[1]))
    options = dict(zip(argv[::2], argv[1::2]))
    if len(argv) % 2 or set(options) - {"--preload", "--twins"}:
        print(USAGE, file=sys.stderr)
        return 2
    try:
        twins = [(int(a), int(b)) for a, _, b in
                 (pair.partition(":") for pair in options.get("--twins", "").split(",") if pair)]
    except ValueError:
        print(USAGE, file=sys.stderr)
        return 2
    return serve([m for m in options.get("--preload", "").split(",") if m], twins)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
