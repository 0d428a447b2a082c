"""Optimised Markov inputs (capacity/information/markov.py).

Outside references: the Z-channel capacity log2(1 + (1-p) p^(p/(1-p))) with p = e^-lambda (references.md,
"Poisson channels"; binary on/off Poisson without background); the maxentropic (Parry) chain of a constrained
graph has entropy log2 of the Perron root, RLL(1,inf) = 0.694241914 bits (references.md); Vontobel, Kavčić,
Arnold, Loeliger, IEEE Trans. IT 54(5), 2008 (the Markov-optimised rate is at least the i.i.d. rate).
"""

import numpy as np
import pytest
from scipy.special import logsumexp
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
