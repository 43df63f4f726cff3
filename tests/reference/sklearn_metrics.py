"""Classification metrics of chorus (common/metrics.h) computed with scikit-learn.

Usage: sklearn_metrics.py PROBS LABELS BINS
Prints accuracy, nll, brier and ece, one "name value" per line.
"""
import sys

import numpy as np
from sklearn.calibration import calibration_curve
from sklearn.metrics import accuracy_score, brier_score_loss, log_loss

from matrix_text import print_value, read_labels, read_matrix


def multiclass_brier(y, p):
    # mean_i sum_k (p_ik - [y_i = k])^2 = sum_k mean_i (p_ik - [y_i = k])^2 = sum_k brier_k.
    return sum(brier_score_loss(y == k, p[:, k], pos_label=True) for k in range(p.shape[1]))


def top_label_ece(y, p, bins):
    # calibration_curve's uniform bins are (b/B, (b+1)/B] (searchsorted on the inner edges);
    # it returns per non-empty bin the accuracy and mean confidence, weighted here by bin size.
    confidence = p.max(axis=1)
    correct = p.argmax(axis=1) == y
    accuracy, mean_confidence = calibration_curve(correct, confidence, n_bins=bins,
                                                  strategy="uniform", pos_label=True)
    edges = np.linspace(0.0, 1.0, bins + 1)
    counts = np.bincount(np.searchsorted(edges[1:-1], confidence), minlength=bins)
    counts = counts[counts > 0]
    return float(np.sum(counts / len(y) * np.abs(accuracy - mean_confidence)))


def main():
    p = read_matrix(sys.argv[1])
    y = read_labels(sys.argv[2])
    bins = int(sys.argv[3])
    print_value("accuracy", accuracy_score(y, p.argmax(axis=1)))
    print_value("nll", log_loss(y, p, labels=list(range(p.shape[1]))))
    print_value("brier", multiclass_brier(y, p))
    print_value("ece", top_label_ece(y, p, bins))


if __name__ == "__main__":
    main()
