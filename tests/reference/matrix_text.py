"""Reads the matrix text format of tests/testing/reference.h: "rows cols", then one row a line."""
import numpy as np


def read_matrix(path):
    with open(path) as f:
        rows, cols = (int(v) for v in f.readline().split())
        values = np.array(f.read().split(), dtype=np.float64)
    return values.reshape(rows, cols)


def read_labels(path):
    """A rows x 1 matrix of class indices, as an int vector."""
    return read_matrix(path)[:, 0].astype(np.int64)


def print_value(name, value):
    print(name, repr(float(value)))
