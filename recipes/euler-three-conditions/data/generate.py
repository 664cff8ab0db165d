"""Write conditions.csv: invented counts of adults by combination of three conditions.

Adults registered at the Velmora clinics with at least one of hypertension, type 2 diabetes or
chronic kidney disease, counted in the seven disjoint combinations. Counts are drawn around
invented expected values with a fixed seed; all are far above the small-cell threshold.
Rewrites the file byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240418
EXPECTED = {  # (hypertension, diabetes, ckd): expected count
    (1, 0, 0): 5200, (0, 1, 0): 1500, (0, 0, 1): 420,
    (1, 1, 0): 1900, (1, 0, 1): 900, (0, 1, 1): 260, (1, 1, 1): 640,
}


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    rows = [(*flags, int(rng.poisson(mu))) for flags, mu in EXPECTED.items()]
    return pd.DataFrame(rows, columns=["hypertension", "diabetes", "ckd", "adults"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "conditions.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "conditions.csv")
