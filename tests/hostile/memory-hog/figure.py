"""Keeps allocating 50 MB blocks until something stops it."""
blocks = []
while True:
    blocks.append(bytearray(50 * 2**20))
