"""Log loss of `chorus predict` output, computed with scikit-learn's log_loss.

Usage: sklearn_log_loss_csv.py PREDICTIONS INPUT TARGET
PREDICTIONS is predict's CSV (a column p_<class> per class); INPUT is the CSV that was predicted,
its true labels in column TARGET, one input row per prediction row, in the same order.
Prints "nll VALUE".
"""
import csv
import sys

import numpy as np
from sklearn.metrics import log_loss

from matrix_text import print_value


def main():
    with open(sys.argv[1], newline="") as f:
        predictions = list(csv.DictReader(f))
    with open(sys.argv[2], newline="") as f:
        labels = [row[sys.argv[3]] for row in csv.DictReader(f)]
    columns = [c for c in predictions[0].keys() if c.startswith("p_")]
    classes = [c[len("p_"):] for c in columns]
    p = np.array([[float(row[c]) for c in columns] for row in predictions])
    y = np.array([classes.index(label) for label in labels])
    print_value("nll", log_loss(y, p, labels=list(range(len(classes)))))


if __name__ == "__main__":
    main()
