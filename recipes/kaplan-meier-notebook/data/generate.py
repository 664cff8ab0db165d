"""Write readmission.csv: invented time to first unplanned readmission by follow-up pathway.

Two pathways after discharge (usual care and a nurse-led follow-up), 24 months of follow-up,
exponential event times with a hazard ratio of about 0.65, random loss to follow-up and
administrative censoring at 24 months. Times are in months with one decimal, no dates.
Rewrites the file byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240417
FOLLOW_UP = 24.0


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    rows = []
    for pathway, n, rate in (("usual care", 140, 0.045), ("nurse-led", 135, 0.029)):
        event_time = rng.exponential(1 / rate, n)
        lost = rng.exponential(1 / 0.012, n)
        observed = np.minimum.reduce([event_time, lost, np.full(n, FOLLOW_UP)])
        readmitted = (event_time <= observed).astype(int)
        months = np.maximum(np.round(observed, 1), 0.1)
        rows += list(zip([pathway] * n, months, readmitted))
    return pd.DataFrame(rows, columns=["pathway", "months", "readmitted"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "readmission.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "readmission.csv")
