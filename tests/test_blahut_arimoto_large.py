"""Blahut–Arimoto on large input alphabets (the working-set path, S > ACTIVE_SET_ABOVE).

Outside references: channels built so that their capacity is that of a small channel whose value is known
independently (the references sheet's [computed] values; scipy.optimize on the reduced channel), using
two facts that hold for any channel:
* duplicating a row does not change the capacity (the copies share the mass);
* a row that is a convex mixture of other rows does not change it either: D(. || q) is convex in its first
  argument, so at the optimal output law q* the mixture's divergence is at most the largest one (KKT,
  Gallager, Information Theory and Reliable Communication, Thm 4.5.1). With a cost, a mixture whose cost is
  at least the mixed cost is dominated in the same way (Blahut 1972, cost form).
The certificate max_x D(W_x || q) - I is also recomputed here, in NumPy, over every input.
"""

import numpy as np
import pytest
from scipy import optimize

from capacity.information.blahut_arimoto import ACTIVE_SET_ABOVE, blahut_arimoto

W3 = np.array([[0.7, 0.2, 0.1], [0.1, 0.6, 0.3], [0.2, 0.1, 0.7]])
C3 = 0.3797121025230244  # references sheet [computed], three independent routes
P3 = np.array([0.383929337908307, 0.302687198451834, 0.313383463639859])  # its optimal law (same source)


def info_bits(p, w):
    """Mutual information in bits, written out here (independent of the package)."""
    q = p @ w
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(w > 0, w * np.log2(w / q[None, :]), 0.0)
    return float(p @ t.sum(axis=1))


def gap_over_all_inputs(p, w):
    """max_x D(W_x || pW) - I(p) in bits over EVERY row (Blahut 1972, Thm 2), recomputed in NumPy."""
    q = p @ w
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(w > 0, w * np.log2(w / q[None, :]), 0.0).sum(axis=1)
    return float(d.max() - p @ d)


def _hidden_w3(n_rows, seed):
    """n_rows rows: copies of the rows of W3 and random convex mixtures of them, shuffled."""
    rng = np.random.default_rng(seed)
    kind = rng.integers(0, 4, n_rows)  # 0..2: a copy of that row, 3: a mixture
    kind[:3] = [0, 1, 2]  # every original row at least once
    mix = rng.dirichlet(np.ones(3), size=n_rows)
    rows = np.where((kind < 3)[:, None], W3[np.minimum(kind, 2)], mix @ W3)
    order = rng.permutation(n_rows)
    return rows[order], kind[order]


def test_duplicates_and_mixtures_of_a_known_channel_keep_its_capacity():
    w, kind = _hidden_w3(4096, seed=3)
    assert w.shape[0] > ACTIVE_SET_ABOVE
    res = blahut_arimoto(w, tol=1e-10)
    assert res.converged, res.message
    # certificate against the sheet's value: capacity <= C3 <= capacity + gap
    assert res.capacity <= C3 + 1e-12
    assert C3 <= res.capacity + res.gap + 1e-12
    p = res.input_distribution
    # the mass of each original row, summed over its copies, is the reduced channel's optimal law (unique
    # here: W3 has full rank); mixtures (strictly inside the hull) get none
    merged = np.array([p[kind == k].sum() for k in range(3)])
    np.testing.assert_allclose(merged, P3, atol=1e-4)
    assert p[kind == 3].sum() < 1e-6
    assert gap_over_all_inputs(p, w) <= 1e-10 + 1e-12


def _binary_capacity_scipy(a, b):
    """Capacity (bits) of the 2x2 channel [[a, 1-a], [b, 1-b]], by scipy's bounded scalar search."""
    w = np.array([[a, 1 - a], [b, 1 - b]])
    best = optimize.minimize_scalar(lambda t: -info_bits(np.array([t, 1 - t]), w), bounds=(0, 1),
                                    method="bounded", options={"xatol": 1e-12})
    return -best.fun


def test_4096_by_2_equals_its_two_extreme_rows():
    # with two outputs every row lies between the rows with the smallest and largest W(0|x): the channel's
    # capacity is that of those two rows (mixtures are dominated), computed by scipy.optimize
    rng = np.random.default_rng(11)
    a = rng.uniform(0.05, 0.95, 4096)
    w = np.stack([a, 1 - a], axis=1)
    ref = _binary_capacity_scipy(a.max(), a.min())
    res = blahut_arimoto(w)  # default tol 1e-9 bits
    assert res.converged, res.message
    assert res.capacity <= ref + 1e-12 and ref <= res.capacity + res.gap + 1e-12
    assert res.gap <= 1e-9
    assert gap_over_all_inputs(res.input_distribution, w) <= 1e-9 + 1e-12
    used = np.flatnonzero(res.input_distribution > 1e-9)
    assert set(used) <= {int(np.argmax(a)), int(np.argmin(a))}


def test_20000_by_3_matches_scipy_on_the_hull_and_certifies_every_input():
    # random rows on the 3-output simplex: only rows on the convex hull can carry mass; scipy SLSQP maximises
    # I over the hull's vertices (an independent optimiser on the reduced channel)
    from scipy.spatial import ConvexHull

    rng = np.random.default_rng(5)
    w = rng.dirichlet(np.ones(3), size=20_000)
    hull = ConvexHull(w[:, :2]).vertices  # the simplex is 2-D: (W0, W1) determine the row
    v = w[hull]

    def neg(x):
        return -info_bits(x, v)

    cons = ({"type": "eq", "fun": lambda x: x.sum() - 1.0},)
    sq = optimize.minimize(neg, np.full(len(v), 1.0 / len(v)), method="SLSQP", bounds=[(0, 1)] * len(v),
                           constraints=cons, options={"ftol": 1e-15, "maxiter": 1000})
    ref_lower = -sq.fun  # a feasible law's information: a lower bound on the capacity
    res = blahut_arimoto(w)
    assert res.converged, res.message
    assert ref_lower <= res.capacity + res.gap + 1e-12  # the certificate is not contradicted
    assert res.capacity >= ref_lower - 1e-9  # and the package finds at least as good a law
    assert gap_over_all_inputs(res.input_distribution, w) <= 1e-9 + 1e-12
    assert res.input_distribution[np.setdiff1d(np.arange(len(w)), hull)].sum() < 1e-6


def test_budget_on_a_large_alphabet_of_dominated_bsc_rows():
    # BSC(0.11), cost (0, 1), P(X=1) <= 0.2: h2(0.266) - h2(0.11) = 0.3357501890673245 bits (references sheet);
    # copies of the two rows keep their costs, mixtures cost at least the mixed cost: the value is unchanged
    rng = np.random.default_rng(2)
    bsc = np.array([[0.89, 0.11], [0.11, 0.89]])
    n = 600
    lam = rng.uniform(0, 1, n)
    lam[:200] = 1.0
    lam[200:400] = 0.0
    w = lam[:, None] * bsc[0] + (1 - lam)[:, None] * bsc[1]
    cost = (1 - lam) + rng.uniform(0, 0.5, n) * (lam % 1 > 0)  # copies exact, mixtures dearer
    res = blahut_arimoto(w, cost=cost, budget=0.2, tol=1e-10)
    assert res.converged, res.message
    ref = 0.3357501890673245
    assert res.capacity <= ref + 1e-12 and ref <= res.capacity + res.gap + 1e-12
    assert res.mean_cost == pytest.approx(0.2, abs=1e-9)


def test_peak_limited_poisson_on_4096_levels_needs_several_working_sets(monkeypatch):
    # references sheet [computed]: peak 10, background 1: 1.05723480 bits with 3 mass points (Shamai 1990).
    # 4096 equally spaced levels 0..10: the grid can only lose capacity, by a second-order amount in the
    # distance of the true mass points to the grid (<= step/2 = 1.2e-3): measured 2.6e-9 bits here.
    from capacity.channel.transition import poisson_transition
    from capacity.information import _active_set

    rounds = []
    solve = _active_set.kernel.solve
    monkeypatch.setattr(_active_set.kernel, "solve", lambda *a, **k: rounds.append(1) or solve(*a, **k))
    levels = np.linspace(0.0, 10.0, 4096)
    t = poisson_transition((levels + 1.0)[:, None], tol=1e-12)
    res = blahut_arimoto(t, tol=1e-10)
    assert res.converged, res.message
    digits = 5e-9  # the sheet gives 8 significant digits
    assert res.capacity <= 1.05723480 + digits
    assert res.capacity >= 1.05723480 - 1e-8 - digits
    assert gap_over_all_inputs(res.input_distribution, t.matrix) <= 1e-10 + 1e-11  # + truncated mass share
    support = levels[res.input_distribution > 1e-6]
    assert support[0] == 0.0 and support[-1] == 10.0 and len(support) in (3, 4)  # a point may split in two
    assert len(rounds) > 1  # the first working set did not hold the support: the KKT check over all inputs grew it
