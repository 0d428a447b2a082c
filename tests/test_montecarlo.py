"""Monte Carlo mutual information (capacity/information/montecarlo.py).

Outside references: exact output sums with scipy.stats.poisson (written here); the Z-channel mutual information
for binary on/off Poisson without background (references.md, "Poisson channels").
"""

import itertools

import numpy as np
import pytest
from scipy.special import logsumexp
from scipy.stats import f as f_dist
from scipy.stats import poisson

import capacity  # noqa: F401
from capacity.errors import InputError
from capacity.information.montecarlo import mc_mutual_information


def test_matches_exact_summation_two_receivers():
    # 4 inputs, 2 receivers: exact I(X;Y) by summing over a 40 x 40 output grid (scipy.stats.poisson)
    means = np.array([[0.3, 0.2], [4.0, 0.6], [0.5, 5.0], [3.0, 3.5]])
    p = np.array([0.4, 0.2, 0.2, 0.2])
    grid = np.array(list(itertools.product(range(40), repeat=2)))
    logw = poisson.logpmf(grid[None, :, 0], means[:, 0:1]) + poisson.logpmf(grid[None, :, 1], means[:, 1:2])
    assert np.exp(logw).sum(axis=1).min() > 1 - 1e-12
    ly = logsumexp(logw + np.log(p)[:, None], axis=0)
    exact = float(np.sum(p[:, None] * np.exp(logw) * (logw - ly[None, :]))) / np.log(2)
    r = mc_mutual_information(means, p, n_samples=50_000, seed=1)
    assert abs(r.rate - exact) < 4 * r.stderr
    assert r.stderr < 0.01 and "95% interval" in r.message


def test_z_channel_closed_form():
    # references.md: on/off with mean lambda, no background = Z-channel with P(0|1) = e^-lambda
    lam, p1 = 2.0, 0.45
    h2 = lambda t: -t * np.log2(t) - (1 - t) * np.log2(1 - t)  # noqa: E731
    z = h2(p1 * (1 - np.exp(-lam))) - p1 * h2(np.exp(-lam))
    r = mc_mutual_information(np.array([[0.0], [lam]]), np.array([1 - p1, p1]), n_samples=50_000, seed=2)
    assert abs(r.rate - z) < 4 * r.stderr


def test_reported_stderr_matches_spread_over_independent_seeds():
    # The reported SE is the sample std of the code's own information densities / sqrt(n). Check it against
    # the spread of k = 24 independent estimates (seeds chosen in advance): with a correct SE and near-normal
    # estimates (central limit theorem, n = 20000), V / mean(SE^2) ~ F(k-1, k(n-1)) (V: sample variance of the
    # k estimates; each SE^2 has n-1 degrees of freedom) -- Fisher's variance-ratio test, common practice.
    # Two-sided 0.1 % quantiles of F(23, ~5e5), [0.30, 2.26], accept an SE at most ~1.5x too small or ~1.8x too
    # large (an SE scaled by 0.3 or 3 fails).
    means = np.array([[0.3, 0.2], [4.0, 0.6], [0.5, 5.0], [3.0, 3.5]])
    p = np.array([0.4, 0.2, 0.2, 0.2])
    k, n = 24, 20_000
    results = [mc_mutual_information(means, p, n_samples=n, seed=100 + i) for i in range(k)]
    est = np.array([r.rate for r in results])
    se = np.array([r.stderr for r in results])
    ratio = est.var(ddof=1) / np.mean(se**2)
    lo, hi = f_dist.ppf([0.0005, 0.9995], k - 1, k * (n - 1))
    assert lo < ratio < hi, (ratio, lo, hi)


def test_seeded_and_errors():
    m = np.array([[0.1], [3.0]])
    a = mc_mutual_information(m, np.array([0.5, 0.5]), n_samples=1000, seed=5)
    b = mc_mutual_information(m, np.array([0.5, 0.5]), n_samples=1000, seed=5)
    assert a.rate == b.rate and a.samples == 1000
    with pytest.raises(InputError, match="means"):
        mc_mutual_information(np.array([[-1.0], [1.0]]), np.array([0.5, 0.5]))
    with pytest.raises(InputError, match="input_law"):
        mc_mutual_information(m, np.array([0.5, 0.6]))
