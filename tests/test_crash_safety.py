"""Crash safety (issue 5 §4): SIGKILL the builder at any moment, then build again.

The last good site must still be there in full, the cache must hold no half-written entry that
is trusted, and the next build must complete. Two builds at once: the second stops with a clear
message instead of corrupting the cache.
"""
from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from test_end_to_end import BARS, LINE, add

SLOW = '''
import time
import matplotlib.pyplot as plt
time.sleep(1.5)
fig, ax = plt.subplots(figsize=(3, 2))
ax.plot([1, 2, 3], [3, 1, 2], color="#0072B2")
ax.set_xlabel("x")
ax.set_ylabel("y")
'''


def cli(root: Path, *args: str) -> list[str]:
    return [sys.executable, "-m", "figfolio", "-C", str(root), *args]


def site_complete(site: Path) -> None:
    """Every local link of the index resolves: the site is whole, not half-written."""
    index = (site / "index.html").read_text()
    links = set(re.findall(r'href="([^"#?:]+)"', index))
    assert links, "the index links to recipe pages"
    for link in links:
        assert (site / link).exists(), f"{link} is missing from the published site"


@pytest.fixture
def catalogue(tmp_path: Path) -> Path:
    root = tmp_path / "cat"
    (root / "recipes").mkdir(parents=True)
    (root / "figfolio.toml").write_text('title = "Crash test"\njobs = 2\n')
    add(root, "bars", BARS, data="group,count\nA,20\nB,35\nC,60\nD,42\n")
    add(root, "line", LINE)
    add(root, "slow-one", SLOW)
    add(root, "slow-two", SLOW.replace("[3, 1, 2]", "[1, 2, 2]"))
    return root


@pytest.mark.slow
def test_sigkill_at_any_moment_then_build_again(catalogue: Path):
    env = dict(os.environ, CI="1")
    first = subprocess.run(cli(catalogue, "build"), capture_output=True, text=True, env=env,
                           timeout=300)
    assert first.returncode in (0, 1), first.stderr
    site = catalogue / "build" / "site"
    site_complete(site)
    for delay in (0.3, 1.0, 2.0, 3.0, 4.5):  # during start, runs, staging and publishing
        proc = subprocess.Popen(cli(catalogue, "build", "--force"), env=env,
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                start_new_session=True)
        time.sleep(delay)
        os.killpg(proc.pid, signal.SIGKILL)  # the builder and its workers, no clean-up at all
        proc.wait()
        site_complete(site)  # the last good site is still served in full
    again = subprocess.run(cli(catalogue, "build"), capture_output=True, text=True, env=env,
                           timeout=300)
    assert again.returncode in (0, 1), again.stdout + again.stderr
    assert "4 recipe(s)" in again.stdout
    site_complete(site)
    tmp = catalogue / "build" / "cache" / "tmp"
    left = sorted(str(p.relative_to(tmp)) for p in tmp.rglob("*")) if tmp.exists() else []
    assert not left, f"leftovers of killed builds are cleared: {left[:10]}"
    assert not list((catalogue / "build").glob(".site-*")), "no half-built site folders remain"


def test_two_builds_at_once(catalogue: Path):
    env = dict(os.environ, CI="1")
    first = subprocess.Popen(cli(catalogue, "build"), env=env, stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    time.sleep(1.0)
    second = subprocess.run(cli(catalogue, "build"), env=env, capture_output=True, text=True,
                            timeout=300)
    out, err = first.communicate(timeout=300)
    assert first.returncode in (0, 1), err
    if second.returncode == 2:  # it met the lock: a clear message, no traceback
        assert "another figfolio build" in second.stderr
        assert "Traceback" not in second.stderr
    else:  # it waited for the first one and then found everything cached
        assert "from cache" in second.stdout
