"""A command recipe: a program that writes its own image file."""
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

fig, ax = plt.subplots(figsize=(3, 2))
ax.bar(["a", "b", "c"], [3, 1, 2])
fig.savefig("out.png", dpi=100)
print("drew out.png")
