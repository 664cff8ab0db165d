"""Generate invented paired HbA1c readings: laboratory method vs a point-of-care device.

Run ``python generate.py`` inside ``data/``: it rewrites ``hba1c_pairs.csv`` byte-identically.
1,500 invented samples from the six Velmora laboratories; the device reads slightly high at
high values (a proportional bias of 3%) with more scatter, and both are reported to whole
mmol/mol, so many points coincide: the overplotting that alpha blending is meant to reveal.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240408
LABS = ["Lab North", "Lab Quay", "Lab Vale", "Lab Harbour", "Lab Upland", "Lab Ridge"]
N = 1500


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    truth = 30 + rng.gamma(shape=3.0, scale=8.0, size=N)
    reference = truth + rng.normal(0, 1.5, N)
    device = 1.03 * truth - 0.8 + rng.normal(0, 3.0, N)
    return pd.DataFrame({"lab": rng.choice(LABS, size=N),
                         "reference_mmol_mol": np.round(reference).astype(int),
                         "point_of_care_mmol_mol": np.round(device).astype(int)})


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "hba1c_pairs.csv")
