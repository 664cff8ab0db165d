"""Changes every piece of global state a later recipe could trip over."""
import os
import sys

import matplotlib as mpl
import matplotlib.pyplot as plt
import numpy as np

plt.style.use("dark_background")
mpl.rcParams["lines.linewidth"] = 9
mpl.rcParams["figure.figsize"] = (11, 2)
mpl.rcParams["savefig.dpi"] = 37
np.random.seed(12345)
os.environ["MPLBACKEND"] = "pdf"
os.environ["FIGFOLIO_POLLUTED"] = "yes"
os.chdir("/")
np.linspace = lambda *args, **kwargs: np.zeros(3)
sys.modules["numpy"].pi = 3.0
plt.plot([1, 5, 2])
