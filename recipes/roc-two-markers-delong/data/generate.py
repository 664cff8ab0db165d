"""Generate invented results of two diagnostic markers measured on the same 320 patients.

Run ``python generate.py`` inside ``data/``: it rewrites ``markers.csv`` byte-identically.
The condition (by an invented reference standard) is present in about a third. Marker A is a
continuous blood level (log-normal); marker B is a 0-10 clinical score with many ties. The two
share part of their signal, so their AUCs are correlated and must be compared by a paired test.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240410
N = 320


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    condition = (rng.uniform(size=N) < 0.34).astype(int)
    shared = rng.normal(size=N)
    level = 1.4 * condition + 0.6 * shared + 0.8 * rng.normal(size=N)
    score = 0.9 * condition + 0.6 * shared + 1.0 * rng.normal(size=N)
    return pd.DataFrame({
        "condition": condition,
        "marker_a_ng_ml": np.round(np.exp(2.0 + 0.45 * level), 1),
        "marker_b_score": np.clip(np.round(4 + 1.6 * score), 0, 10).astype(int),
    })


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n", float_format="%.1f")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "markers.csv")
