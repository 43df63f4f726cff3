"""Reads and writes the matrix text format of tests/testing/reference.h: "rows cols", then one
row a line; prints "name value ..." lines for ParseReferenceOutput."""
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


def write_matrix(path, m):
    with open(path, "w") as f:
        f.write(f"{m.shape[0]} {m.shape[1]}\n")
        for row in m:
            f.write(" ".join(repr(float(v)) for v in row) + "\n")


def print_vector(name, v):
    print(name, " ".join(repr(float(x)) for x in np.ravel(v)))
