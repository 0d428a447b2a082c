"""Forward-recursion information rates (capacity/information/trellis.py).

Outside references: brute-force enumeration of short blocks (scipy.stats.poisson pmfs, written here
independently); the entropy-rate bracket of Cover & Thomas, Elements of Information Theory, Thm 4.5.1; the dicode
erasure channel closed form 1 - 2 eps^2 / (1 + eps) (references.md, "[computed, re-derived]"); the auxiliary-
channel lower bound of Arnold et al., IEEE Trans. IT 52(8), 2006.
"""

import itertools

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy.special import gammaln, logsumexp
from scipy.stats import f as f_dist
from scipy.stats import poisson

import capacity  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.information.trellis import (
    branch_means,
    forward_log_normalisers,
    information_rate,
    poisson_log_branch,
    trellis_rates,
)

# Small binary ISI channel: 1 emitter, 1 receiver, L = 1, means <= 0.65 so counts above 13 carry < 1e-13 mass.
HITS = np.array([[[0.4, 0.2]]])
BG = np.array([0.05])
SYM = np.array([[0.0], [1.0]])
P = np.array([0.5, 0.5])
YMAX = 14


def _mean(prev, cur):
    return BG[0] + SYM[cur, 0] * HITS[0, 0, 0] + SYM[prev, 0] * HITS[0, 0, 1]


def _block_logp(n, with_x0=False):
    """Brute force: ln P(y^n) (and ln P(y^n | x_0)) over every y^n in {0..YMAX-1}^n; x_0 ~ P unknown."""
    ys = np.array(list(itertools.product(range(YMAX), repeat=n)))  # (Ny, n)
    per_x0 = []
    for x0 in range(2):
        acc = np.full(len(ys), -np.inf)
        for xs in itertools.product(range(2), repeat=n):
            seq = (x0,) + xs
            lp = np.sum(np.log(P[list(xs)]))
            for k in range(n):
                lp = lp + poisson.logpmf(ys[:, k], _mean(seq[k], seq[k + 1]))
            acc = np.logaddexp(acc, lp)
        per_x0.append(acc)
    per_x0 = np.array(per_x0)  # (2, Ny): ln P(y^n | x_0)
    return ys, logsumexp(per_x0 + np.log(P)[:, None], axis=0), per_x0


def _entropy(logp):
    return -np.sum(np.exp(logp) * logp)


def test_forward_normalisers_equal_brute_force_block_probability():
    # brute force ln P(y^n) by enumerating all inputs (independent of the recursion) vs sum_k ln lambda_k
    n = 4
    ys, logp, _ = _block_logp(n)
    mu = branch_means(HITS, BG, SYM, 1).reshape(4, 1)
    branch = poisson_log_branch(jnp.asarray(mu), jnp.asarray(mu.sum(axis=1)), 2, 2)
    rng = np.random.default_rng(1)
    for i in rng.choice(len(ys), size=6, replace=False):
        y = ys[i].astype(float)[:, None]
        for log_domain in (False, True):  # scaled linear-domain default and the log-sum-exp variant
            got = float(forward_log_normalisers(branch, jnp.log(jnp.full((2, 2), 0.5)), jnp.log(jnp.full(2, 0.5)),
                                                jnp.asarray(y), 2, log_domain).sum()) - gammaln(y + 1).sum()
            assert got == pytest.approx(logp[i], abs=1e-12)


def test_rate_inside_entropy_rate_bracket_from_short_blocks():
    # Cover & Thomas Thm 4.5.1: H(Y_n|Y^{n-1},S_0) <= h(Y) <= H(Y_n|Y^{n-1}); h(Y|X) per slot is the average
    # Poisson entropy (scipy.stats.poisson.entropy); I = h(Y) - h(Y|X).
    h = {}
    h0 = {}
    for n in (3, 4):
        _, logp, per_x0 = _block_logp(n)
        assert 1.0 - np.exp(logp).sum() < 1e-12  # truncation of the output grid is negligible
        h[n] = _entropy(logp)
        h0[n] = sum(P[x0] * _entropy(per_x0[x0]) for x0 in range(2))
    h_cond = sum(P[a] * P[b] * poisson(_mean(a, b)).entropy() for a in range(2) for b in range(2))
    lo = (h0[4] - h0[3] - h_cond) / np.log(2)
    hi = (h[4] - h[3] - h_cond) / np.log(2)
    assert lo <= hi
    r = information_rate(HITS, BG, SYM, P, n_symbols=4000, n_runs=8, seed=3)
    assert r.method == "forward recursion (exact state)"
    assert lo - 3 * r.stderr <= r.rate <= hi + 3 * r.stderr
    assert r.stderr < 0.02


def test_memoryless_rate_equals_direct_summation():
    # L = 0: I(X;Y) summed directly over outputs with scipy.stats.poisson (2 receivers, 3 symbols, 2 emitters)
    hits = np.array([[[0.3], [0.05]], [[0.02], [0.25]]])
    bg = np.array([0.2, 0.1])
    sym = np.array([[0.0, 0.0], [6.0, 0.0], [0.0, 6.0]])
    p = np.array([0.3, 0.35, 0.35])
    mu = bg[None, :] + sym @ hits[:, :, 0]
    grid = np.array(list(itertools.product(range(30), repeat=2)))
    logw = poisson.logpmf(grid[None, :, 0], mu[:, 0:1]) + poisson.logpmf(grid[None, :, 1], mu[:, 1:2])
    logy = logsumexp(logw + np.log(p)[:, None], axis=0)
    exact = float(np.sum(p[:, None] * np.exp(logw) * (logw - logy[None, :]))) / np.log(2)
    r = information_rate(hits, bg, sym, p, n_symbols=4000, n_runs=8, seed=0)
    assert abs(r.rate - exact) < 4 * r.stderr


def _dicode_log_branch(eps):
    # state = previous input (0/1), input = current; output code 0,1,2 for x_k - x_{k-1} = -1,0,1; 3 = erased
    diff = np.array([[1, 2], [0, 1]])

    def log_branch(y):
        match = jnp.where(jnp.asarray(diff) == y, jnp.log(1.0 - eps), -jnp.inf)
        return jnp.where(y == 3, jnp.log(eps) * jnp.ones((2, 2)), match)

    return log_branch


def test_dicode_erasure_channel_through_generic_core():
    # references.md: dicode erasure channel, i.u.d. inputs: 1 - 2 eps^2/(1+eps) bits (eps = 0.3: 0.86154)
    eps, n, runs = 0.3, 20_000, 8
    rng = np.random.default_rng(7)
    x = rng.integers(0, 2, size=(runs, n + 1))
    erased = rng.random((runs, n)) < eps
    y = np.where(erased, 3, x[:, 1:] - x[:, :-1] + 1)
    log_trans = jnp.log(jnp.full((2, 2), 0.5))
    prior = jnp.log(jnp.full(2, 0.5))
    lams = jax.vmap(lambda yy: forward_log_normalisers(_dicode_log_branch(eps), log_trans, prior, yy, 2).sum())(
        jnp.asarray(y))
    lams_log = jax.vmap(lambda yy: forward_log_normalisers(_dicode_log_branch(eps), log_trans, prior, yy, 2,
                                                           True).sum())(jnp.asarray(y[:1, :2000]))
    assert np.all(np.isfinite(np.asarray(lams)))
    assert float(lams_log[0]) == pytest.approx(float(jax.vmap(lambda yy: forward_log_normalisers(
        _dicode_log_branch(eps), log_trans, prior, yy, 2).sum())(jnp.asarray(y[:1, :2000]))[0]), abs=1e-9)
    log_w = np.where(erased, np.log(eps), np.log(1 - eps)).sum(axis=1)
    rates = (log_w - np.asarray(lams)) / n / np.log(2)
    expected = 1 - 2 * eps**2 / (1 + eps)
    assert expected == pytest.approx(0.86154, abs=1e-5)
    assert abs(rates.mean() - expected) < 4 * rates.std(ddof=1) / np.sqrt(runs)


def test_reduced_state_is_below_full_state_with_common_outputs():
    # Arnold et al. 2006: E_p[ln q(Y|X)/q(Y)] <= I for any auxiliary q; same seed -> same outputs
    hits = np.array([[[0.5, 0.3, 0.15]]]) * 4
    kw = dict(n_symbols=4000, n_runs=8, seed=11)
    full = trellis_rates(hits, [0.2], SYM, P, **kw)
    assert full["exact"] and np.allclose(full["lower"], full["upper"])
    for kept in (0, 1):
        red = trellis_rates(hits, [0.2], SYM, P, kept_lags=kept, **kw)
        diff = full["lower"] - red["lower"]
        assert diff.mean() > -3 * diff.std(ddof=1) / np.sqrt(diff.size)
        # the auxiliary upper bound (cross-entropy) lies above the full-state rate
        up = red["upper"] - full["lower"]
        assert up.mean() > -3 * up.std(ddof=1) / np.sqrt(up.size)
    r = information_rate(hits, [0.2], SYM, P, max_states=2, **kw)
    assert r.method == "reduced-state trellis lower bound (keeps 1 of 2 lags)"


def test_markov_input_with_identical_rows_equals_iid():
    # a Markov law whose rows are all p is the i.i.d. law p: two independent estimates agree within their
    # combined standard error (common practice)
    law = np.array([[0.7, 0.3], [0.7, 0.3]])
    a = information_rate(HITS * 5, BG, SYM, law, n_symbols=4000, n_runs=8, seed=2)
    b = information_rate(HITS * 5, BG, SYM, law[0], n_symbols=4000, n_runs=8, seed=5)
    assert abs(a.rate - b.rate) < 4 * np.hypot(a.stderr, b.stderr)


def test_reported_stderr_matches_spread_over_independent_seeds():
    # The standard error reported by information_rate comes from the spread of the code's own runs; here it is
    # checked against the spread of fully independent estimates (k = 24 seeds, chosen in advance). If the SE
    # is right and the estimates are close to normal (central limit theorem over 8 x 2000 symbols), the sample
    # variance V of the k estimates is sigma^2 chi2_{k-1}/(k-1), and the mean of the k reported SE^2 (each
    # s^2/8 from 8 runs, 7 degrees of freedom) is sigma^2 chi2_{7k}/(7k), independent of V up to the small
    # between-seed term; so V / mean(SE^2) ~ F(k-1, 7k) (Fisher's variance-ratio test, common practice). The
    # two-sided 0.1 % quantiles of F(23, 168), [0.29, 2.48], accept an SE at most ~1.6x too small or ~1.9x too
    # large (an SE scaled by 0.3 or 3 fails).
    k, runs = 24, 8
    results = [information_rate(HITS * 5, BG, SYM, P, n_symbols=2000, n_runs=runs, seed=100 + i) for i in range(k)]
    est = np.array([r.rate for r in results])
    se = np.array([r.stderr for r in results])
    ratio = est.var(ddof=1) / np.mean(se**2)
    lo, hi = f_dist.ppf([0.0005, 0.9995], k - 1, k * (runs - 1))
    assert lo < ratio < hi, (ratio, lo, hi)


def test_bad_input_raises():
    with pytest.raises(InputError, match="symbols"):
        information_rate(HITS, BG, np.ones((2, 3)), P)
    with pytest.raises(InputError, match="input_law"):
        information_rate(HITS, BG, SYM, [0.2, 0.2])
    with pytest.raises(InputError, match="kept_lags"):
        information_rate(HITS, BG, SYM, P, kept_lags=5)
    with pytest.raises(InputError, match="background"):
        information_rate(HITS, [-1.0], SYM, P)


@pytest.mark.slow
def test_long_memory_reduced_state_brackets_and_default_choice():
    # L = 12 binary: 4096 states exact vs the default reduced state (max_states=256 -> L' = 8); Arnold et al.
    # 2006: lower bound <= rate <= auxiliary upper bound, with common outputs
    hits = np.array([[[1.5 * 0.7**lag for lag in range(13)]]])
    kw = dict(n_symbols=20_000, n_runs=8, seed=21)
    full = trellis_rates(hits, [0.3], SYM, P, max_states=4096, **kw)
    red = trellis_rates(hits, [0.3], SYM, P, max_states=256, **kw)
    assert full["exact"] and red["kept"] == 8
    d_lo = full["lower"] - red["lower"]
    d_up = red["upper"] - full["lower"]
    assert d_lo.mean() > -3 * d_lo.std(ddof=1) / np.sqrt(8)
    assert d_up.mean() > -3 * d_up.std(ddof=1) / np.sqrt(8)


@pytest.mark.slow
def test_bracket_with_long_run():
    # Cover & Thomas Thm 4.5.1 bracket as above, with 8 x 100 000 symbols
    h, h0 = {}, {}
    for n in (3, 4):
        _, logp, per_x0 = _block_logp(n)
        h[n] = _entropy(logp)
        h0[n] = sum(P[x0] * _entropy(per_x0[x0]) for x0 in range(2))
    h_cond = sum(P[a] * P[b] * poisson(_mean(a, b)).entropy() for a in range(2) for b in range(2))
    lo = (h0[4] - h0[3] - h_cond) / np.log(2)
    hi = (h[4] - h[3] - h_cond) / np.log(2)
    r = information_rate(HITS, BG, SYM, P, n_symbols=100_000, n_runs=8, seed=4)
    assert lo - 3 * r.stderr <= r.rate <= hi + 3 * r.stderr
