"""Generate invented paired systolic blood pressures: automated cuff vs observer reading.

Run ``python generate.py`` inside ``data/``: it rewrites ``bp_pairs.csv`` byte-identically.
96 invented participants; the automated cuff reads on average about 3 mmHg high with a
within-pair SD of about 7 mmHg. Values are whole mmHg. No identifiers, only the clinic code.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240409
N = 96


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    truth = rng.normal(138, 18, N)
    observer = truth + rng.normal(0, 3.5, N)
    cuff = truth + 3.0 + rng.normal(0, 6.0, N)
    clinic = [f"VC-{k:02d}" for k in rng.integers(1, 31, N)]
    return pd.DataFrame({"clinic": clinic, "observer_mmhg": np.round(observer).astype(int),
                         "automated_mmhg": np.round(cuff).astype(int)})


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "bp_pairs.csv")
