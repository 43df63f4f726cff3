"""Stacking weights of chorus's StackingWeights (common/weighting.h) found with SciPy.

Usage: scipy_stacking.py LIKELIHOODS
Maximises mean_i ln sum_m w_m L(i, m) over the simplex with minimize(method='SLSQP'): equality
sum_m w_m = 1, bounds [0, 1], analytic gradient, ftol 1e-15, from uniform weights.
Prints weights (one value per member), log_score and gap (max_m mean_i L(i, m) / q_i - 1).
"""
import sys

import numpy as np
from scipy.optimize import minimize

from matrix_text import print_value, read_matrix


def negative_log_score(w, likelihoods):
    # -mean_i ln q_i, q = L w; w may step a hair outside the bounds, so q is floored.
    return -np.mean(np.log(np.maximum(likelihoods @ w, 1e-300)))


def gradient(w, likelihoods):
    # d/dw_m of the above: -mean_i L(i, m) / q_i.
    return -(likelihoods / np.maximum(likelihoods @ w, 1e-300)[:, None]).mean(axis=0)


def main():
    likelihoods = read_matrix(sys.argv[1])
    members = likelihoods.shape[1]
    result = minimize(negative_log_score, np.full(members, 1.0 / members), args=(likelihoods,),
                      jac=gradient, method="SLSQP", bounds=[(0.0, 1.0)] * members,
                      constraints=[{"type": "eq", "fun": lambda w: np.sum(w) - 1.0}],
                      options={"ftol": 1e-15, "maxiter": 1000})
    if not result.success:
        sys.exit("SLSQP failed: " + result.message)
    print("weights", " ".join(repr(float(v)) for v in result.x))
    print_value("log_score", -result.fun)
    print_value("gap", np.max(-gradient(result.x, likelihoods)) - 1.0)


if __name__ == "__main__":
    main()
