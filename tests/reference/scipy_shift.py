"""Two-sample shift statistics of raw samples, for chorus's distribution sketches
(common/distribution_shift.h).

Usage: scipy_shift.py SAMPLE_A SAMPLE_B
Each file is a matrix (matrix_text.py) whose values, read row by row, are one sample.
Prints
  ks   scipy.stats.ks_2samp(a, b).statistic: sup_x |F_a(x) - F_b(x)| (Kolmogorov-Smirnov)
  psi  the population stability index of b against a (Siddiqi 2006), computed here with NumPy:
       bins cut at a's distinct deciles (numpy.quantile, method "inverted_cdf"), dropping those
       equal to a's maximum, right-closed; each bin's share floored at 1e-4;
       psi = sum (q - p) ln(q / p).
"""
import sys

import numpy as np
from scipy.stats import ks_2samp

from matrix_text import print_value, read_matrix


def psi(a, b):
    deciles = np.quantile(a, np.arange(1, 10) / 10, method="inverted_cdf")
    edges = np.unique(deciles[deciles < a.max()])
    p = np.bincount(np.searchsorted(edges, a, side="left"), minlength=len(edges) + 1) / len(a)
    q = np.bincount(np.searchsorted(edges, b, side="left"), minlength=len(edges) + 1) / len(b)
    p = np.maximum(p, 1e-4)
    q = np.maximum(q, 1e-4)
    return float(np.sum((q - p) * np.log(q / p)))


def main():
    a = read_matrix(sys.argv[1]).ravel()
    b = read_matrix(sys.argv[2]).ravel()
    print_value("ks", ks_2samp(a, b).statistic)
    print_value("psi", psi(a, b))


if __name__ == "__main__":
    main()
