"""Regression metrics of chorus (common/metrics.h) for a Gaussian mixture, computed with SciPy.

Usage: scipy_regression.py MEAN STDDEV WEIGHTS TARGETS
MEAN, STDDEV: inputs x components; WEIGHTS: 1 x components; TARGETS: inputs x 1.
Prints nll, rmse, coverage_90, then quantile_05 and quantile_95 (one value per input).
"""
import sys

import numpy as np
from scipy.optimize import brentq
from scipy.stats import norm

from matrix_text import print_value, read_matrix


def quantile(q, mu, sd, w):
    # Root of sum_m w_m Phi((x - mu_m) / sd_m) - q, bracketed 20 stddevs beyond the means.
    cdf = lambda x: np.sum(w * norm.cdf(x, loc=mu, scale=sd)) - q
    return brentq(cdf, mu.min() - 20 * sd.max(), mu.max() + 20 * sd.max(), xtol=1e-13, rtol=1e-15)


def main():
    mu, sd = read_matrix(sys.argv[1]), read_matrix(sys.argv[2])
    w = read_matrix(sys.argv[3])[0]
    y = read_matrix(sys.argv[4])[:, 0]
    density = np.sum(w * norm.pdf(y[:, None], loc=mu, scale=sd), axis=1)
    q05 = np.array([quantile(0.05, mu[i], sd[i], w) for i in range(len(y))])
    q95 = np.array([quantile(0.95, mu[i], sd[i], w) for i in range(len(y))])
    print_value("nll", -np.mean(np.log(density)))
    print_value("rmse", np.sqrt(np.mean((y - mu @ w) ** 2)))
    print_value("coverage_90", np.mean((q05 <= y) & (y <= q95)))
    print("quantile_05", " ".join(repr(float(v)) for v in q05))
    print("quantile_95", " ".join(repr(float(v)) for v in q95))


if __name__ == "__main__":
    main()
