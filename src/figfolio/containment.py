"""Keep one recipe's process in a box, watch it, and turn how it ended into a RunResult.

Both the fork server (worker.py) and spawn mode (executor.run_isolated) use these pieces, so a
recipe gets the same limits whichever way it was started:

* own session / process group, so a time-out kills the recipe *and* anything it started;
* an address-space limit (``RLIMIT_AS``) of ``memory_mb`` MB above what the process already
  maps when the recipe starts. Why relative: a forked child already maps numpy, pandas and
  matplotlib (hundreds of MB of *virtual* space), which a fixed limit would count against the
  recipe. Why RLIMIT_AS and not RSS or cgroups: Linux does not enforce RLIMIT_RSS, cgroups need
  privileges, and RLIMIT_AS makes a runaway allocation fail as a MemoryError inside the recipe
  instead of waking the kernel's OOM killer, which could pick the builder. Only the soft limit is
  set to that value; the hard limit leaves 256 MB more so figfolio can still write its report
  after a MemoryError. It guards against accidents, not against a recipe that raises it itself;
* no network (a new, empty network namespace with only loopback up) when the job asks for none
  and the process may create one (root on Linux); otherwise provenance says it was unavailable;
* stdout and stderr drained through pipes, keeping only the first and last ``max_output_kb`` KB
  and the byte count, so a recipe printing gigabytes costs neither memory nor disk.
"""
from __future__ import annotations

import ctypes
import json
import os
import select
import signal
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from figfolio.runner import Job, RunResult, broken

CLONE_NEWNET = 0x40000000   # <linux/sched.h>
PR_SET_PDEATHSIG = 1        # <linux/prctl.h>
SIOCGIFFLAGS, SIOCSIFFLAGS, IFF_UP = 0x8913, 0x8914, 0x1   # <linux/sockios.h>, <net/if.h>
REPORT_HEADROOM = 256 * 2**20
RESULT_FILE = "result.json"
KERNEL_PID_FILE = "kernel.pid"  # written by the notebook runner's first cell
CHUNK = 65536


# --- inside the recipe's process ----------------------------------------------------------

def contain(job: Job) -> dict[str, Any]:
    """Apply the memory limit and network isolation to THIS process; return provenance notes."""
    notes: dict[str, Any] = {"memory_limit_mb": job.memory_mb}
    die_with_parent()
    if job.kind == "notebook":
        # The kernel is a new process with its own threads and libraries; it sets the limit
        # on itself in figfolio's first cell (runner_kinds), so this process must not cap it.
        notes["memory_limit"] = "set inside the notebook kernel"
    else:
        notes["memory_limit"] = set_memory_limit(job.memory_mb)
    notes["network"] = "allowed" if job.network else isolate_network()
    return notes


def die_with_parent() -> None:
    """Ask Linux to SIGKILL this recipe when its supervisor dies (PR_SET_PDEATHSIG).

    Why: a supervisor killed from outside (a Dask worker restarted by its nanny, a builder hit
    with SIGKILL) can no longer enforce the time-out, and the recipe would run on as an orphan.
    """
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
    except (OSError, AttributeError):
        pass


def _mapped_bytes() -> int:
    """Virtual size of this process (VmSize), 0 when /proc is not there."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmSize:"):
                return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


def set_memory_limit(memory_mb: int) -> str:
    """Soft RLIMIT_AS = current virtual size + memory_mb MB (see module docstring)."""
    try:
        import resource
    except ImportError:
        return "unavailable (no resource module)"
    soft = _mapped_bytes() + memory_mb * 2**20
    try:
        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        new_hard = soft + REPORT_HEADROOM
        if hard != resource.RLIM_INFINITY:
            new_hard = min(new_hard, hard)
            soft = min(soft, hard)
        resource.setrlimit(resource.RLIMIT_AS, (soft, new_hard))
    except (ValueError, OSError) as exc:
        return f"unavailable ({exc})"
    return f"address space {soft // 2**20:,} MB ({memory_mb:,} MB above start)"


def isolate_network() -> str:
    """Move this process into a new network namespace with loopback up; say what happened."""
    if not hasattr(os, "geteuid") or os.geteuid() != 0:
        return "network isolation unavailable (needs root on Linux)"
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        if libc.unshare(CLONE_NEWNET) != 0:
            return f"network isolation unavailable ({os.strerror(ctypes.get_errno())})"
    except (OSError, AttributeError) as exc:
        return f"network isolation unavailable ({exc})"
    _loopback_up()
    return "isolated (no network; loopback only)"


def _loopback_up() -> None:
    """Bring 'lo' up: Jupyter kernels talk to their client over 127.0.0.1."""
    import fcntl
    import socket
    import struct

    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as sock:
            got = fcntl.ioctl(sock.fileno(), SIOCGIFFLAGS, struct.pack("16sh14x", b"lo", 0))
            flags = struct.unpack("16sh14x", got)[1]
            fcntl.ioctl(sock.fileno(), SIOCSIFFLAGS,
                        struct.pack("16sh14x", b"lo", flags | IFF_UP))
    except OSError:
        pass


def write_result(work: Path, result: RunResult) -> None:
    """work/result.json, atomically; unserialisable facts become strings rather than a crash."""
    from figfolio.runner_capture import plain

    target = work / RESULT_FILE
    tmp = work / f".tmp-{RESULT_FILE}"
    tmp.write_text(json.dumps(result.to_dict(), default=plain), encoding="utf-8")
    os.replace(tmp, target)


def child_body(job: Job, work: Path) -> int:
    """Everything the recipe's process does after its fds are in place; returns the exit code."""
    from figfolio.runner import run_job

    notes = contain(job)
    result = run_job(job, work)
    result.provenance.update(notes)
    write_result(work, result)
    return 0


# --- in the supervising process -----------------------------------------------------------

class Capture:
    """Keeps the first and last ``cap`` bytes of a stream and counts all of it."""

    def __init__(self, cap: int) -> None:
        self.cap = max(cap, 1)
        self.head = bytearray()
        self.tail = bytearray()
        self.total = 0

    def feed(self, data: bytes) -> None:
        self.total += len(data)
        if len(self.head) < self.cap:
            self.head += data[: self.cap - len(self.head)]
        self.tail += data[-self.cap:]
        if len(self.tail) > 2 * self.cap:
            del self.tail[: len(self.tail) - self.cap]

    def parts(self) -> tuple[str, str]:
        """(head, tail) as text; head is empty when the tail holds everything."""
        tail = bytes(self.tail[-self.cap:])
        head = bytes(self.head[: max(0, self.total - len(tail))])
        return head.decode("utf-8", "replace"), tail.decode("utf-8", "replace")

    def note(self, name: str) -> str | None:
        """'stdout: 52,428,800 bytes, kept first 1 MB and last 1 MB' when it was cut."""
        if self.total <= self.cap:
            return None
        return f"{name}: {self.total:,} bytes, kept first {_size(self.cap)} and last " \
               f"{_size(self.cap)}"


def _size(n: int) -> str:
    return f"{n // 2**20} MB" if n % 2**20 == 0 else f"{n / 1024:g} KB"


@dataclass
class Outcome:
    """How a supervised process ended."""

    status: int = 0
    timed_out: bool = False
    max_rss_kb: int = 0
    seconds: float = 0.0
    streams: dict[str, Capture] = field(default_factory=dict)


def supervise(pid: int, fds: dict[str, int], timeout: float, cap: int) -> Outcome:
    """Drain the pipes while waiting for ``pid``; kill its process group at the deadline."""
    start = time.monotonic()
    outcome = Outcome(streams={name: Capture(cap) for name in fds})
    open_fds = {fd: name for name, fd in fds.items()}
    pidfd = _pidfd(pid)
    deadline = start + timeout
    ended = None
    while ended is None:
        left = deadline - time.monotonic()
        if left <= 0:
            outcome.timed_out = True
            _kill_group(pid)
            ended = os.wait4(pid, 0)
            break
        watch = list(open_fds) + ([pidfd] if pidfd is not None else [])
        wait = left if pidfd is not None else min(left, 0.05)
        ready: list[int] = []
        if watch:
            ready = select.select(watch, [], [], wait)[0]
        else:
            time.sleep(wait)
        for fd in ready:
            if fd in open_fds:
                _read_into(fd, open_fds, outcome)
        got = os.wait4(pid, os.WNOHANG)
        if got[0] == pid:
            ended = got
    if pidfd is not None:
        os.close(pidfd)
    _kill_group(pid)  # anything the recipe left running in its group
    _drain_rest(open_fds, outcome)
    outcome.status, outcome.max_rss_kb = ended[1], ended[2].ru_maxrss
    outcome.seconds = time.monotonic() - start
    return outcome


def _pidfd(pid: int) -> int | None:
    try:
        return os.pidfd_open(pid)  # type: ignore[attr-defined]
    except (AttributeError, OSError):
        return None


def _kill_group(pid: int) -> None:
    try:
        os.killpg(pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError, OSError):
        pass


def _read_into(fd: int, open_fds: dict[int, str], outcome: Outcome) -> bool:
    """Read one chunk; on EOF close the fd. Returns False when nothing more is to be had."""
    try:
        data = os.read(fd, CHUNK)
    except BlockingIOError:
        return False
    except OSError:
        data = b""
    if not data:
        os.close(fd)
        del open_fds[fd]
        return False
    outcome.streams[open_fds[fd]].feed(data)
    return True


def _drain_rest(open_fds: dict[int, str], outcome: Outcome) -> None:
    """After the process ended: read what is still buffered, briefly, then close."""
    until = time.monotonic() + 2.0
    while open_fds and time.monotonic() < until:
        ready, _, _ = select.select(list(open_fds), [], [], 0.1)
        if not ready:
            break
        for fd in ready:
            _read_into(fd, open_fds, outcome)
    for fd in list(open_fds):
        os.close(fd)
        del open_fds[fd]


def finish(job: Job, work: Path, outcome: Outcome, before: dict[str, tuple[int, int]]
           ) -> RunResult:
    """Combine result.json (if the recipe got that far) with how the process ended."""
    from figfolio.runner_capture import changed_files, snapshot

    result = _read_result(job, work, outcome)
    if outcome.timed_out or not (work / RESULT_FILE).is_file():
        _kill_kernel(work / KERNEL_PID_FILE)
    for name, capture in outcome.streams.items():
        head, tail = capture.parts()
        setattr(result, f"{name}_head", head)
        setattr(result, f"{name}_tail", tail)
        note = capture.note(name)
        if note:
            result.warnings.append(note)
            result.provenance[f"{name}_bytes"] = capture.total
    for rel in changed_files(before, snapshot(job.folder)):
        result.warnings.append(f"tried to write into recipe folder: {rel}")
    result.provenance.setdefault("run_seconds", round(outcome.seconds, 4))
    return result


def _kill_kernel(pid_file: Path) -> None:
    """A notebook's kernel runs in its own session; kill it when its client was killed."""
    try:
        pid = int(pid_file.read_text().strip())
    except (OSError, ValueError):
        return
    _kill_group(pid)


def _read_result(job: Job, work: Path, outcome: Outcome) -> RunResult:
    path = work / RESULT_FILE
    if outcome.timed_out:
        return broken(job.slug, f"timed out after {job.timeout:g} s",
                      duration=round(outcome.seconds, 4))
    if path.is_file() and os.WIFEXITED(outcome.status) and os.WEXITSTATUS(outcome.status) == 0:
        try:
            return RunResult.from_dict(json.loads(path.read_text(encoding="utf-8")))
        except (ValueError, TypeError) as exc:
            return broken(job.slug, f"figfolio could not read the recipe's result ({exc})")
    return broken(job.slug, death_reason(job, outcome), duration=round(outcome.seconds, 4))


def death_reason(job: Job, outcome: Outcome) -> str:
    """Why a process ended without a result: a signal (maybe the memory limit) or an exit code."""
    status = outcome.status
    if os.WIFSIGNALED(status):
        sig = os.WTERMSIG(status)
        name = _signal_name(sig)
        near_limit = outcome.max_rss_kb * 1024 >= 0.8 * job.memory_mb * 2**20
        if sig == signal.SIGKILL and near_limit:
            return f"killed (memory limit of {job.memory_mb:,} MB?)"
        return f"killed by signal {name}"
    code = os.WEXITSTATUS(status) if os.WIFEXITED(status) else status
    return f"the process exited with status {code} before figfolio could collect its figures"


def _signal_name(sig: int) -> str:
    try:
        return signal.Signals(sig).name
    except ValueError:
        return str(sig)
