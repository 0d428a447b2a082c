"""i.i.d. input law optimised for the rate with ISI (capacity/information/iid_law.py) and the rates built on it.

Outside references: scipy.optimize over the simplex (one free probability) of the EXACT i.i.d. rate of a memory-1
binary Poisson channel, bracketed by an exact forward recursion over all output sequences (Cover & Thomas,
Elements of Information Theory, Thm 4.5.1; helper in tests/test_window.py); the best rate can never fall when the
budget grows (unused molecules cost nothing: common practice, design notes).
"""

import numpy as np
import pytest
from scipy import optimize
from test_window import _iid_bracket

import capacity  # noqa: F401
from capacity.errors import InputError
from capacity.information.iid_law import optimise_iid_law, tilt_to_budget

# memory 1, most of a release arrives one slot late: the release-slot optimum is far from the ISI optimum
HITS = np.array([[[0.02, 0.06]]])
BASE = np.array([0.3])
SYM = np.array([[0.0], [40.0]])
COST = np.array([0.0, 40.0])


def exact_rate(q):
    lo, up, mass = _iid_bracket(HITS, BASE, SYM, np.array([1 - q, q]), 4)
    assert mass > 1 - 1e-9 and up - lo < 2e-3
    return 0.5 * (lo + up)


@pytest.mark.parametrize("budget", [None, 8.0])
def test_optimised_law_reaches_the_scipy_optimum_of_the_exact_rate(budget):
    q_max = 1.0 if budget is None else budget / 40.0
    res = optimize.minimize_scalar(lambda q: -exact_rate(q), bounds=(0.01, q_max), method="bounded",
                                   options={"xatol": 1e-3})
    best = -res.fun
    start = np.array([0.95, 0.05])  # a poor start (0.16 bits): the ascent must travel to the optimum
    law = optimise_iid_law(HITS, BASE, SYM, COST, budget, start, n_samples=2048, iterations=20, seed=5)
    assert law.law.sum() == pytest.approx(1.0)
    if budget is not None:
        assert law.mean_cost <= budget + 1e-9
    got = exact_rate(law.law[1])
    assert law.law[1] > 0.01  # not the all-silent law
    assert got >= best - 0.01  # within 0.01 bits of scipy's optimum of the exact rate
    assert got <= best + 2e-3  # and not above it (the bracket is tight)


def test_tilt_meets_the_budget_and_refuses_an_impossible_one():
    p = tilt_to_budget(np.array([0.2, 0.3, 0.5]), np.array([0.0, 10.0, 20.0]), 5.0)
    assert p @ np.array([0.0, 10.0, 20.0]) == pytest.approx(5.0, rel=1e-9)
    # an exponential tilt keeps the ordering of the log-ratios (the form of a cost-constrained optimum)
    assert p[0] > 0.2
    with pytest.raises(InputError, match="budget"):
        tilt_to_budget(np.array([0.5, 0.5]), np.array([3.0, 10.0]), 1.0)
