"""Write weekly_visits.csv: invented urgent-care visits per district and ISO week (fixed seed).

24 weeks (2026-W01 to 2026-W24) for the 24 districts of the invented province of Velmora, with
the number of visits and how many were seen within four hours. Every count is well above the
small-cell threshold. Rewrites the file byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240420
DISTRICTS = ["Amberlow", "Brisca", "Caddon Vale", "Dunmere", "Esker Bay", "Fallowby", "Greywick",
             "Harrel Fen", "Iverton", "Jessop's Reach", "Kelmarsh Down", "Lorrow", "Marrowby",
             "Nettlecombe", "Ossery Flats", "Pellam", "Quarrydale", "Rookhaven", "Saltmere",
             "Tarrow", "Umberfield", "Varrow Point", "Westerly Holm", "Yarncliffe"]
WEEKS = [f"2026-W{w:02d}" for w in range(1, 25)]


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    rows = []
    for district in DISTRICTS:
        level = rng.uniform(120, 600)
        trend = rng.normal(0.0, 0.012)  # relative change per week
        on_time = rng.uniform(0.78, 0.97)
        for k, week in enumerate(WEEKS):
            season = 1 + 0.08 * np.cos(2 * np.pi * (k + 2) / 26)
            visits = int(rng.poisson(level * season * (1 + trend) ** k))
            seen = int(rng.binomial(visits, on_time))
            rows.append((district, week, visits, seen))
    return pd.DataFrame(rows, columns=["district", "week", "visits", "seen_within_4h"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "weekly_visits.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "weekly_visits.csv")
