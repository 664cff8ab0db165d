"""Relies on defaults: style, rcParams, numpy functions, the working folder."""
import os
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np

assert Path("figure.py").is_file(), os.getcwd()
assert "FIGFOLIO_POLLUTED" not in os.environ
x = np.linspace(0, 2 * np.pi, 80)
y = np.random.default_rng(3).normal(size=x.size) * 0.1 + np.sin(x)
fig, ax = plt.subplots()
ax.plot(x, y)
ax.set_title("defaults")
