"""chorus's FitBayesianLinearRegression (common/linear_baseline.h) computed with scikit-learn's
BayesianRidge, and its log evidence with SciPy.

Usage: sklearn_bayesian_ridge.py DIR
Writes two problems as matrix text, DIR/<name>_x.txt (rows x features) and DIR/<name>_y.txt
(rows x 1), values rounded to float32 as chorus reads them:
  diabetes  scikit-learn's bundled diabetes data, 442 x 10 (load_diabetes)
  wide      20 x 50 from numpy default_rng(0): x standard normal but column 3 constant (2.0),
            y = 0.3 x w + standard normal noise, w standard normal
For each it prints <name>_coef, <name>_intercept, <name>_beta (sklearn's alpha_, the noise
precision), <name>_alpha (sklearn's lambda_, the weight precision), <name>_mean and <name>_std
(predict(x, return_std=True) on the training rows), and <name>_log_evidence: scipy
multivariate_normal(0, I / beta + Phi Phi^T / alpha).logpdf(t) for the centred targets t and
centred features Phi at sklearn's alpha and beta (Bishop, PRML 2006, eq. 3.86).
BayesianRidge keeps its default Gamma hyperpriors (alpha_1 = alpha_2 = lambda_1 = lambda_2 = 1e-6),
as chorus does; tol=1e-10 stops it when the weights' L1 change is below 1e-10 (default 1e-3).
"""
import sys

import numpy as np
from scipy.stats import multivariate_normal
from sklearn.datasets import load_diabetes
from sklearn.linear_model import BayesianRidge

from matrix_text import print_value, print_vector, write_matrix


def log_evidence(x, y, alpha, beta):
    phi = x - x.mean(axis=0)
    t = y - y.mean()
    cov = np.eye(len(t)) / beta + phi @ phi.T / alpha
    return multivariate_normal(mean=np.zeros(len(t)), cov=cov).logpdf(t)


def fit(name, x, y, out_dir):
    x = x.astype(np.float32).astype(np.float64)
    y = y.astype(np.float32).astype(np.float64)
    write_matrix(f"{out_dir}/{name}_x.txt", x)
    write_matrix(f"{out_dir}/{name}_y.txt", y[:, None])
    model = BayesianRidge(tol=1e-10, n_iter=100000).fit(x, y)
    mean, std = model.predict(x, return_std=True)
    print_vector(f"{name}_coef", model.coef_)
    print_value(f"{name}_intercept", model.intercept_)
    print_value(f"{name}_beta", model.alpha_)
    print_value(f"{name}_alpha", model.lambda_)
    print_vector(f"{name}_mean", mean)
    print_vector(f"{name}_std", std)
    print_value(f"{name}_log_evidence", log_evidence(x, y, model.lambda_, model.alpha_))


def main():
    fit("diabetes", *load_diabetes(return_X_y=True), sys.argv[1])
    rng = np.random.default_rng(0)
    x = rng.normal(size=(20, 50))
    x[:, 3] = 2.0
    y = 0.3 * x @ rng.normal(size=50) + rng.normal(size=20)
    fit("wide", x, y, sys.argv[1])


if __name__ == "__main__":
    main()
