"""A well-behaved recipe: seeded data, one 4 x 3 inch figure."""
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(20240101)
x = np.linspace(0, 10, 50)
fig, ax = plt.subplots(figsize=(4, 3))
ax.plot(x, np.sin(x) + rng.normal(0, 0.1, x.size), label="signal")
ax.set_title("Seeded sine")
ax.legend()
plt.show()
