"""Capacity per unit cost (Verdú, IEEE Trans. IT 36(5), 1990) — closed form, matrix route and C(P)/P limit."""

import math

import numpy as np
import pytest
from scipy import stats

from capacity.channel.transition import poisson_transition
from capacity.errors import InputError
from capacity.information.blahut_arimoto import blahut_arimoto, capacity_cost_curve
from capacity.information.unit_cost import capacity_per_unit_cost, poisson_unit_cost


def d_formula(p, lam0, n):
    """D(Poi(lam0 + pN) || Poi(lam0)) / N in bits per molecule, written from a ln(a/b) - a + b
    (references sheet, closed-form oracles)."""
    a, b = lam0 + p * n, lam0
    return (a * math.log(a / b) - a + b) / n / math.log(2)


@pytest.mark.parametrize(
    "p, lam0, n_max, ref",
    [(0.1, 1.0, 100.0, 0.236267973961206), (0.05, 2.0, 200.0, 0.0829629979988),
     (0.2, 1.0, 20.0, 0.291943015544)],
)
def test_poisson_unit_cost_closed_form(p, lam0, n_max, ref):
    # references sheet [computed] values, recomputed here from the divergence formula
    assert d_formula(p, lam0, n_max) == pytest.approx(ref, rel=1e-11)
    assert poisson_unit_cost(p, lam0, n_max) == pytest.approx(d_formula(p, lam0, n_max), rel=1e-13)
    # D(N)/N increases with N, so the peak is the supremum (Verdú 1990 applied to the Poisson law)
    ns = np.linspace(1, n_max, 50)
    assert np.all(np.diff([d_formula(p, lam0, n) for n in ns]) > 0)


def test_matrix_route_matches_closed_form_on_amplitude_alphabet():
    p, lam0, n_max = 0.1, 1.0, 100.0
    levels = np.array([0.0, 25.0, 50.0, 100.0])
    t = poisson_transition((lam0 + p * levels)[:, None], tol=1e-14)
    value, best = capacity_per_unit_cost(t, levels)
    assert best == 3  # the peak
    # the grid drops < 1e-14 of each row, so D on the grid matches the closed form to ~1e-12
    assert value == pytest.approx(d_formula(p, lam0, n_max), rel=1e-10)
    # scipy.stats route to the same divergence: sum over counts of pmf * log(pmf / pmf0)
    y = np.arange(0, 200)
    la, lb = stats.poisson.logpmf(y, lam0 + p * n_max), stats.poisson.logpmf(y, lam0)
    assert value == pytest.approx(np.sum(np.exp(la) * (la - lb)) / np.log(2) / n_max, rel=1e-10)


def test_limit_of_capacity_cost_ratio_from_blahut_arimoto():
    # Verdú (1990) Thm 2: C(P)/P -> sup_x D/b as P -> 0 (inputs {0, N}), approached from below. The gap is
    # about P(x=N) chi2(W_N || W_0) / 2 relative to D, with chi2 = exp((pN)^2 / lam0) - 1 for Poisson laws;
    # for the sheet's (0.1, 1, 100) chi2 = e^100, far too slow to test, so a case with chi2 = e^2 - 1 is used.
    p, lam0, n_max = 0.1, 2.0, 20.0
    t = poisson_transition(np.array([[lam0], [lam0 + p * n_max]]), tol=1e-14)
    target = d_formula(p, lam0, n_max)
    ratios = []
    for budget in [0.2, 0.02, 0.002]:
        res = blahut_arimoto(t, cost=[0.0, n_max], budget=budget, tol=1e-13)
        assert res.converged, res.message
        ratios.append(res.capacity / budget)
    assert np.all(np.diff(ratios) > 0) and ratios[-1] < target
    assert ratios[-1] == pytest.approx(target, rel=1e-3)
    assert capacity_per_unit_cost(t, [0.0, n_max])[0] == pytest.approx(target, rel=1e-12)


def test_infinite_and_undefined_cases_raise():
    with pytest.raises(InputError, match="infinite"):
        poisson_unit_cost(0.1, 0.0, 100.0)
    with pytest.raises(InputError, match="peak"):
        poisson_unit_cost(0.1, 1.0, math.inf)
    t = poisson_transition(np.array([[0.0], [2.0]]))
    with pytest.raises(InputError, match="infinite"):
        capacity_per_unit_cost(t, [0.0, 10.0])
    with pytest.raises(InputError, match="costs 0"):
        capacity_per_unit_cost(np.array([[0.5, 0.5], [0.1, 0.9]]), [1.0, 2.0])
    with pytest.raises(InputError, match="unbounded"):
        capacity_per_unit_cost(np.array([[0.5, 0.5], [0.1, 0.9], [0.2, 0.8]]), [0.0, 0.0, 3.0])


def test_binary_channel_unit_cost_by_hand():
    # D(W_1 || W_0) for W_0 = (0.9, 0.1), W_1 = (0.3, 0.7), cost 2: written out (definition of KL divergence)
    w = np.array([[0.9, 0.1], [0.3, 0.7]])
    want = (0.3 * math.log2(0.3 / 0.9) + 0.7 * math.log2(0.7 / 0.1)) / 2.0
    value, best = capacity_per_unit_cost(w, [0.0, 2.0])
    assert best == 1 and value == pytest.approx(want, rel=1e-14)


def test_capacity_cost_curve_slope_at_zero_is_the_capacity_per_unit_cost():
    # Verdú (1990), Thm 2: with a free input, C'(0+) = lim_{P->0} C(P)/P = sup_x D(W_x || W_0)/b(x). The sup is
    # computed here from the closed-form Poisson divergence (d_formula: D/N increases with N, so it is at the
    # peak). C(P) is concave with C(0) = 0, so the curve's slope s(P) = C'(P) obeys s(P) <= C(P)/P <= C'(0)
    # (elementary concavity); as P -> 0 the ratio's error is about half the slope's (C(P)/P = C'(0) + C''(0)P/2,
    # s(P) = C'(0) + C''(0)P), so the slope gets twice the ratio's tolerance. chi2(W_peak || W_0) = e^2 - 1 keeps
    # the approach fast enough (see the test above).
    p, lam0 = 0.1, 2.0
    levels = np.array([0.0, 5.0, 10.0, 20.0])
    t = poisson_transition((lam0 + p * levels)[:, None], tol=1e-14)
    target = d_formula(p, lam0, levels[-1])
    assert max(d_formula(p, lam0, n) for n in levels[1:]) == target
    budgets = np.array([0.2, 0.02, 0.002])
    curve = capacity_cost_curve(t, levels, budgets, tol=1e-13)
    ratios = np.array([r.capacity / b for r, b in zip(curve, budgets, strict=True)])
    slopes = np.array([r.slope for r in curve])
    assert all(r.converged for r in curve), [r.message for r in curve]
    assert np.all(slopes <= ratios * (1 + 1e-9)) and np.all(ratios <= target * (1 + 1e-12))
    assert np.all(np.diff(ratios) > 0) and np.all(np.diff(slopes) > 0)  # both rise towards C'(0) as P falls
    assert ratios[-1] == pytest.approx(target, rel=1e-3)
    assert slopes[-1] == pytest.approx(target, rel=2e-3)
    # first order in P: the errors fall tenfold per decade, the slope's twice the ratio's
    err_ratio, err_slope = target - ratios, target - slopes
    assert err_ratio[-1] / err_ratio[-2] == pytest.approx(0.1, rel=0.05)
    assert err_slope[-1] / err_ratio[-1] == pytest.approx(2.0, rel=0.05)
    assert capacity_per_unit_cost(t, levels) == (pytest.approx(target, rel=1e-12), 3)
