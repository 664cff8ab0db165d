"""Write tumour_measurements.csv for the waterfall recipe (invented data, fixed seed).

Each participant of an invented two-arm study of the Velmora Regional Health Network has a
baseline sum of target-lesion diameters and up to four follow-up assessments. Running this file
rewrites the CSV byte for byte.
"""
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20240411
WEEKS = (0, 6, 12, 18, 24)


def simulate(rng: np.random.Generator, n: int = 46) -> pd.DataFrame:
    """Each participant has a latent response slope; some drop out after progressing."""
    rows = []
    for participant in range(1, n + 1):
        arm = "A" if participant % 2 else "B"
        baseline = float(rng.uniform(25, 140))
        slope = rng.normal(-0.16 if arm == "A" else -0.05, 0.22)
        if participant in (7, 31):
            slope = -1.0  # complete responses: every target lesion disappears
        size = baseline
        for week in WEEKS:
            if week:
                factor = 1 + slope * week / 12 + rng.normal(0, 0.04)
                size = max(0.0, baseline * factor) if slope > -1 else 0.0
            rows.append((participant, arm, week, int(round(size))))
            if week and size >= 1.25 * baseline:
                break  # progression: no further assessments
    return pd.DataFrame(rows, columns=["participant", "arm", "week", "sum_diameters_mm"])


if __name__ == "__main__":
    here = Path(__file__).resolve().parent
    frame = simulate(np.random.default_rng(SEED))
    tmp = here / "tumour_measurements.csv.tmp"
    frame.to_csv(tmp, index=False, lineterminator="\n")
    tmp.replace(here / "tumour_measurements.csv")
