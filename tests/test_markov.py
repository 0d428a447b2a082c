"""Optimised Markov inputs (capacity/information/markov.py).

Outside references: the Z-channel capacity log2(1 + (1-p) p^(p/(1-p))) with p = e^-lambda (references.md,
"Poisson channels"; binary on/off Poisson without background); the maxentropic (Parry) chain of a constrained
graph has entropy log2 of the Perron root, RLL(1,inf) = 0.694241914 bits (references.md); Vontobel, Kavčić,
Arnold, Loeliger, IEEE Trans. IT 54(5), 2008 (the Markov-optimised rate is at least the i.i.d. rate).
"""

import numpy as np
import pytest
from scipy import optimize
from scipy.special import logsumexp, xlogy
from scipy.stats import poisson

import capacity  # noqa: F401
from capacity.errors import InputError
from capacity.information.markov import _perron_update, markov_rate, successors
from capacity.information.trellis import information_rate

SYM = np.array([[0.0], [1.0]])


def _stationary_power(q, iters=5000):
    """Stationary law of the shift-register chain by power iteration (independent of the sparse solver)."""
    N, S = q.shape
    nxt = successors(N, S)
    pi = np.full(N, 1.0 / N)
    for _ in range(iters):
        new = np.zeros(N)
        np.add.at(new, nxt.ravel(), (pi[:, None] * q).ravel())
        pi = new
    return pi


def test_perron_update_with_zero_gains_gives_the_maxentropic_constrained_chain():
    # T = 0 on allowed edges, forbidden 1 -> 1 (RLL(1,inf)): the update is the Parry chain, entropy log2(phi)
    T = np.array([[0.0, 0.0], [0.0, -np.inf]])
    q = _perron_update(T, np.zeros(2), 0.0, successors(2, 2))
    pi = _stationary_power(q)
    with np.errstate(divide="ignore", invalid="ignore"):
        ent = -np.nansum(pi[:, None] * q * np.where(q > 0, np.log2(q), 0.0))
    assert ent == pytest.approx(0.694241914, abs=1e-9)  # references.md: RLL(1,inf)
    assert q[1, 1] == 0.0


def test_memoryless_case_reaches_the_z_channel_capacity():
    lam = 1.0
    p = np.exp(-lam)
    cap = np.log2(1 + (1 - p) * p ** (p / (1 - p)))  # references.md: Z-channel capacity, Z(e^-1)
    assert cap == pytest.approx(0.436401049672878, abs=1e-12)
    r, law = markov_rate(np.array([[[lam]]]), [0.0], SYM, n_symbols=4000, n_iter=8, n_runs=8, seed=0)
    assert law.shape == (1, 2)
    q1 = law[0, 1]
    # exact I at the returned law (Z-channel mutual information, summed in closed form)
    h2 = lambda t: -t * np.log2(t) - (1 - t) * np.log2(1 - t)  # noqa: E731
    exact = h2(q1 * (1 - p)) - q1 * h2(p)
    assert exact >= cap - 2e-3  # the optimised law is near the capacity-achieving one (flat optimum)
    assert abs(r.rate - exact) < 4 * r.stderr  # the final forward-recursion estimate is unbiased at that law


def test_markov_optimised_rate_beats_iid_inputs_with_memory():
    hits = np.array([[[2.0, 1.6]]])
    r, law = markov_rate(hits, [0.1], SYM, n_symbols=4000, n_iter=8, n_runs=8, seed=1)
    assert law.shape == (2, 2) and np.allclose(law.sum(axis=1), 1.0)
    best_iid = max((information_rate(hits, [0.1], SYM, [1 - p, p], n_symbols=4000, n_runs=8, seed=2)
                    for p in (0.3, 0.4, 0.5)), key=lambda x: x.rate)
    assert r.rate >= best_iid.rate - 3 * np.hypot(r.stderr, best_iid.stderr)


def test_budget_is_met():
    hits = np.array([[[2.0, 1.6]]])
    budget = 0.2
    r, law = markov_rate(hits, [0.1], SYM, n_symbols=4000, n_iter=4, n_runs=8, seed=3, budget=budget)
    pi = _stationary_power(law)
    assert float(pi @ (law @ SYM[:, 0])) <= budget + 1e-9  # mean molecules per symbol
    assert "budget" in r.message


def test_memoryless_markov_law_follows_blahut_arimoto_iterates():
    # order 0 the generalised update is the Blahut-Arimoto update p <- p exp(D(W_x || pW)) / Z (Vontobel et al.
    # 2008, Sec. on memoryless channels); plain Blahut-Arimoto on exact scipy.stats.poisson sums (Arimoto 1972 /
    # Blahut 1972) from the same uniform start and the same number of iterations gives the same law, up to the
    # simulation noise of the estimated T
    mu = np.array([0.5, 2.5, 6.0])
    ys = np.arange(60)
    logw = poisson.logpmf(ys[None, :], mu[:, None])

    def info(p):
        ly = logsumexp(logw + np.log(p)[:, None], axis=0)
        return np.sum(np.exp(logw) * (logw - ly[None, :]), axis=1)

    p = np.full(3, 1 / 3)
    for _ in range(8):
        p = p * np.exp(info(p))
        p /= p.sum()
    r, law = markov_rate(np.array([[[1.0]]]), [0.5], np.array([[0.0], [2.0], [5.5]]), n_symbols=4000,
                         n_iter=8, n_runs=8, seed=4)
    assert np.allclose(law[0], p, atol=0.01)
    at_law = float(law[0] @ info(law[0])) / np.log(2)
    assert at_law == pytest.approx(float(p @ info(p)) / np.log(2), abs=1e-3)
    assert abs(r.rate - at_law) < 4 * r.stderr


def test_state_space_limits():
    with pytest.raises(InputError, match="states"):
        markov_rate(np.ones((1, 1, 10)) * 0.1, [0.1], SYM, max_states=64)
    with pytest.raises(InputError, match="order"):
        markov_rate(np.ones((1, 1, 3)) * 0.1, [0.1], SYM, order=1)
    with pytest.raises(InputError, match="budget"):
        markov_rate(np.ones((1, 1, 2)) * 0.1, [0.1], np.array([[1.0], [2.0]]), budget=0.5)


# -- outside optimum: scipy.optimize over first-order Markov laws with the exact rate of a memory-1 channel -------
# Channel: binary release {0, 1} molecule-equivalents, one emitter and one receiver, y_k ~ Poisson(b + h0 x_k +
# h1 x_(k-1)). Low signal level with strong ISI (h0 = h1), where a Markov source that clusters its releases beats
# every i.i.d. law by ~0.035 bits (~20 %): at low signal levels the gain of an input spectrum matched to 1 + D.
HITS01 = (0.5, 0.5)
BG01 = 0.2
Y_TOP = 12  # outputs 0..10 and one lumped output ">= 11": a degraded channel, lumped mass < 2e-8 per branch


def _lumped_poisson(mean):
    """Poisson(mean) on 0..Y_TOP-2 plus the lumped tail (scipy.stats), shape (Y_TOP,)."""
    return np.concatenate([poisson.pmf(np.arange(Y_TOP - 1), mean), [poisson.sf(Y_TOP - 2, mean)]])


def _emissions():
    """W[x_prev, x_now, y] of the memory-1 channel above."""
    return np.array([[_lumped_poisson(BG01 + HITS01[0] * c + HITS01[1] * a) for c in (0, 1)] for a in (0, 1)])


def _law(q01, q11):
    return np.array([[1.0 - q01, q01], [1.0 - q11, q11]])


def _stationary2(q):
    return np.array([q[1, 0], q[0, 1]]) / (q[0, 1] + q[1, 0])


def _block_entropy(q, w, n, start):
    """H(Y^n) in nats by enumerating every output block through the forward recursion (plain numpy)."""
    alpha = start[None, :]  # joint P(y^k, x_k) over all prefixes y^k
    trans = q[:, :, None] * w  # (x_prev, x_now, y)
    for _ in range(n):
        alpha = np.einsum("pa,acy->pyc", alpha, trans).reshape(-1, 2)
    pk = alpha.sum(axis=1)
    return -float(xlogy(pk, pk).sum())


def _exact_rate(q, n=5):
    """Bracket (bits) on the information rate of the first-order Markov source q on the memory-1 channel.

    Entropy rate of the hidden Markov output: H(Y_n | Y^(n-1), X_0) <= H(Y) <= H(Y_n | Y^(n-1)) (Cover & Thomas,
    Elements of Information Theory, Thm 4.5.1; both monotone in n); H(Y | X) per symbol is the stationary average
    of the branch entropies. Returns (lower, upper), whose width at n = 5 is ~1e-4 bits here.
    """
    w = _emissions()
    pi = _stationary2(q)
    eye = np.eye(2)
    upper = _block_entropy(q, w, n, pi) - _block_entropy(q, w, n - 1, pi)
    lower = sum(pi[s] * (_block_entropy(q, w, n, eye[s]) - _block_entropy(q, w, n - 1, eye[s])) for s in (0, 1))
    h_cond = -float(((pi[:, None] * q)[:, :, None] * xlogy(w, w)).sum())
    return (lower - h_cond) / np.log(2.0), (upper - h_cond) / np.log(2.0)


def _scipy_optimum(budget=None, n=4):
    """Best i.i.d. and best first-order Markov rates (bits) by scipy.optimize on the exact rate (midpoint of the
    bracket), with mean molecules per symbol pi_1 <= budget if given."""
    mid = lambda q: 0.5 * sum(_exact_rate(q, n))  # noqa: E731
    top = 1 - 1e-3 if budget is None else budget
    iid = optimize.minimize_scalar(lambda p: -mid(_law(p, p)), bounds=(1e-3, top), method="bounded",
                                   options={"xatol": 1e-6})
    cons = [] if budget is None else [{"type": "ineq", "fun": lambda v: budget - v[0] / (v[0] + 1.0 - v[1])}]
    mk = optimize.minimize(lambda v: -mid(_law(*v)), [0.2, 0.6], method="SLSQP", constraints=cons,
                           bounds=[(1e-3, 1 - 1e-3)] * 2, options={"ftol": 1e-10})
    assert mk.success, mk.message
    return -iid.fun, -mk.fun, _law(*mk.x)


@pytest.mark.parametrize("budget, min_gain", [(None, 0.03), (0.25, 0.015)])
def test_markov_rate_reaches_the_scipy_optimum_of_the_exact_rate(budget, min_gain):
    # outside reference: scipy.optimize (SLSQP, bounded scalar search) on the exact rate of a first-order Markov
    # source, computed above by block enumeration with the Cover & Thomas bracket (Thm 4.5.1); Markov-optimised
    # sources: Kavčić, GLOBECOM 2001; Vontobel, Kavčić, Arnold, Loeliger, IEEE Trans. IT 54(5), 2008
    iid_best, markov_best, q_best = _scipy_optimum(budget)
    assert markov_best - iid_best > min_gain  # the case discriminates: memory in the source pays here
    if budget is not None:
        assert _stationary2(q_best)[1] <= budget + 1e-6
    r, law = markov_rate(np.array([[HITS01]]), [BG01], SYM, n_symbols=4000, n_iter=20, n_runs=8, seed=1,
                         budget=budget)
    assert law.shape == (2, 2) and np.allclose(law.sum(axis=1), 1.0)
    lo, hi = _exact_rate(law, n=5)
    assert hi - lo < 5e-4
    # the returned law is (near-)optimal: its exact rate is within 1e-3 bits of scipy's optimum (20 iterations
    # of 4000 simulated symbols; the optimum is flat, so this leaves ~0.1 % of the rate)
    assert lo >= markov_best - 1e-3
    assert lo > iid_best + min_gain - 1e-3  # clearly above every i.i.d. law: no stall at the i.i.d. optimum
    # the reported rate is an unbiased estimate at the returned law, and so lies within a few SE of the optimum
    assert abs(r.rate - 0.5 * (lo + hi)) < 4 * r.stderr
    assert r.rate > iid_best + 3 * r.stderr
    if budget is not None:
        # the budget is met (stationary law by power iteration, independent of the library's solver) and the
        # law is not degenerate: both symbols are used and the budget is (nearly) exhausted, as at the optimum
        mean = float(_stationary_power(law) @ (law @ SYM[:, 0]))
        assert mean <= budget + 1e-9
        assert mean > budget - 0.01
        assert np.all(law > 0.01)
        assert "budget" in r.message
