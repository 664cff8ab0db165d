"""Progress for long work: a one-line bar on a terminal, plain lines in CI and logs.

Why both: a terminal user wants to see motion without a scrolling wall; a CI log wants one line
per finished recipe that still reads well after the fact.
"""
from __future__ import annotations

import os
import sys
import time
from typing import TextIO


class Progress:
    """Counts finished items out of ``total`` and reports each one."""

    def __init__(self, total: int, label: str, stream: TextIO | None = None,
                 quiet: bool = False) -> None:
        self.total = total
        self.label = label
        self.done = 0
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.started = time.perf_counter()
        self.bar = (not os.environ.get("CI")) and hasattr(self.stream, "isatty") \
            and self.stream.isatty()

    def step(self, name: str, word: str) -> None:
        """One item finished; ``word`` is its verdict or status."""
        self.done += 1
        if self.quiet or self.total == 0:
            return
        if self.bar:
            width = 28
            filled = int(width * self.done / self.total)
            line = (f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] "
                    f"{self.done}/{self.total} {name[:30]:<30} {word:<11}")
            self.stream.write(line)
            if self.done == self.total:
                self.stream.write("\r" + " " * len(line) + "\r")
        else:
            self.stream.write(f"{self.label} {self.done}/{self.total} {name}: {word}\n")
        self.stream.flush()

    @property
    def seconds(self) -> float:
        return time.perf_counter() - self.started
