"""Fails inside its own helper function, after drawing half a figure."""
import matplotlib.pyplot as plt


def check_column(name):
    raise ValueError(f"column {name!r} has no rows")


fig, ax = plt.subplots()
ax.plot([1, 2, 3])
check_column("age")
