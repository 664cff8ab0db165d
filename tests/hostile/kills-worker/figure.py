"""Kills its parent process, but only when the parent is a figfolio fork-server worker."""
import os
import signal
import time
from pathlib import Path

parent = os.getppid()
argv = Path(f"/proc/{parent}/cmdline").read_bytes().split(b"\0")
if b"figfolio.worker" in argv and b"--one" not in argv:
    os.kill(parent, signal.SIGKILL)
time.sleep(30)
