"""The temperature of chorus's TuneTemperature (common/assembly.h) found with SciPy.

Usage: scipy_temperature.py LABELS LOGITS [LOGITS ...]
Members are weighted uniformly; minimises the validation NLL of sum_m w_m softmax(z_m / T) over
log T in [ln 0.05, ln 20] with minimize_scalar(method='bounded'). Prints log_t and nll.
"""
import sys

import numpy as np
from scipy.optimize import minimize_scalar
from scipy.special import log_softmax, logsumexp

from matrix_text import print_value, read_labels, read_matrix


def mixture_nll(log_t, logits, y):
    # -mean_i ln sum_m (1/M) softmax(z_mi / T)[y_i], by log-sum-exp over members.
    rows = np.arange(len(y))
    per_member = np.stack([log_softmax(z / np.exp(log_t), axis=1)[rows, y] for z in logits])
    return -np.mean(logsumexp(per_member, axis=0) - np.log(len(logits)))


def main():
    y = read_labels(sys.argv[1])
    logits = [read_matrix(path) for path in sys.argv[2:]]
    result = minimize_scalar(mixture_nll, args=(logits, y), method="bounded",
                             bounds=(np.log(0.05), np.log(20.0)), options={"xatol": 1e-8})
    print_value("log_t", result.x)
    print_value("nll", result.fun)


if __name__ == "__main__":
    main()
