"""Generate an invented meta-analysis: nine two-arm trials of one intervention, events per arm.

Run ``python generate.py`` inside ``data/``: it rewrites ``trials.csv`` byte-identically. Each
invented trial has a true log odds ratio drawn around -0.35 with between-trial SD 0.4, arm
sizes from 60 to 700 and binomial event counts from a control risk near 20%.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240420
TRIALS = ["Greywick 2009", "Pellam 2011", "Lorrow 2012", "Brisca-2 2014", "Iverton 2015",
          "Tarrow-A 2016", "Saltmere 2018", "Caddon Vale 2019", "Harrel Fen 2021"]


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    rows = []
    for trial in TRIALS:
        per_arm = int(np.exp(rng.uniform(np.log(60), np.log(700))))
        control_risk = np.clip(rng.normal(0.2, 0.04), 0.08, 0.35)
        log_or = rng.normal(-0.35, 0.4)
        odds = control_risk / (1 - control_risk) * np.exp(log_or)
        treat_risk = odds / (1 + odds)
        rows.append({"trial": trial,
                     "treated_events": int(rng.binomial(per_arm, treat_risk)),
                     "treated_total": per_arm,
                     "control_events": int(rng.binomial(per_arm, control_risk)),
                     "control_total": per_arm})
    return pd.DataFrame(rows)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "trials.csv")
