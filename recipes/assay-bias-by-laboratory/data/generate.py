"""Write data/creatinine_panel.csv: an invented inter-laboratory comparison.

Every laboratory of the Velmora Regional Health Network measured the same panel of 30 split
serum specimens whose creatinine had also been measured by the reference method. Some
laboratories lost specimens in transit, so the number measured differs by laboratory. Each
laboratory has its own systematic bias and imprecision. The data are invented.

Run from the recipe folder: ``python data/generate.py``. The seed is fixed, so the file is
rewritten byte for byte.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20240517
LABS = {  # name: (bias in umol/L, sd of the differences in umol/L, specimens measured)
    "Lab North": (1.5, 3.5, 30),
    "Lab Quay": (-4.0, 4.5, 24),
    "Lab Vale": (0.5, 2.5, 28),
    "Lab Harbour": (6.5, 6.0, 18),
    "Lab Upland": (-1.0, 3.0, 30),
    "Lab Ridge": (3.0, 5.0, 22),
}
PANEL = 30


def make_rows(rng: np.random.Generator) -> list[tuple[str, int, float, float]]:
    """One row per (laboratory, specimen) actually measured."""
    reference = np.round(rng.lognormal(mean=np.log(95.0), sigma=0.45, size=PANEL), 1)
    rows = []
    for lab, (bias, sd, n) in LABS.items():
        kept = np.sort(rng.choice(PANEL, size=n, replace=False))
        for item in kept:
            proportional = 0.01 * bias * (reference[item] - 95.0) / 10.0
            value = reference[item] + bias + proportional + rng.normal(0.0, sd)
            rows.append((lab, int(item) + 1, float(reference[item]), round(float(value), 1)))
    return rows


def main() -> None:
    out = Path(__file__).resolve().parent / "creatinine_panel.csv"
    rows = make_rows(np.random.default_rng(SEED))
    tmp = out.with_suffix(".tmp")
    with tmp.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["lab", "panel_item", "reference_umol_l", "lab_umol_l"])
        for lab, item, ref, value in rows:
            writer.writerow([lab, item, f"{ref:.1f}", f"{value:.1f}"])
    tmp.replace(out)


if __name__ == "__main__":
    main()
