"""Write population.csv: invented population by age band and sex (fixed seed).

Two columns of counts: the Esker Bay coastal catchment (older than average, as retirement
coasts often are) and the whole invented province of Velmora for reference. Rewrites the file
byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240414
LOWER = list(range(0, 90, 5))  # 0-4 ... 80-84, then 85+


def band_labels() -> list[str]:
    return [f"{a}-{a + 4}" for a in LOWER[:-1]] + [f"{LOWER[-1]}+"]


def expected(total: float, ageing: float, female_bonus: float) -> np.ndarray:
    """Smooth age structure: a survival curve tilted towards older ages by ``ageing``."""
    mid = np.array(LOWER, dtype=float) + 2.5
    base = np.exp(-((mid / 78.0) ** 4.5)) * (1 + ageing * mid / 60.0)
    base[-1] *= 1.8  # the open 85+ band collects everyone older
    shares = np.stack([base, base * (1 + female_bonus * (mid / 85.0) ** 3)], axis=1)
    return total * shares / shares.sum()


def simulate(rng: np.random.Generator) -> pd.DataFrame:
    catchment = rng.poisson(expected(48_000, 0.9, 0.6))
    province = rng.poisson(expected(1_240_000, 0.2, 0.5))
    rows = []
    for i, band in enumerate(band_labels()):
        for j, sex in enumerate(("male", "female")):
            rows.append((band, sex, int(catchment[i, j]), int(province[i, j])))
    return pd.DataFrame(rows, columns=["age_band", "sex", "catchment", "province"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "population.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "population.csv")
