"""Sends SIGKILL to its own process."""
import os
import signal

os.kill(os.getpid(), signal.SIGKILL)
