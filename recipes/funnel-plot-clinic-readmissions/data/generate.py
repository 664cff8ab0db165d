"""Generate invented 30-day readmission counts for the 30 Velmora clinics (seeded, byte-stable).

Run ``python generate.py`` inside ``data/``: it rewrites ``readmissions.csv`` identically.
Clinic sizes vary tenfold; true rates scatter a little around 12% (mild over-dispersion) and
two clinics are set apart, one high and one low, so the funnel has something to show.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240403
DISTRICTS = ["Amberlow", "Brisca", "Caddon Vale", "Dunmere", "Esker Bay", "Fallowby",
             "Greywick", "Harrel Fen", "Iverton", "Jessop's Reach", "Kelmarsh Down", "Lorrow",
             "Marrowby", "Nettlecombe", "Ossery Flats", "Pellam", "Quarrydale", "Rookhaven",
             "Saltmere", "Tarrow", "Umberfield", "Varrow Point", "Westerly Holm", "Yarncliffe"]


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    rows = []
    for k in range(1, 31):
        admissions = int(np.exp(rng.uniform(np.log(130), np.log(1400))))
        logit = np.log(0.12 / 0.88) + rng.normal(0, 0.12)
        if k == 7:
            logit += 0.55          # a clinic that truly differs (high)
        if k == 22:
            logit -= 0.60          # and one low
        rate = 1 / (1 + np.exp(-logit))
        rows.append({"clinic": f"VC-{k:02d}", "district": DISTRICTS[(k - 1) % 24],
                     "admissions": admissions,
                     "readmissions_30d": int(rng.binomial(admissions, rate))})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "readmissions.csv")
