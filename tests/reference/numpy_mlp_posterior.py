"""NumPy/SciPy reference for common/mlp_posterior.h: an MLP's log posterior under an isotropic
Gaussian prior, and the posterior predictive of parameter draws, in float64.

Usage: numpy_mlp_posterior.py PRIOR_VARIANCE DIR WIDTHS ACTIVATION HEAD [DIR WIDTHS ACTIVATION HEAD ...]
  Each DIR holds x.txt (rows x inputs), y.txt (rows x 1: class indices or targets) and draws.txt
  (S x P: parameter vectors in chorus's Mlp layout: per layer W (in x out, row-major) then b).
  WIDTHS like 3,5,2; ACTIVATION tanh | relu; HEAD softmax | gaussian.
For each DIR in order prints "log_posterior" (of draws.txt's first row, without the prior's
normaliser) and writes DIR/predictive.txt: softmax head, rows x K mean of softmax probabilities
over draws; gaussian head, rows x 2 (mixture mean, mixture variance E[y^2] - E[y]^2).
References: scipy.special.log_softmax / softmax; the Gaussian log density
-0.5 (log(2 pi sigma^2) + (y - mu)^2 / sigma^2) with sigma^2 = exp(s); the prior -|theta|^2 / (2 v).
(scipy.stats.norm would do the densities too, but importing scipy.stats takes about a second.)
"""
import sys

import numpy as np
from scipy.special import log_softmax, softmax

from matrix_text import print_value, read_matrix, write_matrix


def forward(theta, widths, activation, x):
    h, offset = x, 0
    for layer in range(len(widths) - 1):
        n_in, n_out = widths[layer], widths[layer + 1]
        w = theta[offset:offset + n_in * n_out].reshape(n_in, n_out)
        offset += n_in * n_out
        b = theta[offset:offset + n_out]
        offset += n_out
        h = h @ w + b
        if layer + 2 < len(widths):
            h = np.tanh(h) if activation == "tanh" else np.maximum(h, 0.0)
    assert offset == len(theta)
    return h


def log_likelihood(out, y, head):
    if head == "softmax":
        return log_softmax(out, axis=1)[np.arange(len(y)), y.astype(np.int64)].sum()
    variance = np.exp(out[:, 1])
    return (-0.5 * (np.log(2 * np.pi * variance) + (y - out[:, 0]) ** 2 / variance)).sum()


def reference(directory, widths, activation, head, prior_variance):
    x, y = read_matrix(f"{directory}/x.txt"), read_matrix(f"{directory}/y.txt")[:, 0]
    draws = read_matrix(f"{directory}/draws.txt")
    theta = draws[0]
    prior = -(theta ** 2).sum() / (2 * prior_variance)
    print_value("log_posterior", log_likelihood(forward(theta, widths, activation, x), y, head) + prior)
    outs = [forward(t, widths, activation, x) for t in draws]
    if head == "softmax":
        predictive = np.mean([softmax(o, axis=1) for o in outs], axis=0)
    else:
        mu = np.array([o[:, 0] for o in outs])
        var = np.array([np.exp(o[:, 1]) for o in outs])
        mean = mu.mean(axis=0)
        second_moment = (var + mu ** 2).mean(axis=0)
        predictive = np.column_stack([mean, second_moment - mean ** 2])
    write_matrix(f"{directory}/predictive.txt", predictive)


def main():
    prior_variance, args = float(sys.argv[1]), sys.argv[2:]
    for k in range(0, len(args), 4):
        directory, widths, activation, head = args[k:k + 4]
        reference(directory, [int(v) for v in widths.split(",")], activation, head, prior_variance)


if __name__ == "__main__":
    main()
