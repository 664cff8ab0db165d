"""Sleeps far longer than any time-out (and starts a child that sleeps too)."""
import subprocess
import time

child = subprocess.Popen(["sleep", "1000"])
open("child.pid", "w").write(str(child.pid))
time.sleep(10_000)
