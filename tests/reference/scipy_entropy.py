"""Per-row entropies in nats with scipy.stats.entropy, for chorus's SplitEntropy
(common/uncertainty.h).

Usage: scipy_entropy.py PROBS
Prints "entropy" followed by H[p_i] = -sum_k p_ik ln p_ik for every row i of PROBS.
"""
import sys

from scipy.stats import entropy

from matrix_text import read_matrix


def main():
    probs = read_matrix(sys.argv[1])
    print("entropy", " ".join(repr(float(v)) for v in entropy(probs, axis=1)))


if __name__ == "__main__":
    main()
