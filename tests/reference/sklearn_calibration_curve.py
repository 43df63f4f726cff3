"""Top-label reliability diagram with sklearn.calibration.calibration_curve, for chorus's
ReliabilityBins (common/reliability.h).

Usage: sklearn_calibration_curve.py PROBS LABELS BINS
Takes each row's top-label confidence max_k p_ik and whether its arg-max is the label, and prints
"accuracy" then "confidence" followed by calibration_curve's prob_true and prob_pred (uniform
bins, empty bins left out), ascending by bin.
"""
import sys

import numpy as np
from sklearn.calibration import calibration_curve

from matrix_text import read_labels, read_matrix


def main():
    probs = read_matrix(sys.argv[1])
    labels = read_labels(sys.argv[2])
    bins = int(sys.argv[3])
    confidence = probs.max(axis=1)
    correct = (probs.argmax(axis=1) == labels).astype(np.int64)
    prob_true, prob_pred = calibration_curve(correct, confidence, n_bins=bins, strategy="uniform")
    print("accuracy", " ".join(repr(float(v)) for v in prob_true))
    print("confidence", " ".join(repr(float(v)) for v in prob_pred))


if __name__ == "__main__":
    main()
