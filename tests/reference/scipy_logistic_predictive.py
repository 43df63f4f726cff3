"""Posterior predictive of Bayesian logistic regression by adaptive Gauss-Hermite quadrature, the
reference for common/hmc_reference.h on a softmax network with no hidden layer.

Usage: scipy_logistic_predictive.py DIR PRIOR_VARIANCE
  DIR/train_x.txt (rows x features), DIR/train_y.txt (rows x 1, labels 0/1), DIR/test_x.txt
  (matrix text format of tests/testing/reference.h).
The model: y ~ Bernoulli(sigmoid(a + x . b)) with (a, b) ~ N(0, PRIOR_VARIANCE I). (A two-class
softmax layer with every weight and bias N(0, v) gives exactly this with PRIOR_VARIANCE = 2 v: see
the test.) For each test row x* prints, one value per row:
  predictive  E[sigmoid(a + x* . b) | data]
  sd          the posterior standard deviation of sigmoid(a + x* . b)
  plugin      sigmoid(a + x* . b) at the posterior mode (MAP)

Method (no sampling): the mode m by scipy.optimize.minimize (trust-exact, analytic gradient and
Hessian) polished by Newton steps, the Laplace covariance S = H^-1 at the mode, then the product Gauss-Hermite rule in the
coordinates theta = m + sqrt(2) chol(S) z (adaptive Gauss-Hermite quadrature, Liu & Pierce 1994,
Biometrika 81(3)): E[f] = sum_i w_i e^{|z_i|^2} p(theta_i) f(theta_i) / (same without f), where
w_i, z_i are numpy's hermgauss nodes. Exits non-zero unless the rule with 24 and 32 nodes per
dimension agree within 1e-9, so the printed values carry no visible quadrature error.
"""
import sys

import numpy as np
from scipy.optimize import minimize
from scipy.special import expit, log_expit

from matrix_text import print_vector, read_labels, read_matrix


def log_posterior(theta, design, y, prior_variance):
    """Unnormalised log posterior at each row of theta (points x dims)."""
    z = theta @ design.T  # points x rows
    loglik = (y * log_expit(z) + (1 - y) * log_expit(-z)).sum(axis=1)
    return loglik - (theta ** 2).sum(axis=1) / (2 * prior_variance)


def mode_and_covariance(design, y, prior_variance):
    dims = design.shape[1]

    def negative(theta):
        p = expit(design @ theta)
        value = -log_posterior(theta[None, :], design, y, prior_variance)[0]
        return value, -(design.T @ (y - p)) + theta / prior_variance

    def hessian(theta):
        p = expit(design @ theta)
        return design.T @ (design * (p * (1 - p))[:, None]) + np.eye(dims) / prior_variance

    mode = minimize(negative, np.zeros(dims), jac=True, hess=hessian, method="trust-exact").x
    # trust-exact may stop early once rounding stalls its model; the log posterior is strictly
    # concave, so plain Newton steps from its answer converge quadratically to the mode.
    for _ in range(20):
        mode = mode - np.linalg.solve(hessian(mode), negative(mode)[1])
    if np.max(np.abs(negative(mode)[1])) > 1e-9:
        sys.exit("the mode search failed")
    return mode, np.linalg.inv(hessian(mode))


def moments(design, y, prior_variance, test, nodes):
    """E[sigmoid(test . theta)] and E[sigmoid^2] per test row with `nodes` points per dimension."""
    mode, covariance = mode_and_covariance(design, y, prior_variance)
    dims = len(mode)
    z1, w1 = np.polynomial.hermite.hermgauss(nodes)
    z = np.stack(np.meshgrid(*[z1] * dims, indexing="ij"), axis=-1).reshape(-1, dims)
    log_w = np.log(np.stack(np.meshgrid(*[w1] * dims, indexing="ij"), axis=-1)).sum(axis=-1).ravel()
    theta = mode + np.sqrt(2.0) * z @ np.linalg.cholesky(covariance).T
    log_weight = log_w + (z ** 2).sum(axis=1) + log_posterior(theta, design, y, prior_variance)
    weight = np.exp(log_weight - log_weight.max())
    weight /= weight.sum()
    p = expit(theta @ test.T)  # points x test rows
    return weight @ p, weight @ p ** 2, expit(test @ mode)


def main():
    folder, prior_variance = sys.argv[1], float(sys.argv[2])
    x, y, test = (read_matrix(folder + "/train_x.txt"), read_labels(folder + "/train_y.txt"),
                  read_matrix(folder + "/test_x.txt"))
    design = np.hstack([np.ones((len(x), 1)), x])
    test_design = np.hstack([np.ones((len(test), 1)), test])
    coarse, _, _ = moments(design, y, prior_variance, test_design, 24)
    mean, second, plugin = moments(design, y, prior_variance, test_design, 32)
    if np.max(np.abs(mean - coarse)) > 1e-9:
        sys.exit(f"quadrature has not converged: {coarse} vs {mean}")
    print_vector("predictive", mean)
    print_vector("sd", np.sqrt(second - mean ** 2))
    print_vector("plugin", plugin)


if __name__ == "__main__":
    main()
