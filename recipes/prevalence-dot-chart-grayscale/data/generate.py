"""Generate an invented aggregate table: raised blood pressure by subgroup in two survey waves.

Run ``python generate.py`` inside ``data/``: it rewrites ``prevalence.csv`` byte-identically.
The "Velmora Household Health Check" is invented; each row is a subgroup of one wave with the
number examined and the number with raised blood pressure (binomial draws from set rates).
Every cell count is at least 11.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240405
GROUPS = {
    "Sex": {"Female": 0.27, "Male": 0.33},
    "Age (years)": {"18-34": 0.08, "35-49": 0.2, "50-64": 0.38, "65-79": 0.55, "80 and over": 0.63},
    "Setting": {"Coastal": 0.28, "Inland": 0.32},
    "Deprivation fifth": {"1 (least)": 0.24, "2": 0.27, "3": 0.3, "4": 0.33, "5 (most)": 0.38},
}
WAVES = {"2019": 1.0, "2023": 0.9}


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    rows = []
    for grouping, levels in GROUPS.items():
        for subgroup, rate in levels.items():
            for wave, factor in WAVES.items():
                examined = int(rng.integers(180, 900))
                cases = int(rng.binomial(examined, rate * factor))
                rows.append({"grouping": grouping, "subgroup": subgroup, "wave": wave,
                             "examined": examined, "raised_bp": cases})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "prevalence.csv")
