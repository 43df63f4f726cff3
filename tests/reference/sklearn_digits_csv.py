"""Writes scikit-learn's bundled digits set (UCI optical recognition of handwritten digits, 1797
8x8 images) as CSV train/test files for chorus: digits_train.csv, digits_test.csv in OUT_DIR.
Split: sklearn.model_selection.train_test_split(test_size=0.25, random_state=0, stratify=y)."""
import sys

import numpy as np
from sklearn.datasets import load_digits
from sklearn.model_selection import train_test_split


def write(path, x, y):
    header = ",".join(f"p{i}" for i in range(x.shape[1])) + ",digit"
    rows = np.column_stack([x, y]).astype(int)
    np.savetxt(path, rows, fmt="%d", delimiter=",", header=header, comments="")


def main():
    out = sys.argv[1]
    x, y = load_digits(return_X_y=True)
    x_tr, x_te, y_tr, y_te = train_test_split(x, y, test_size=0.25, random_state=0, stratify=y)
    write(f"{out}/digits_train.csv", x_tr, y_tr)
    write(f"{out}/digits_test.csv", x_te, y_te)
    print(len(y_tr), len(y_te))


if __name__ == "__main__":
    main()
