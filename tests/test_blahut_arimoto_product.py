"""Blahut–Arimoto on per-receiver factors (independent Poisson counts, W = prod_j A_j) instead of the (S, Y) matrix.

Outside references:
* parallel independent channels: the capacity of the product channel W1(y1|a) W2(y2|b) with inputs (a, b) is
  C1 + C2 (Cover & Thomas, Elements of Information Theory, 2nd ed., chapter 7 exercises on parallel channels;
  textbook fact, exercise number not quoted); with an additive cost b(a) + b(b) the same argument gives
  C(P) = max over P1 + P2 = P of C1(P1) + C2(P2) (common practice);
* a plain Blahut–Arimoto written here on the dense matrix (Arimoto 1972; Blahut 1972);
* the dense route of the package itself (``factors=None``), itself checked against closed forms elsewhere.
"""

import math

import numpy as np
import pytest

from capacity.channel.transition import poisson_transition, symbol_means
from capacity.errors import InputError
from capacity.information.blahut_arimoto import blahut_arimoto

ROUND = 1e-12


def _plain_ba(w, tol_bits=1e-11):
    """Textbook iteration on a dense matrix whose rows sum to 1, stopped on its certificate."""
    p = np.full(w.shape[0], 1.0 / w.shape[0])
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(200_000):
            q = p @ w
            d = np.where(w > 0, w * np.log(w / q[None, :]), 0.0).sum(axis=1)
            info = p @ d
            if (d.max() - info) / math.log(2) <= tol_bits:
                return info / math.log(2)
            p = p * np.exp(d - d.max())
            p /= p.sum()
    raise AssertionError("plain Blahut-Arimoto did not converge")


def _mimo(levels, cross, background=(1.0, 0.5), tol=1e-12):
    symbols = np.array([[a, b] for a in levels for b in levels], dtype=float)
    hits = np.zeros((2, 2, 1))
    hits[:, :, 0] = [[0.12, cross], [cross, 0.10]]
    t = poisson_transition(np.asarray(symbol_means(hits, np.asarray(background), symbols)), tol=tol)
    return t, symbols.sum(axis=1)


def test_poisson_transition_factors_multiply_to_the_matrix():
    t, _ = _mimo([0.0, 20.0, 60.0], 0.03)
    rows = np.stack([np.kron(t.factors[0][x], t.factors[1][x]) for x in range(t.matrix.shape[0])])
    assert rows.shape == t.matrix.shape
    np.testing.assert_allclose(rows, t.matrix, rtol=1e-12, atol=1e-300)


def test_parallel_channels_add_up():
    # no cross-talk: receiver j hears only emitter j, so W = W1(y1|a) W2(y2|b) and C = C1 + C2 (Cover & Thomas)
    levels = [0.0, 15.0, 40.0, 90.0]
    t, _ = _mimo(levels, 0.0)
    assert t.factors is not None
    both = blahut_arimoto(t, tol=1e-10)
    singles = []
    for gain, bg in [(0.12, 1.0), (0.10, 0.5)]:
        tj = poisson_transition((np.asarray(levels) * gain + bg)[:, None], tol=1e-12)
        singles.append(blahut_arimoto(tj, tol=1e-11))
        assert tj.factors is None or len(tj.factors) == 1  # one receiver: the dense route
    total = sum(r.capacity for r in singles)
    slack = sum(r.gap for r in singles) + both.gap + ROUND
    assert both.converged, both.message
    assert abs(both.capacity - total) <= slack
    # the optimal law is the product of the single-receiver laws (up to the certificate's looseness)
    p = both.input_distribution.reshape(len(levels), len(levels))
    np.testing.assert_allclose(p.sum(axis=1), singles[0].input_distribution, atol=2e-4)
    np.testing.assert_allclose(p.sum(axis=0), singles[1].input_distribution, atol=2e-4)


def test_parallel_channels_with_a_budget_split_it_optimally():
    # C(P) = max_{P1 + P2 = P} C1(P1) + C2(P2) (product channel, additive cost): a 1-D search over the split
    levels = [0.0, 15.0, 40.0, 90.0]
    t, cost = _mimo(levels, 0.0)
    budget = 45.0
    both = blahut_arimoto(t, cost=cost, budget=budget, tol=1e-10)
    assert both.converged, both.message
    assert both.mean_cost == pytest.approx(budget, rel=1e-9)
    t1 = poisson_transition((np.asarray(levels) * 0.12 + 1.0)[:, None], tol=1e-12)
    t2 = poisson_transition((np.asarray(levels) * 0.10 + 0.5)[:, None], tol=1e-12)
    lv = np.asarray(levels)

    def split(p1):
        return (blahut_arimoto(t1, cost=lv, budget=p1, tol=1e-11).capacity
                + blahut_arimoto(t2, cost=lv, budget=budget - p1, tol=1e-11).capacity)

    grid = np.linspace(5.0, 40.0, 36)
    values = [split(v) for v in grid]
    k = int(np.argmax(values))
    best = max(values)
    assert best <= both.capacity + both.gap + 1e-9  # any split is achievable on the product channel
    # the optimum split is at most a grid step away: the curve is concave, so the loss is second order
    assert both.capacity - best < 2e-3
    assert 0 < k < len(grid) - 1


@pytest.mark.parametrize("cross", [0.02, 0.06])
def test_product_route_agrees_with_plain_dense_blahut_arimoto(cross):
    t, _ = _mimo([0.0, 10.0, 30.0], cross)
    w = np.concatenate([np.asarray(t.matrix), np.asarray(t.truncated_mass)[:, None]], axis=1)
    ref = _plain_ba(w)
    res = blahut_arimoto(t, tol=1e-10)
    assert res.converged, res.message
    assert res.capacity <= ref + 1e-11 + ROUND
    assert ref <= res.capacity + res.gap + ROUND


@pytest.mark.parametrize("budget", [None, 12.0, 30.0])
def test_product_and_dense_routes_give_the_same_answer(budget):
    t, cost = _mimo([0.0, 8.0, 25.0, 70.0], 0.04)
    kw = {} if budget is None else {"cost": cost, "budget": budget}
    fast = blahut_arimoto(t, tol=1e-10, **kw)
    dense = blahut_arimoto(t._replace(factors=None), tol=1e-10, **kw)
    assert fast.converged and dense.converged
    assert abs(fast.capacity - dense.capacity) <= fast.gap + dense.gap + ROUND
    assert fast.mean_cost == pytest.approx(dense.mean_cost, rel=1e-9, abs=1e-9)
    assert "of" in fast.message  # the tail term is reported the same way


def test_three_receivers_and_odd_sizes():
    # 5 symbols (padding of the input axis), 3 receivers with different count ranges (padding of each axis)
    symbols = np.array([[0.0, 0.0], [30.0, 0.0], [0.0, 30.0], [30.0, 30.0], [12.0, 5.0]])
    hits = np.zeros((2, 3, 1))
    hits[:, :, 0] = [[0.10, 0.03, 0.01], [0.02, 0.08, 0.05]]
    t = poisson_transition(np.asarray(symbol_means(hits, np.array([0.5, 1.0, 0.0]), symbols)), tol=1e-12)
    assert len(t.factors) == 3
    fast = blahut_arimoto(t, tol=1e-10)
    w = np.concatenate([np.asarray(t.matrix), np.asarray(t.truncated_mass)[:, None]], axis=1)
    ref = _plain_ba(w)
    assert fast.converged, fast.message
    assert abs(fast.capacity - ref) <= fast.gap + 1e-11 + ROUND


def test_zero_means_and_a_useless_channel():
    # receiver 3 without background never counts anything: factor rows [1]; a channel whose symbols all give the
    # same means carries nothing (capacity 0, at once)
    same = poisson_transition(np.tile([[2.0, 3.0]], (4, 1)))
    res = blahut_arimoto(same)
    assert res.capacity == 0.0 and res.converged
    silent = poisson_transition(np.array([[0.0, 0.0], [5.0, 0.0], [0.0, 5.0]]), tol=1e-12)
    res = blahut_arimoto(silent, tol=1e-10)
    ref = _plain_ba(np.concatenate([np.asarray(silent.matrix), np.asarray(silent.truncated_mass)[:, None]], axis=1))
    assert abs(res.capacity - ref) <= res.gap + 1e-11 + ROUND


def test_budget_at_the_cheapest_cost_uses_only_the_cheapest_symbols():
    t, cost = _mimo([0.0, 10.0], 0.03)
    res = blahut_arimoto(t, cost=cost, budget=0.0)
    assert res.capacity == 0.0 and res.input_distribution[0] == pytest.approx(1.0)


def test_inconsistent_factors_are_refused_naming_the_field():
    t, _ = _mimo([0.0, 10.0], 0.03)
    bad = t._replace(factors=(t.factors[0][:, :-1], t.factors[1]))
    with pytest.raises(InputError, match="transition.factors"):
        blahut_arimoto(bad)
    negative = t._replace(factors=(-t.factors[0], t.factors[1]))
    with pytest.raises(InputError, match=r"transition.factors\[0\]"):
        blahut_arimoto(negative)
