"""Write hba1c_reviews.csv: invented annual-review HbA1c values from 30 clinics (fixed seed).

One row per review with the clinic code and the HbA1c in mmol/mol. Clinics differ in size
(12 to 160 reviews) so the shrinkage of small clinics is visible. Rewrites byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240415


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    rows = []
    sizes = rng.integers(12, 160, size=30)
    effects = rng.normal(0, 3.0, size=30)
    for k in range(30):
        clinic = f"VC-{k + 1:02d}"
        values = 58 + effects[k] + rng.normal(0, 11.0, size=sizes[k])
        rows += [(clinic, round(float(v), 1)) for v in values]
    return pd.DataFrame(rows, columns=["clinic", "hba1c_mmol_mol"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "hba1c_reviews.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "hba1c_reviews.csv")
