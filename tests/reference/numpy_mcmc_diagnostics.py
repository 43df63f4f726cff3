"""NumPy/SciPy reference for common/mcmc_diagnostics.h, written from the formulas of Vehtari,
Gelman, Simpson, Carpenter & Buerkner (2021), "Rank-normalization, folding, and localization: an
improved R-hat for assessing convergence of MCMC", Bayesian Analysis 16(2).

Usage: numpy_mcmc_diagnostics.py DRAWS [DRAWS ...]
  DRAWS: chains x iterations (matrix text format of tests/testing/reference.h).
For each file in order prints "split_rhat", "ess", "rank_rhat" and "bulk_ess" lines, which
ParseReferenceOutput collects into one vector per name.

Computed differently from the C++ on purpose: autocovariances by FFT (zero-padded, so circular
terms vanish), average ranks from numpy.unique's counts, the normal quantile by
scipy.special.ndtri, the median by numpy.median. (scipy.stats.rankdata would do the ranks too, but
importing scipy.stats takes about a second.)
"""
import sys

import numpy as np
from scipy.special import ndtri

from matrix_text import print_value, read_matrix


def split(draws):
    """Each chain's two halves as separate chains; the middle draw of an odd count is dropped."""
    half = draws.shape[1] // 2
    return np.vstack([draws[:, :half], draws[:, draws.shape[1] - half:]])


def variance_terms(chains):
    """W (mean within-chain variance, ddof 1) and var+ = (N-1)/N W + B/N."""
    n = chains.shape[1]
    w = chains.var(axis=1, ddof=1).mean()
    b_over_n = chains.mean(axis=1).var(ddof=1) if chains.shape[0] > 1 else 0.0
    return w, (n - 1) / n * w + b_over_n


def rhat(chains):
    w, var_plus = variance_terms(chains)
    return np.sqrt(var_plus / w)


def autocovariance(x):
    """acov(t) = (1/N) sum_{n < N-t} (x_n - mean)(x_{n+t} - mean), t = 0..N-1, by FFT."""
    n = len(x)
    c = x - x.mean()
    f = np.fft.rfft(c, 2 * n)
    return np.fft.irfft(f * np.conj(f))[:n] / n


def ess(chains):
    m, n = chains.shape
    w, var_plus = variance_terms(chains)
    acov = np.array([autocovariance(row) for row in chains])          # m x n
    chain_var = chains.var(axis=1, ddof=1)                             # s_m^2
    rho_chain = acov / acov[:, :1]                                     # rho_{t,m}
    rho = 1.0 - (w - (chain_var[:, None] * rho_chain).mean(axis=0)) / var_plus
    # Geyer's initial positive sequence of pair sums P_k = rho_{2k} + rho_{2k+1}, then monotone.
    pairs = rho[0:n - 1:2] + rho[1:n:2]
    kept = []
    for p in pairs:
        if kept:
            p = min(p, kept[-1])
        if p <= 0:
            break
        kept.append(p)
    tau = -1.0 + 2.0 * sum(kept)
    total = m * n
    return total / max(tau, 1.0 / np.log10(total))  # ESS capped at S log10 S


def average_ranks(values):
    """1-based ranks; tied values share the mean of the ranks they occupy."""
    unique, inverse, counts = np.unique(values, return_inverse=True, return_counts=True)
    before = np.cumsum(counts) - counts  # values smaller than each unique value
    return (before + (counts + 1) / 2.0)[inverse]


def rank_normalize(draws):
    """Phi^-1((r - 3/8) / (S - 2 * 3/8 + 1)), Blom's offset as in Vehtari et al."""
    s = draws.size
    ranks = average_ranks(draws.ravel()).reshape(draws.shape)
    return ndtri((ranks - 3.0 / 8.0) / (s - 2 * 3.0 / 8.0 + 1.0))


def main():
    for path in sys.argv[1:]:
        draws = read_matrix(path)
        folded = np.abs(draws - np.median(draws))
        print_value("split_rhat", rhat(split(draws)))
        print_value("ess", ess(split(draws)))
        print_value("rank_rhat", max(rhat(split(rank_normalize(draws))),
                                     rhat(split(rank_normalize(folded)))))
        print_value("bulk_ess", ess(split(rank_normalize(draws))))


if __name__ == "__main__":
    main()
