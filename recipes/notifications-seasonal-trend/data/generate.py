"""Write data/enteric_notifications.csv: invented monthly notification counts.

Monthly notifications of a (fictional) notifiable enteric infection across the Velmora Regional
Health Network, January 2014 to December 2023: a slow upward trend, a summer peak, Poisson
noise and two short outbreaks (September 2017 and March 2021) that a robust decomposition
should isolate in its remainder. The data are invented.

Run from the recipe folder: ``python data/generate.py``. The seed is fixed, so the file is
rewritten byte for byte.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20240611
FIRST_YEAR, YEARS = 2014, 10
OUTBREAKS = {"2017-09": 75, "2021-03": 60}  # extra cases in an outbreak month


def expected(t: np.ndarray, month: np.ndarray) -> np.ndarray:
    """Mean count: log-linear trend (about 5 % a year) and a peak in August."""
    return np.exp(np.log(58.0) + 0.004 * t + 0.38 * np.cos(2 * np.pi * (month - 8) / 12))


def make_rows(rng: np.random.Generator) -> list[tuple[str, int]]:
    t = np.arange(12 * YEARS)
    month = t % 12 + 1
    counts = rng.poisson(expected(t, month))
    labels = [f"{FIRST_YEAR + k // 12}-{k % 12 + 1:02d}" for k in t]
    return [(lab, int(c) + OUTBREAKS.get(lab, 0)) for lab, c in zip(labels, counts)]


def main() -> None:
    out = Path(__file__).resolve().parent / "enteric_notifications.csv"
    tmp = out.with_suffix(".tmp")
    with tmp.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["month", "notifications"])
        writer.writerows(make_rows(np.random.default_rng(SEED)))
    tmp.replace(out)


if __name__ == "__main__":
    main()
