"""Generate invented laboratory panels (12 analytes) for 360 anonymous invented participants.

Run ``python generate.py`` inside ``data/``: it rewrites ``lab_panel.csv`` byte-identically.
Analytes are driven by four hidden factors (red cells, liver, kidney, lipids) plus noise, with a
few cross-links, and enzymes are log-normal — so clustering has groups to find and Spearman
correlation has skew to be robust against. Rows carry no identifier, only the laboratory.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240406
LABS = ["Lab North", "Lab Quay", "Lab Vale", "Lab Harbour", "Lab Upland", "Lab Ridge"]
N = 360


def make() -> pd.DataFrame:
    rng = np.random.default_rng(SEED)
    red, liver, kidney, lipid, metabolic = rng.normal(size=(5, N))
    noise = lambda scale: rng.normal(0, scale, N)  # noqa: E731
    frame = pd.DataFrame({
        "lab": rng.choice(LABS, size=N),
        "haemoglobin_g_dl": 14 + 1.2 * red + noise(0.5),
        "haematocrit_pct": 42 + 3.4 * red + noise(1.5),
        "red_cells_e12_l": 4.7 + 0.4 * red + noise(0.25),
        "alt_u_l": np.exp(3.2 + 0.45 * liver + 0.15 * metabolic + noise(0.25)),
        "ast_u_l": np.exp(3.1 + 0.35 * liver + noise(0.25)),
        "ggt_u_l": np.exp(3.3 + 0.35 * liver + 0.25 * metabolic + noise(0.35)),
        "creatinine_umol_l": 80 + 14 * kidney + noise(8),
        "urea_mmol_l": 5.5 + 1.1 * kidney + noise(1.0),
        "total_chol_mmol_l": 5.2 + 0.8 * lipid + 0.2 * metabolic + noise(0.35),
        "ldl_mmol_l": 3.2 + 0.75 * lipid + noise(0.3),
        "hdl_mmol_l": 1.4 - 0.25 * metabolic + noise(0.2),
        "triglycerides_mmol_l": np.exp(0.3 + 0.35 * metabolic + 0.1 * lipid + noise(0.3)),
    })
    return frame.round(2)


def write(frame: pd.DataFrame, path: Path) -> None:
    """Temporary file then rename: never half a file."""
    tmp = path.with_suffix(".tmp")
    frame.to_csv(tmp, index=False, lineterminator="\n", float_format="%.2f")
    os.replace(tmp, path)


if __name__ == "__main__":
    write(make(), Path(__file__).resolve().parent / "lab_panel.csv")
