"""A starter recipe: read the data, compute, draw one figure.

Runs by hand (`python figure.py`) and under figfolio, which saves every open figure.
"""
import csv

import matplotlib.pyplot as plt


def load(path="data/measurements.csv"):
    """Read the measurement column as floats."""
    with open(path, newline="", encoding="utf-8") as handle:
        return [float(row["value"]) for row in csv.DictReader(handle)]


def mean(values):
    """Arithmetic mean."""
    return sum(values) / len(values)


def draw(values):
    """Histogram with the mean marked; sized for one journal column (85 mm)."""
    fig, ax = plt.subplots(figsize=(85 / 25.4, 2.4), layout="constrained")
    ax.hist(values, bins=20, color="#4a6fa5", edgecolor="white")
    ax.axvline(mean(values), color="#1b1b1b", linewidth=1)
    ax.set_xlabel("Measurement (units)")
    ax.set_ylabel("Count")
    return fig


if __name__ == "__main__":
    draw(load())
    plt.show()
