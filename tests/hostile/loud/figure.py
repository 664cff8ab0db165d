"""Writes 50 MiB (52,428,800 bytes) to stdout, then draws a normal figure."""
import sys

import matplotlib.pyplot as plt

line = "x" * 1023 + "\n"
for _ in range(51_199):
    sys.stdout.write(line)
sys.stdout.write("y" * 1010 + "END-OF-OUTPUT\n")
sys.stdout.flush()
plt.plot([1, 2, 3])
