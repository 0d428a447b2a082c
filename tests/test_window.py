"""Windowed decision-feedback bound (capacity/information/window.py) against outside checks.

Outside references (references.md, "Channels with memory"):
- brute-force enumeration written here with scipy.stats.poisson and itertools: every past, current symbol, future and
  output vector on a truncated grid, I_win(J) = I(X_0; Y_0..Y_J | X_-1..X_-L) summed exactly;
- the chain-rule ordering I_dfe <= I_iid for i.i.d. inputs (Shamai, Ozarow, Wyner, IEEE Trans. IT 37(6), 1991),
  J = 0 being the decision-feedback bound of capacity/information/bounds.py;
- the block bracket H(Y_n | Y^(n-1), S_0) <= H(Y) <= H(Y_n | Y^(n-1)) for a hidden Markov output (Cover & Thomas,
  Elements of Information Theory, Thm 4.5.1), computed here by an exact forward recursion over all output sequences,
  with I_iid = H(Y) - H(Y|X);
- the likelihood-ratio gradient checked against central finite differences of the enumerated I_win.
"""

import itertools

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy.special import entr, logsumexp
from scipy.stats import poisson

import capacity  # noqa: F401
from capacity.errors import InputError
from capacity.information.bounds import isi_bounds
from capacity.information.window import chunk_size, draw, surrogate, window_bound

LN2 = np.log(2.0)
TAIL = 1e-13  # Poisson mass beyond the grid, per output coordinate, at the largest mean

# Channel A: one emitter, one receiver, binary on/off, memory L = 2 (4 past states).
HITS_A = np.array([[[0.6, 0.35, 0.2]]])
BASE_A = np.array([0.2])
SYM_A = np.array([[0.0], [3.0]])
LAW_A = np.array([0.4, 0.6])
N_A = 16384  # one sample size for every channel-A estimate, so each window J compiles once

# Channel B: two emitters, two receivers with cross-talk, four symbols (none / first / second / both), L = 1.
HITS_B = np.array([[[0.5, 0.2], [0.15, 0.1]],
                   [[0.1, 0.15], [0.45, 0.25]]])
BASE_B = np.array([0.1, 0.2])
SYM_B = np.array([[0.0, 0.0], [2.0, 0.0], [0.0, 2.0], [2.0, 2.0]])
LAW_B = np.array([0.3, 0.2, 0.2, 0.3])


# ------------------------------------------------------------------------------------------- brute force
def _window_means(hits, base, sym, seq, L, J):
    """(J+1, R) means of slots 0..J; seq holds the symbols sent at times -L..J (seq[t + L] is time t)."""
    out = np.tile(base, (J + 1, 1))
    for t in range(J + 1):
        for tau in range(-L, t + 1):
            if t - tau <= L:
                out[t] = out[t] + sym[seq[tau + L]] @ hits[:, :, t - tau]
    return out


def _enumerate(hits, base, sym, law, J, tops=None):
    """Exact I_win(J) in bits, the standard deviation (bits) of the per-past term
    G = sum_s P(s) ln[p(y_s|s, past) / p(y_s|past)] (one independent y_s per s), the kept output mass, the tops.

    Sums over every past (X_-1..X_-L), current symbol, future (X_1..X_J) and output vector on a product grid.
    """
    hits, base, sym, law = (np.asarray(v, dtype=float) for v in (hits, base, sym, law))
    L = hits.shape[2] - 1
    S = sym.shape[0]
    pasts = list(itertools.product(range(S), repeat=L))  # past[m] = symbol m+1 slots before
    futures = list(itertools.product(range(S), repeat=J))
    means = {(pa, s, f): _window_means(hits, base, sym, list(reversed(pa)) + [s] + list(f), L, J).ravel()
             for pa in pasts for s in range(S) for f in futures}
    if tops is None:
        biggest = np.max(np.array(list(means.values())), axis=0)
        tops = [int(poisson.isf(TAIL, m)) + 2 for m in biggest]
    D = len(tops)

    def log_pmf(mu):  # ln prod_d Poi(y_d; mu_d) over the whole grid, flattened
        out = np.zeros(tops)
        for d in range(D):
            shape = [1] * D
            shape[d] = tops[d]
            out = out + poisson.logpmf(np.arange(tops[d]), mu[d]).reshape(shape)
        return out.ravel()

    info, within, mass, per_past = 0.0, 0.0, 0.0, []
    for pa in pasts:
        w_past = float(np.prod(law[list(pa)]))
        lw = np.array([logsumexp([np.sum(np.log(law[list(f)])) + log_pmf(means[pa, s, f]) for f in futures], axis=0)
                       for s in range(S)])  # (S, grid): ln p(y | s, past), futures summed as noise
        g = lw - logsumexp(lw + np.log(law)[:, None], axis=0)[None]
        w = np.exp(lw)
        eg, eg2 = np.sum(w * g, axis=1), np.sum(w * g**2, axis=1)
        info += w_past * (law @ eg)
        within += w_past * np.sum(law**2 * (eg2 - eg**2))
        mass += w_past * np.sum(law[:, None] * w)
        per_past.append((w_past, law @ eg))
    between = sum(wp * (m - info) ** 2 for wp, m in per_past)
    return info / LN2, np.sqrt(within + between) / LN2, mass, tops


def _iid_bracket(hits, base, sym, law, n):
    """Cover & Thomas Thm 4.5.1 bracket on I_iid (bits) for one receiver, by an exact forward recursion over all
    output sequences of length n: (H(Y_n|Y^(n-1),S_0) - H(Y|X), H(Y_n|Y^(n-1)) - H(Y|X)), and the kept mass.
    State = the last L symbols (newest first); Y_k ~ Poi(base + sum_l x_(k-l) . hits[:, 0, l])."""
    L = hits.shape[2] - 1
    S = sym.shape[0]
    a = np.einsum("se,el->ls", sym, hits[:, 0, :])  # (L+1, S)
    states = list(itertools.product(range(S), repeat=L))
    index = {st: i for i, st in enumerate(states)}
    p_state = np.array([np.prod(law[list(st)]) for st in states])
    mu = np.array([[base[0] + a[0, x] + sum(a[l + 1, st[l]] for l in range(L)) for x in range(S)] for st in states])
    step = np.array([[index[((x,) + st)[:L]] for x in range(S)] for st in states])
    top = int(poisson.isf(TAIL, mu.max())) + 2
    pmf = poisson.pmf(np.arange(top)[None, None, :], mu[:, :, None])  # (state, x, y)
    h_y_given_x = np.sum(p_state[:, None] * law[None, :] * poisson(mu).entropy())  # nats, exact per symbol
    ns = len(states)
    alpha = np.zeros((ns, 1, ns))  # (start state, output sequence, current state): P(y^k, state | start)
    alpha[np.arange(ns), 0, np.arange(ns)] = 1.0
    h_cond, h_marg = [0.0], [0.0]
    for _ in range(n):
        new = np.zeros((ns, alpha.shape[1], top, ns))
        for st in range(ns):
            for x in range(S):
                new[:, :, :, step[st, x]] += alpha[:, :, st, None] * law[x] * pmf[st, x][None, None, :]
        alpha = new.reshape(ns, -1, ns)
        p_seq = alpha.sum(axis=2)  # (start, sequence)
        h_cond.append(float(p_state @ entr(p_seq).sum(axis=1)))
        h_marg.append(float(entr(p_state @ p_seq).sum()))
    lower = (h_cond[n] - h_cond[n - 1] - h_y_given_x) / LN2
    upper = (h_marg[n] - h_marg[n - 1] - h_y_given_x) / LN2
    return lower, upper, float(p_state @ p_seq.sum(axis=1))


# ------------------------------------------------------------------------------------------------ fixtures
@pytest.fixture(scope="module")
def exact_a():
    return {J: _enumerate(HITS_A, BASE_A, SYM_A, LAW_A, J) for J in (0, 1, 2)}


@pytest.fixture(scope="module")
def estimate_a():
    return {J: window_bound(HITS_A, BASE_A, SYM_A, LAW_A, window=J, n_samples=N_A, seed=11) for J in (0, 1, 2)}


# ----------------------------------------------------------------------------- 1. against brute force
@pytest.mark.parametrize("J", [0, 1, 2])
def test_single_link_matches_enumeration(J, exact_a, estimate_a):
    # Source: brute-force enumeration above (scipy.stats.poisson + itertools).
    exact, sd, mass, _ = exact_a[J]
    est = estimate_a[J]
    assert mass > 1 - 1e-10
    assert est.method.endswith(f"(J={J})")
    assert est.samples == N_A
    assert abs(est.rate - exact) < 4 * est.stderr
    # The SE is the exact spread of the per-past term over sqrt(N); a sample SD has relative error about
    # sqrt((kurtosis - 1) / 4N), under 3% here for any kurtosis up to ~30, so 10% is more than 3 of its own SEs.
    assert est.stderr == pytest.approx(sd / np.sqrt(N_A), rel=0.10)


def test_two_by_two_matches_enumeration():
    # Source: brute-force enumeration above; 2 emitters, 2 receivers with cross-talk, 4 symbols, L = 1, J = 1.
    n = 8192
    exact, sd, mass, _ = _enumerate(HITS_B, BASE_B, SYM_B, LAW_B, 1)
    est = window_bound(HITS_B, BASE_B, SYM_B, LAW_B, window=1, n_samples=n, seed=5)
    assert mass > 1 - 1e-10
    assert abs(est.rate - exact) < 4 * est.stderr
    assert est.stderr == pytest.approx(sd / np.sqrt(n), rel=0.10)
    # the default window is the whole memory (S^L = 4 futures is within the automatic limit)
    assert window_bound(HITS_B, BASE_B, SYM_B, LAW_B, n_samples=n, seed=5).method.endswith("(J=1)")


# -------------------------------------------------------------------------- 2. J = 0 is the DFE bound
def test_zero_window_is_decision_feedback_bound(exact_a, estimate_a):
    # Source: chain rule (Shamai, Ozarow, Wyner 1991): I(X_0; Y_0 | past) is I_dfe of bounds.isi_bounds, which sums
    # it exactly for this small channel; the enumeration here is a second, independent sum.
    dfe = isi_bounds(HITS_A, BASE_A, SYM_A, LAW_A)["dfe"]
    assert dfe.method == "exact"
    assert exact_a[0][0] == pytest.approx(dfe.rate, abs=1e-9)
    est = estimate_a[0]
    assert abs(est.rate - dfe.rate) < 4 * est.stderr


# ------------------------------------------------------------------- 3. ordering and approach to I_iid
def test_window_below_iid_rate_and_grows_towards_it(exact_a, estimate_a):
    # Source: Cover & Thomas Thm 4.5.1 block bracket on the entropy rate of the hidden Markov output (forward
    # recursion above, state = the last two symbols), I_iid = H(Y) - H(Y|X); I_win(J) <= I_iid by the chain rule.
    lower, upper, mass = _iid_bracket(HITS_A, BASE_A, SYM_A, LAW_A, 4)
    assert mass > 1 - 1e-10
    assert 0 < upper - lower < 1e-3  # the bracket is tight enough to be an oracle
    # the two independent oracles agree: every exact window lies below the rate, the widest one close to it
    assert all(exact_a[J][0] <= upper for J in (0, 1, 2))
    assert lower - exact_a[2][0] < 3e-3
    est = {J: estimate_a[J] for J in (0, 1, 2)}
    for J in (0, 1, 2):
        assert est[J].rate <= upper + 4 * est[J].stderr
    for J in (0, 1):  # non-decreasing within MC error (se_a + se_b bounds the SD of a difference)
        assert est[J + 1].rate >= est[J].rate - 4 * (est[J].stderr + est[J + 1].stderr)
    # J = 0 is resolvably below the rate; J = 2 is within MC error of it and has closed most of the gap
    assert lower - est[0].rate > 4 * est[0].stderr
    assert lower - est[2].rate < 4 * est[2].stderr
    assert lower - est[2].rate < 0.25 * (lower - est[0].rate)


# ------------------------------------------------------------------------------------------- 4. gradient
def _design(theta):
    """theta = (scale of the hits, added background, logit shift of symbol 1) -> channel A's arguments."""
    hits = jnp.asarray(HITS_A) * theta[0]
    base = jnp.asarray(BASE_A) + theta[1]
    law = jax.nn.softmax(jnp.log(jnp.asarray(LAW_A)) + jnp.stack([jnp.zeros(()), theta[2]]))
    return hits, base, jnp.asarray(SYM_A), law


def test_surrogate_gradient_matches_finite_differences():
    # Source: central finite differences of the brute-force I_win(theta) above (fixed output grid, step 1e-4:
    # truncation error ~1e-8, far below the Monte Carlo error).
    J, n, seeds = 1, 5000, range(8)
    theta0 = jnp.array([1.0, 0.0, 0.0])
    chunk = chunk_size(2, J, 1)

    def value(theta, past, fut, y):
        return surrogate(*_design(theta), past, fut, y, J=J, chunk=chunk)

    value_and_grad = jax.value_and_grad(value)
    vals, grads = [], []
    for seed in seeds:
        past, fut, y = draw(jax.random.PRNGKey(seed), *_design(theta0), memory_past=2, J=J, n=n)
        v, g = value_and_grad(theta0, past, fut, y)
        vals.append(float(v))
        grads.append(np.asarray(g))
    vals, grads = np.array(vals), np.array(grads)

    def exact(theta, tops=None):
        return _enumerate(*(np.asarray(v) for v in _design(jnp.asarray(theta))), J, tops=tops)

    centre, _, _, tops = exact(np.array(theta0))
    step = 1e-4
    fd = np.array([(exact(np.array(theta0) + step * e, tops)[0] - exact(np.array(theta0) - step * e, tops)[0])
                   / (2 * step) for e in np.eye(3)])
    assert np.all(np.abs(fd) > 0.05)  # every direction matters, so a missing term shows
    # SE from the spread over 8 independent seeds (t with 7 d.o.f.: |t| > 4 has probability 0.5%)
    se = grads.std(axis=0, ddof=1) / np.sqrt(len(grads))
    np.testing.assert_array_less(np.abs(grads.mean(axis=0) - fd), 4 * se)
    assert abs(vals.mean() - centre) < 4 * vals.std(ddof=1) / np.sqrt(len(vals))


# ------------------------------------------------------------------------------------------ 5. bad input
@pytest.mark.parametrize("kwargs, field", [
    ({"input_law": np.full((2, 2), 0.5)}, "input_law"),  # a memory-1 Markov law
    ({"window": -1}, "window"),
    ({"n_samples": 15}, "n_samples"),
])
def test_bad_input_names_the_field(kwargs, field):
    # Source: style.md (errors name the argument); references.md (the window bound is for i.i.d. inputs).
    args = {"input_law": LAW_A, **kwargs}
    law = args.pop("input_law")
    with pytest.raises(InputError, match=f"^{field} ") as err:
        window_bound(HITS_A, BASE_A, SYM_A, law, **args)
    assert err.value.field == field


def test_shared_sampler_draws_the_same_law():
    # Poisson law (mean = variance = the window mean): the counts of draw_shared against their own means, pooled
    # over samples, within 4 standard errors; and the symbols' frequencies against the law (binomial SE)
    from capacity.information.window import _draw_symbols, draw_shared

    key = jax.random.PRNGKey(5)
    h, b, s, p = (jnp.asarray(v) for v in (HITS_A, BASE_A, SYM_A, LAW_A))
    past, fut, y = draw_shared(key, h, b, s, p, memory_past=2, J=2, n=20_000)
    k_sym, _ = jax.random.split(key)
    _, _, mean = _draw_symbols(k_sym, h, b, s, p, memory_past=2, J=2, n=20_000)
    y, mean = np.asarray(y).ravel(), np.asarray(mean).ravel()
    z = (y - mean).sum() / np.sqrt(mean.sum())
    assert abs(z) < 4
    # second moment: E[(y - mu)^2 - mu] = 0 for a Poisson count
    v = ((y - mean) ** 2 - mean)
    assert abs(v.mean()) < 4 * v.std(ddof=1) / np.sqrt(v.size)
    freq = np.bincount(np.asarray(past).ravel(), minlength=2) / np.asarray(past).size
    assert abs(freq[1] - LAW_A[1]) < 4 * np.sqrt(LAW_A[1] * LAW_A[0] / np.asarray(past).size)
