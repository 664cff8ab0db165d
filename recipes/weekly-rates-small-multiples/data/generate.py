"""Generate the invented weekly visit counts for the 24 Velmora districts (seeded, byte-stable).

Run ``python generate.py`` inside ``data/``: it rewrites ``weekly_visits.csv`` identically.
Each district gets a population, a baseline rate, a linear trend over the year and a shared
winter bump; weekly counts are Poisson draws. Nothing here describes a real place.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240401
DISTRICTS = ["Amberlow", "Brisca", "Caddon Vale", "Dunmere", "Esker Bay", "Fallowby",
             "Greywick", "Harrel Fen", "Iverton", "Jessop's Reach", "Kelmarsh Down", "Lorrow",
             "Marrowby", "Nettlecombe", "Ossery Flats", "Pellam", "Quarrydale", "Rookhaven",
             "Saltmere", "Tarrow", "Umberfield", "Varrow Point", "Westerly Holm", "Yarncliffe"]
WEEKS = 52


def make() -> pd.DataFrame:
    """One row per district and ISO week of 2023."""
    rng = np.random.default_rng(SEED)
    rows = []
    week = np.arange(1, WEEKS + 1)
    winter = 6.0 * np.cos(2 * np.pi * (week - 2) / WEEKS)
    for district in DISTRICTS:
        population = int(rng.integers(9_000, 60_000))
        base = rng.uniform(38, 70)
        slope = rng.normal(0.0, 0.18)
        rate = np.clip(base + slope * (week - 26.5) + winter, 5, None)
        visits = rng.poisson(rate * population / 10_000)
        for w, v in zip(week, visits):
            rows.append({"district": district, "iso_week": f"2023-W{w:02d}", "week": int(w),
                         "population": population, "visits": int(v),
                         "rate_per_10k": round(10_000 * v / population, 3)})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Write to a temporary file then rename, so a crash never leaves half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n", float_format="%.3f")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "weekly_visits.csv")
