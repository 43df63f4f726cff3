"""Writes a shifted copy of IDX images: the first ROWS images rotated by 90 degrees (numpy.rot90),
for data.shift_test checks on open data.

Usage: numpy_rotated_idx.py IMAGES_IDX_GZ ROWS OUT_IDX
Reads an IDX3 unsigned-byte file (gzip, as Debian's dataset-fashion-mnist ships it), rotates each
of the first ROWS images a quarter turn counter-clockwise and writes them as plain IDX3.
"""
import gzip
import struct
import sys

import numpy as np


def main():
    src, rows, out = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    with gzip.open(src, "rb") as f:
        magic, n, h, w = struct.unpack(">IIII", f.read(16))
        assert magic == 0x00000803, "not an IDX3 unsigned-byte file"
        rows = min(rows, n)
        images = np.frombuffer(f.read(rows * h * w), dtype=np.uint8).reshape(rows, h, w)
    rotated = np.ascontiguousarray(np.rot90(images, k=1, axes=(1, 2)))
    with open(out, "wb") as f:
        f.write(struct.pack(">IIII", 0x00000803, rows, w, h))
        f.write(rotated.tobytes())


if __name__ == "__main__":
    main()
