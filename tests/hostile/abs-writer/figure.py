"""Writes to an absolute path (read from target.txt) outside its scratch copy."""
from pathlib import Path

import matplotlib.pyplot as plt

target = Path(Path("target.txt").read_text().strip())
target.write_text("written by the recipe\n")
plt.plot([3, 1, 2])
