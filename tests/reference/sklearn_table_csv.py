"""Writes one of scikit-learn's bundled open data sets as CSV train/test files for chorus:
NAME_train.csv and NAME_test.csv in OUT_DIR, header = feature names and `target`.

Usage: sklearn_table_csv.py NAME OUT_DIR [SEED]
NAME: diabetes (Efron et al. 2004, regression, 442 rows), breast_cancer (UCI Wisconsin
diagnostic, binary, 569 rows), wine (UCI wine recognition, 3 classes, 178 rows), digits (UCI
optical digits, 10 classes, 1797 rows). Split: train_test_split(test_size=0.25,
random_state=SEED (default 0), stratified for classification). Prints train and test row counts.
"""
import sys

from sklearn import datasets
from sklearn.model_selection import train_test_split

LOADERS = {
    "diabetes": (datasets.load_diabetes, False),
    "breast_cancer": (datasets.load_breast_cancer, True),
    "wine": (datasets.load_wine, True),
    "digits": (datasets.load_digits, True),
}


def write(path, names, x, y, classify):
    header = ",".join(n.replace(" ", "_") for n in names) + ",target"
    with open(path, "w") as f:
        f.write(header + "\n")
        for row, t in zip(x, y):
            label = f"c{int(t)}" if classify else repr(float(t))
            f.write(",".join(repr(float(v)) for v in row) + "," + label + "\n")


def main():
    name, out = sys.argv[1], sys.argv[2]
    seed = int(sys.argv[3]) if len(sys.argv) > 3 else 0
    load, classify = LOADERS[name]
    data = load()
    x, y = data.data, data.target
    names = list(getattr(data, "feature_names", [f"x{i}" for i in range(x.shape[1])]))
    if len(names) != x.shape[1]:
        names = [f"x{i}" for i in range(x.shape[1])]
    x_tr, x_te, y_tr, y_te = train_test_split(x, y, test_size=0.25, random_state=seed,
                                              stratify=y if classify else None)
    write(f"{out}/{name}_train.csv", names, x_tr, y_tr, classify)
    write(f"{out}/{name}_test.csv", names, x_te, y_te, classify)
    print(len(y_tr), len(y_te))


if __name__ == "__main__":
    main()
