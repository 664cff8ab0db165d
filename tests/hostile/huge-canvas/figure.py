"""Asks for a 400 x 300 inch figure: 60,000 x 45,000 px at 150 dpi."""
import matplotlib.pyplot as plt

fig = plt.figure(figsize=(400, 300))
fig.add_subplot().plot([1, 2])
