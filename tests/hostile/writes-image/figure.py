"""Saves a figure itself into plots/, then closes it: no figure stays open."""
from pathlib import Path

import matplotlib.pyplot as plt

Path("plots").mkdir(exist_ok=True)
fig, ax = plt.subplots(figsize=(2, 2))
ax.scatter([1, 2, 3], [3, 1, 2])
fig.savefig("plots/scatter.png", dpi=50)
plt.close(fig)
