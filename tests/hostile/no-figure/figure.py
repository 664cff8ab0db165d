"""Computes something and forgets to draw it."""
total = sum(range(10))
print("total", total)
