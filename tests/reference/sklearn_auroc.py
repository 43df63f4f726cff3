"""Area under the ROC curve with scikit-learn, for chorus's Auroc (common/uncertainty.h).

Usage: sklearn_auroc.py SCORES LABELS
SCORES and LABELS are n x 1 matrices (labels 0 / 1). Prints auroc = roc_auc_score(labels, scores).
"""
import sys

from sklearn.metrics import roc_auc_score

from matrix_text import print_value, read_labels, read_matrix


def main():
    scores = read_matrix(sys.argv[1])[:, 0]
    labels = read_labels(sys.argv[2])
    print_value("auroc", roc_auc_score(labels, scores))


if __name__ == "__main__":
    main()
