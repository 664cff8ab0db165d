"""Connects to 127.0.0.1:<port.txt>; fails loudly if the connection works."""
import socket
from pathlib import Path

import matplotlib.pyplot as plt

port = int(Path("port.txt").read_text())
try:
    socket.create_connection(("127.0.0.1", port), timeout=3).close()
except OSError as exc:
    reached = f"no connection: {exc}"
else:
    raise RuntimeError("reached the builder's network")
plt.bar(["probe"], [1])
plt.title(reached[:40])
