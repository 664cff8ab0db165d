"""Writes data/measurements.csv: 200 invented values, seeded so reruns give the same file."""
import csv
import random
from pathlib import Path

rng = random.Random(20261202)
with open(Path(__file__).with_name("measurements.csv"), "w", newline="", encoding="utf-8") as f:
    writer = csv.writer(f)
    writer.writerow(["value"])
    for _ in range(200):
        writer.writerow([round(rng.gauss(50, 8), 2)])
