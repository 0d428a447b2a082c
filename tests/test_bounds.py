"""Single-letter bounds (capacity/information/bounds.py).

Outside references: the chain-rule ordering I_sbs <= I_dfe <= I_iid <= I_mf for i.i.d. inputs (references.md,
"Single-letter bounds"; Shamai, Ozarow, Wyner, IEEE Trans. IT 37(6), 1991 for the Gaussian analogue); brute-force
sums with scipy.stats.poisson written here independently; the Z-channel closed form for binary on/off Poisson
without background (references.md, "Poisson channels").
"""

import itertools

import numpy as np
import pytest
from scipy.special import logsumexp
from scipy.stats import f as f_dist
from scipy.stats import poisson

import capacity  # noqa: F401
from capacity.errors import InputError
from capacity.information.bounds import isi_bounds
from capacity.information.trellis import information_rate

SYM = np.array([[0.0], [1.0]])
P = np.array([0.5, 0.5])


def _mi(logw, p, weights):
    """sum_g w_g I(p, W_g) in bits; logw (G, S, Ny) log-pmfs over a grid."""
    total = 0.0
    for wg, lw in zip(weights, logw, strict=True):
        ly = logsumexp(lw + np.log(p)[:, None], axis=0)
        total += wg * np.sum(p[:, None] * np.exp(lw) * (lw - ly[None, :]))
    return total / np.log(2)


def _brute_l1(a, b, bg, p):
    """Brute-force sbs, dfe, mf for y_k ~ Poi(bg + a x_k + b x_{k-1}), x in {0, 1} (scipy.stats.poisson)."""
    ys = np.arange(60)
    mu = lambda prev, cur: bg + a * cur + b * prev  # noqa: E731
    lw = np.array([[poisson.logpmf(ys, mu(prev, cur)) for cur in (0, 1)] for prev in (0, 1)])  # (prev, cur, y)
    mix = logsumexp(lw + np.log(p)[:, None, None], axis=0)[None]
    sbs = _mi(mix, p, [1.0])
    dfe = _mi(lw, p, p)
    # mf: given x_{k-1} = u and x_{k+1} = v, observe y_k ~ Poi(mu(u, s)), y_{k+1} ~ Poi(mu(s, v))
    grid = np.array(list(itertools.product(ys[:25], repeat=2)))
    groups, weights = [], []
    for u, v in itertools.product((0, 1), repeat=2):
        groups.append([poisson.logpmf(grid[:, 0], mu(u, s)) + poisson.logpmf(grid[:, 1], mu(s, v))
                       for s in (0, 1)])
        weights.append(p[u] * p[v])
    mf = _mi(np.array(groups), p, weights)
    return sbs, dfe, mf


@pytest.mark.parametrize("a,b,bg,p", [(3.0, 1.5, 0.2, 0.5), (2.0, 1.6, 0.5, 0.35)])
def test_exact_bounds_match_brute_force_and_bracket_iid_rate(a, b, bg, p):
    law = np.array([1 - p, p])
    hits = np.array([[[a, b]]])
    got = isi_bounds(hits, [bg], SYM, law)
    sbs, dfe, mf = _brute_l1(a, b, bg, law)  # brute force (scipy.stats.poisson)
    assert got["sbs"].method == "exact"
    assert got["sbs"].rate == pytest.approx(sbs, abs=1e-10)
    assert got["dfe"].rate == pytest.approx(dfe, abs=1e-10)
    assert got["mf"].rate == pytest.approx(mf, abs=1e-10)
    # chain-rule ordering with the forward-recursion i.i.d. rate (references.md "Single-letter bounds")
    r = information_rate(hits, [bg], SYM, law, n_symbols=4000, n_runs=8, seed=1)
    assert got["sbs"].rate < got["dfe"].rate
    assert got["dfe"].rate <= r.rate + 3 * r.stderr
    assert r.rate <= got["mf"].rate + 3 * r.stderr


def test_monte_carlo_bounds_agree_with_exact_and_keep_order():
    # two emitters, two receivers, L = 2: exact sums vs forced Monte Carlo (independent routes)
    hits = np.array([[[0.5, 0.25, 0.1], [0.1, 0.1, 0.05]], [[0.05, 0.08, 0.04], [0.45, 0.2, 0.1]]]) * 4
    sym = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    law = np.array([0.4, 0.3, 0.3])
    bg = np.array([0.1, 0.2])
    ex = isi_bounds(hits, bg, sym, law, exact_limit=10**6)
    mc = isi_bounds(hits, bg, sym, law, exact_limit=0, n_samples=20_000, seed=4)
    assert ex["sbs"].method == "exact" and ex["dfe"].method == "exact"
    for k in ("sbs", "dfe", "mf"):
        assert mc[k].stderr > 0
        if ex[k].method == "exact":
            assert abs(mc[k].rate - ex[k].rate) < 4 * mc[k].stderr
    assert ex["sbs"].rate < ex["dfe"].rate < ex["mf"].rate + 3 * ex["mf"].stderr
    r = information_rate(hits, bg, sym, law, n_symbols=4000, n_runs=8, seed=2)
    assert ex["dfe"].rate <= r.rate + 3 * r.stderr
    assert r.rate <= mc["mf"].rate + 3 * np.hypot(r.stderr, mc["mf"].stderr)


def test_stratified_monte_carlo_on_a_skewed_law_agrees_with_exact_sums():
    # a law that sends mostly silence (rare symbols dominate the variance of plain sampling): the stratified
    # estimates must still agree with the exact sums (brute force, scipy.stats.poisson) within 4 standard errors
    hits = np.array([[[0.5, 0.25], [0.1, 0.1]], [[0.05, 0.08], [0.45, 0.2]]]) * 4  # L = 1: mf exact as well
    sym = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    law = np.array([0.9, 0.05, 0.05])
    bg = np.array([0.1, 0.2])
    ex = isi_bounds(hits, bg, sym, law, exact_limit=2 * 10**7)
    mc = isi_bounds(hits, bg, sym, law, exact_limit=0, n_samples=6000, seed=9)
    for k in ("dfe", "mf"):
        assert ex[k].method == "exact" and "stratified" in mc[k].message
        assert mc[k].samples == 2000  # ceil(6000 / 3) contexts
        assert abs(mc[k].rate - ex[k].rate) < 4 * mc[k].stderr, (k, mc[k].rate, ex[k].rate, mc[k].stderr)


def test_monte_carlo_stderr_matches_spread_over_independent_seeds():
    # The Monte Carlo bounds report SE = sample std / sqrt(n) of their own samples. Check each against the
    # spread of k = 24 independent estimates (seeds chosen in advance): with a correct SE and near-normal
    # estimates (central limit theorem, n = 5000), V / mean(SE^2) ~ F(k-1, k(n-1)) (V: sample variance of the
    # k estimates) -- Fisher's variance-ratio test, common practice. Two-sided 0.1 % quantiles of F(23, ~1.2e5),
    # [0.30, 2.26] (0.3 % family-wise over the three bounds, Bonferroni), accept an SE at most ~1.5x too small or
    # ~1.8x too large (an SE scaled by 0.3 or 3 fails).
    hits = np.array([[[0.5, 0.25, 0.1], [0.1, 0.1, 0.05]], [[0.05, 0.08, 0.04], [0.45, 0.2, 0.1]]]) * 4
    sym = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    law = np.array([0.4, 0.3, 0.3])
    bg = np.array([0.1, 0.2])
    k, n = 24, 5000
    results = [isi_bounds(hits, bg, sym, law, exact_limit=0, n_samples=n, seed=100 + i) for i in range(k)]
    for key in ("sbs", "dfe", "mf"):
        assert all(r[key].method == "Monte Carlo" for r in results)
        m = results[0][key].samples  # stratified bounds draw ceil(n / S) contexts, each one sample
        lo, hi = f_dist.ppf([0.0005, 0.9995], k - 1, k * (m - 1))
        est = np.array([r[key].rate for r in results])
        se = np.array([r[key].stderr for r in results])
        ratio = est.var(ddof=1) / np.mean(se**2)
        assert lo < ratio < hi, (key, ratio, lo, hi)


def test_auxiliary_sbs_is_a_lower_bound():
    # Arnold et al. 2006: an auxiliary ISI mixture (first lag exact, the rest at the mean) evaluated on true
    # outputs lower-bounds I(X_k;Y_k); compare with the exact sum
    hits = np.array([[[2.0, 1.5, 1.2, 1.0]]])
    ex = isi_bounds(hits, [0.1], SYM, P)
    aux = isi_bounds(hits, [0.1], SYM, P, exact_limit=0, max_states=2, n_samples=20_000, seed=9)
    assert aux["sbs"].method == "Monte Carlo, auxiliary lower bound (L'=1)"
    assert aux["sbs"].rate <= ex["sbs"].rate + 3 * aux["sbs"].stderr


def test_no_memory_all_bounds_equal_the_memoryless_information():
    # L = 0: sbs = dfe = mf = I(X;Y); binary on/off without background is a Z-channel with P(0|1) = e^-lambda
    # (references.md "Poisson channels"): I = h2(p(1-e^-l)) - p h2(e^-l) bits
    lam, p1 = 1.0, 0.4
    h2 = lambda t: -t * np.log2(t) - (1 - t) * np.log2(1 - t)  # noqa: E731
    z = h2(p1 * (1 - np.exp(-lam))) - p1 * h2(np.exp(-lam))
    law = np.array([1 - p1, p1])
    got = isi_bounds(np.array([[[lam]]]), [0.0], SYM, law)
    for k in ("sbs", "dfe", "mf"):
        assert got[k].rate == pytest.approx(z, abs=1e-12)
    r = information_rate(np.array([[[lam]]]), [0.0], SYM, law, n_symbols=4000, n_runs=8, seed=0)
    assert abs(r.rate - z) < 4 * r.stderr


def test_bad_input():
    with pytest.raises(InputError, match="input_law"):
        isi_bounds(np.array([[[1.0, 0.5]]]), [0.0], SYM, np.array([[0.5, 0.5], [0.5, 0.5]]))
    with pytest.raises(InputError, match="interference"):
        isi_bounds(np.array([[[1.0, 0.5]]]), [0.0], SYM, P, interference=[-1.0])


@pytest.mark.parametrize("L, S, R, c", [(0, 3, 1, 4), (1, 2, 2, 6), (4, 3, 2, 5), (24, 5, 2, 3)])
def test_matched_filter_means_follow_the_definition(L, S, R, c):
    # the definition, written out symbol by symbol: slot k+s receives base + sum_l h_l(x_{k+s-l}) (common practice
    # for a linear ISI channel); edges: no memory (L = 0), one lag, the largest lag of the demo (24)
    from capacity.information.bounds import _mf_means

    rng = np.random.default_rng(L)
    per_lag, base = rng.random((L + 1, S, R)), rng.random(R)
    ctx = rng.integers(0, S, size=(c, 2 * L))
    got = _mf_means(per_lag, base, ctx, S)
    assert got.shape == (c, S, L + 1, R)
    for i in range(c):
        for x in range(S):
            seq = list(ctx[i, :L]) + [x] + list(ctx[i, L:])  # positions k-L .. k+L
            for slot in range(L + 1):
                want = base + sum(per_lag[lag][seq[L + slot - lag]] for lag in range(L + 1))
                np.testing.assert_allclose(got[i, x, slot], want, rtol=1e-13)
