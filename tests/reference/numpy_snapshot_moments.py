"""NumPy references for basin fits (common/basin_fit.h).

Usage:
  numpy_snapshot_moments.py moments SNAPSHOTS RANK OUT_DIR
    SNAPSHOTS: count x dim, one snapshot a row, in the order they were added. Writes to OUT_DIR:
    mean.txt (1 x dim, mean(axis=0)), variance.txt (1 x dim, var(axis=0), ddof=0) and
    deviations.txt (RANK x dim: snapshot_i - mean of snapshots 0..i, for the last RANK i).
  numpy_snapshot_moments.py posterior PHI TARGETS ALPHA BETA OUT
    Bayesian linear regression (Bishop, PRML, eqs. 3.53-3.54): writes the posterior mean
    m_N = beta S_N Phi^T t, S_N^-1 = alpha I + beta Phi^T Phi, as OUT (dim x 1).
Matrices use the text format of tests/testing/reference.h.
"""
import os
import sys

import numpy as np

from matrix_text import read_matrix


def write_matrix(path, m):
    m = np.atleast_2d(m)
    with open(path, "w") as f:
        f.write(f"{m.shape[0]} {m.shape[1]}\n")
        np.savetxt(f, m, fmt="%.17g")


def moments(snapshots_path, rank, out_dir):
    s = read_matrix(snapshots_path)
    running_mean = np.cumsum(s, axis=0) / np.arange(1, len(s) + 1)[:, None]
    write_matrix(os.path.join(out_dir, "mean.txt"), s.mean(axis=0))
    write_matrix(os.path.join(out_dir, "variance.txt"), s.var(axis=0))
    write_matrix(os.path.join(out_dir, "deviations.txt"), (s - running_mean)[-rank:])


def posterior(phi_path, targets_path, alpha, beta, out_path):
    phi, t = read_matrix(phi_path), read_matrix(targets_path)[:, 0]
    precision = alpha * np.eye(phi.shape[1]) + beta * phi.T @ phi
    write_matrix(out_path, np.linalg.solve(precision, beta * phi.T @ t)[:, None])


def main():
    if sys.argv[1] == "moments":
        moments(sys.argv[2], int(sys.argv[3]), sys.argv[4])
    elif sys.argv[1] == "posterior":
        posterior(sys.argv[2], sys.argv[3], float(sys.argv[4]), float(sys.argv[5]), sys.argv[6])
    else:
        sys.exit(f"unknown command {sys.argv[1]}")


if __name__ == "__main__":
    main()
