"""Generate invented monthly respiratory-consultation rates for the 24 Velmora districts.

Run ``python generate.py`` inside ``data/``: it rewrites ``monthly_rates.csv`` byte-identically.
Districts follow one of four hidden seasonal shapes (mid-winter peak, late-winter peak, summer
peak of the holiday coast, autumn peak) plus noise, so that seriation has structure to find.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240402
DISTRICTS = ["Amberlow", "Brisca", "Caddon Vale", "Dunmere", "Esker Bay", "Fallowby",
             "Greywick", "Harrel Fen", "Iverton", "Jessop's Reach", "Kelmarsh Down", "Lorrow",
             "Marrowby", "Nettlecombe", "Ossery Flats", "Pellam", "Quarrydale", "Rookhaven",
             "Saltmere", "Tarrow", "Umberfield", "Varrow Point", "Westerly Holm", "Yarncliffe"]
PEAK_MONTH = {"mid-winter": 1, "late winter": 3, "summer": 7, "autumn": 10}


def seasonal(peak: int, months: np.ndarray) -> np.ndarray:
    """A smooth yearly bump peaking at ``peak`` (cosine on the 12-month circle)."""
    return np.cos(2 * np.pi * (months - peak) / 12)


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    months = np.arange(1, 13)
    shapes = rng.choice(list(PEAK_MONTH), size=len(DISTRICTS), p=[0.35, 0.25, 0.2, 0.2])
    rows = []
    for district, shape in zip(DISTRICTS, shapes):
        base = rng.uniform(60, 140)
        amplitude = rng.uniform(0.25, 0.45)
        rate = base * (1 + amplitude * seasonal(PEAK_MONTH[shape], months))
        rate = rate * np.exp(rng.normal(0, 0.06, size=12))
        for month, value in zip(months, rate):
            rows.append({"district": district, "month": f"2023-{month:02d}",
                         "rate_per_10k": round(float(value), 2)})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n", float_format="%.2f")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "monthly_rates.csv")
