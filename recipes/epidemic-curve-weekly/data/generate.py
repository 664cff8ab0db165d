"""Write cases.csv: an invented outbreak line list with ISO week of onset (fixed seed).

One row per case with the ISO week of symptom onset, the case classification and the district.
No dates of birth or exact dates: the week is the finest time unit. Rewrites byte for byte.
"""
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240413
FIRST_MONDAY = date.fromisocalendar(2026, 44, 1)
WEEKS = 20
DISTRICTS = ["Saltmere", "Esker Bay", "Rookhaven", "Tarrow", "Lorrow"]


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    """Gamma-shaped weekly incidence; the share confirmed grows as testing is set up."""
    t = np.arange(WEEKS) + 0.5
    expected = 75 * (t / 6.5) ** 2.4 * np.exp(-2.4 * (t / 6.5 - 1))
    rows = []
    for week, mu in enumerate(expected):
        monday = FIRST_MONDAY + timedelta(weeks=week)
        year, number, _ = monday.isocalendar()
        confirmed = min(0.75, 0.15 + 0.07 * week)
        probs = [confirmed, (1 - confirmed) * 0.55, (1 - confirmed) * 0.45]
        for _ in range(rng.poisson(mu)):
            cls = rng.choice(["confirmed", "probable", "suspected"], p=probs)
            district = rng.choice(DISTRICTS, p=[0.35, 0.25, 0.2, 0.12, 0.08])
            rows.append((f"{year}-W{number:02d}", cls, district))
    return pd.DataFrame(rows, columns=["onset_week", "classification", "district"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "cases.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "cases.csv")
