"""Write the invented LMS table and the Velmora Growth Cohort measurements (fixed seed).

The LMS table is made from smooth invented curves (it is *not* any published reference); the
children's weights are drawn on that reference with slowly drifting z-scores. Running this file
rewrites both CSVs byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240412
AGES = np.arange(0, 61)


def lms_table() -> pd.DataFrame:
    """Invented weight-for-age LMS values by month: M rises steeply then flattens."""
    rows = []
    for sex, scale in (("girls", 0.96), ("boys", 1.0)):
        m = scale * (3.4 + 8.2 * (1 - np.exp(-AGES / 9.0)) + 0.105 * AGES)
        l_ = 0.30 - 0.013 * AGES + 0.00012 * AGES ** 2
        s = 0.140 - 0.0006 * AGES + 0.0000085 * AGES ** 2 + (0.004 if sex == "girls" else 0.0)
        for a, li, mi, si in zip(AGES, l_, m, s):
            rows.append((sex, int(a), round(li, 4), round(mi, 4), round(si, 5)))
    return pd.DataFrame(rows, columns=["sex", "age_months", "L", "M", "S"])


def cohort(rng: np.random.Generator, table: pd.DataFrame) -> pd.DataFrame:
    """Six children, each measured at five to eight visits; z-score drifts as a random walk."""
    rows = []
    starts = {1: -1.6, 2: 0.2, 3: 1.5, 4: -0.4, 5: 2.1, 6: -2.3}
    for child, z0 in starts.items():
        sex = "girls" if child <= 3 else "boys"
        ref = table[table["sex"] == sex]
        visits = np.sort(rng.choice(np.arange(2, 60), size=rng.integers(5, 9), replace=False))
        z = z0
        for age in visits:
            z += rng.normal(0, 0.25)
            row = ref[ref["age_months"] == age].iloc[0]
            if abs(row.L) < 1e-6:
                weight = row.M * np.exp(row.S * z)
            else:
                weight = row.M * (1 + row.L * row.S * z) ** (1 / row.L)
            rows.append((child, sex, int(age), round(float(weight), 2)))
    return pd.DataFrame(rows, columns=["child", "sex", "age_months", "weight_kg"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    rng = np.random.default_rng(SEED)
    table = lms_table()
    for name, frame in (("lms_weight.csv", table), ("cohort_weights.csv", cohort(rng, table))):
        tmp = here / (name + ".tmp")
        frame.to_csv(tmp, index=False, lineterminator="\n")
        tmp.replace(here / name)
