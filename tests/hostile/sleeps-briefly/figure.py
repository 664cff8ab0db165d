"""Sleeps a little before drawing, to make scheduling order observable."""
import time
from pathlib import Path

import matplotlib.pyplot as plt

time.sleep(float(Path("seconds.txt").read_text()))
plt.plot([0], [0], "o")
