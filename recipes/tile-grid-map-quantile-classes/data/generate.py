"""Generate invented influenza-vaccination uptake for the 24 Velmora districts (seeded).

Run ``python generate.py`` inside ``data/``: it rewrites ``uptake.csv`` byte-identically. Each
district has a fixed tile on a 6-column grid (a schematic of the invented coastline: the sea
to the west), an eligible population aged 65 and over, and a binomial number vaccinated whose
rate rises inland, so the map has a pattern to find.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240404
# (district, tile_row from the north, tile_col from the west coast)
TILES = [("Yarncliffe", 0, 1), ("Westerly Holm", 0, 2), ("Kelmarsh Down", 0, 3),
         ("Iverton", 0, 4), ("Varrow Point", 1, 0), ("Umberfield", 1, 1), ("Greywick", 1, 2),
         ("Harrel Fen", 1, 3), ("Lorrow", 1, 4), ("Quarrydale", 1, 5), ("Saltmere", 2, 0),
         ("Tarrow", 2, 1), ("Fallowby", 2, 2), ("Marrowby", 2, 3), ("Nettlecombe", 2, 4),
         ("Ossery Flats", 2, 5), ("Rookhaven", 3, 0), ("Esker Bay", 3, 1), ("Dunmere", 3, 2),
         ("Caddon Vale", 3, 3), ("Pellam", 3, 4), ("Jessop's Reach", 3, 5), ("Amberlow", 4, 1),
         ("Brisca", 4, 2)]


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    rows = []
    for district, row, col in TILES:
        eligible = int(rng.integers(1_500, 9_000))
        rate = np.clip(0.52 + 0.035 * col + rng.normal(0, 0.035), 0.3, 0.9)
        vaccinated = int(rng.binomial(eligible, rate))
        rows.append({"district": district, "tile_row": row, "tile_col": col,
                     "eligible_65plus": eligible, "vaccinated": vaccinated,
                     "uptake_pct": round(100 * vaccinated / eligible, 1)})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n", float_format="%.1f")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "uptake.csv")
