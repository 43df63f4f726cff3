"""Diversity between predictives, for chorus's common/diversity.h, computed independently.

Usage: scipy_diversity.py classification PROBS_0 PROBS_1 ...
         prints "disagreement" (mean over unordered pairs of the share of rows whose argmax
         differs, numpy.argmax: ties to the lower index) and "mean_kl" (mean over ordered pairs
         of the row mean of scipy.stats.entropy(p_i, p_j), i.e. KL(p_i || p_j) in nats)
       scipy_diversity.py regression MOMENTS_0 MOMENTS_1 ...
         each file rows x 2 (mean, stddev); prints "mean_kl", with every KL between two
         Gaussians integrated numerically (scipy.integrate.quad) instead of the closed form
"""
import itertools
import math
import sys

import numpy as np
from scipy import integrate
from scipy.stats import entropy

from matrix_text import print_value, read_matrix


def log_normal_pdf(x, m, s):
    return -0.5 * ((x - m) / s) ** 2 - math.log(s) - 0.5 * math.log(2 * math.pi)


def gaussian_kl_by_quadrature(mi, si, mj, sj):
    def integrand(x):
        lp = log_normal_pdf(x, mi, si)
        return math.exp(lp) * (lp - log_normal_pdf(x, mj, sj))
    lo, hi = mi - 12 * si, mi + 12 * si
    value, _ = integrate.quad(integrand, lo, hi, epsabs=1e-13, epsrel=1e-11, limit=200)
    return value


def main():
    kind, paths = sys.argv[1], sys.argv[2:]
    mats = [read_matrix(p) for p in paths]
    kls = []
    for i, j in itertools.permutations(range(len(mats)), 2):
        if kind == "classification":
            kls.append(np.mean(entropy(mats[i], mats[j], axis=1)))
        else:
            kls.append(np.mean([gaussian_kl_by_quadrature(a[0], a[1], b[0], b[1])
                                for a, b in zip(mats[i], mats[j])]))
    print_value("mean_kl", np.mean(kls))
    if kind == "classification":
        top = [np.argmax(m, axis=1) for m in mats]
        print_value("disagreement", np.mean([np.mean(top[i] != top[j])
                                             for i, j in itertools.combinations(range(len(mats)), 2)]))


if __name__ == "__main__":
    main()
