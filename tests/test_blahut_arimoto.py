"""Blahut–Arimoto capacity, cost-constrained capacity and the certificate.

Outside references named beside each check: closed forms (Cover & Thomas; references sheet), the
references sheet's [computed] values, scipy.optimize over the simplex, and the `dit` library.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy import optimize

from capacity.channel.transition import poisson_log_transition, poisson_transition
from capacity.errors import InputError
from capacity.information.blahut_arimoto import blahut_arimoto, capacity_cost_curve, mutual_information
from capacity.information.result import CapacityResult

ROUND = 1e-12  # float64 rounding allowance on the certificate checks


def h2(x):
    return -x * np.log2(x) - (1 - x) * np.log2(1 - x)


def z_capacity(p):
    """Z-channel, P(Y=0|X=1) = p (references sheet): log2(1 + (1 - p) p^(p/(1-p)))."""
    return np.log2(1 + (1 - p) * p ** (p / (1 - p)))


def certified(res: CapacityResult, true: float):
    """The certificate: capacity <= true <= capacity + gap."""
    assert res.capacity <= true + ROUND
    assert true <= res.capacity + res.gap + ROUND


def info_bits(p, w):
    """Mutual information, numpy, written out (the test's own, independent of the package)."""
    q = p @ w
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(w > 0, w * np.log2(w / q[None, :]), 0.0)
    return float(p @ t.sum(axis=1))


W3 = np.array([[0.7, 0.2, 0.1], [0.1, 0.6, 0.3], [0.2, 0.1, 0.7]])


@pytest.mark.parametrize(
    "w, true, source",
    [
        (np.array([[0.89, 0.11], [0.11, 0.89]]), 1 - h2(0.11), "BSC: 1 - h2(p), Cover & Thomas 7.1.4"),
        (np.array([[0.7, 0.3, 0.0], [0.0, 0.3, 0.7]]), 0.7, "BEC: 1 - eps, Cover & Thomas 7.1.5"),
        (np.array([[1.0, 0.0], [0.5, 0.5]]), z_capacity(0.5), "Z channel closed form, references sheet"),
        (np.array([[1.0, 0.0], [0.1, 0.9]]), z_capacity(0.1), "Z channel closed form, references sheet"),
        (W3, 0.3797121025230244, "references sheet [computed], three routes"),
    ],
)
def test_closed_forms_and_certificate(w, true, source):
    res = blahut_arimoto(w, tol=1e-10)
    assert res.converged, res.message
    assert res.gap <= 1e-10
    certified(res, true)
    assert res.input_distribution.sum() == pytest.approx(1.0)
    assert "gap" in res.message


def test_reference_values_match_their_closed_forms():
    # references sheet values recomputed here from the formulas
    assert 1 - h2(0.11) == pytest.approx(0.500084041835472, abs=1e-14)
    assert z_capacity(0.5) == pytest.approx(0.321928094887362, abs=1e-14)
    assert z_capacity(0.1) == pytest.approx(0.762848252010510, abs=1e-14)


def test_three_by_three_against_scipy_optimize():
    # scipy.optimize: maximise I over the simplex (softmax parametrisation), computed in the test
    def neg(z):
        p = np.exp(z - z.max())
        return -info_bits(p / p.sum(), W3)

    best = optimize.minimize(neg, np.zeros(3), method="Nelder-Mead",
                             options={"xatol": 1e-12, "fatol": 1e-15, "maxiter": 20000})
    p_opt = np.exp(best.x - best.x.max())
    p_opt /= p_opt.sum()
    res = blahut_arimoto(W3, tol=1e-11)
    assert res.capacity == pytest.approx(-best.fun, abs=1e-11)
    certified(res, -best.fun)
    # references sheet p* = (0.383929337908307, 0.302687198451834, 0.313383463639859)
    assert res.input_distribution == pytest.approx([0.383929337908307, 0.302687198451834, 0.313383463639859],
                                                   abs=1e-6)
    assert res.input_distribution == pytest.approx(p_opt, abs=1e-4)


def test_useless_middle_input_gets_zero_probability():
    # references sheet: W = [[1,0],[.5,.5],[0,1]] -> 1 bit with p* = (1/2, 0, 1/2)
    res = blahut_arimoto(np.array([[1.0, 0.0], [0.5, 0.5], [0.0, 1.0]]))
    certified(res, 1.0)
    assert res.input_distribution == pytest.approx([0.5, 0.0, 0.5], abs=1e-9)


def test_bsc_with_cost_budget():
    # references sheet: BSC(0.11), cost (0, 1), P(X=1) <= 0.2 -> h2(0.266) - h2(0.11)
    w = np.array([[0.89, 0.11], [0.11, 0.89]])
    true = h2(0.2 * 0.89 + 0.8 * 0.11) - h2(0.11)
    assert true == pytest.approx(0.3357501890673245, abs=1e-14)
    res = blahut_arimoto(w, cost=[0.0, 1.0], budget=0.2)
    assert res.converged, res.message
    certified(res, true)
    assert res.mean_cost == pytest.approx(0.2, abs=1e-12)
    assert res.slope > 0
    # slope = dC/dP: central difference of the closed form (Blahut 1972: s is the curve's slope)
    c = lambda P: h2(P * 0.89 + (1 - P) * 0.11) - h2(0.11)  # noqa: E731
    assert res.slope == pytest.approx((c(0.2 + 1e-6) - c(0.2 - 1e-6)) / 2e-6, rel=1e-6)
    # budget above the unconstrained optimum's cost (1/2): slope 0, unconstrained capacity
    loose = blahut_arimoto(w, cost=[0.0, 1.0], budget=0.7)
    assert loose.slope == 0.0
    certified(loose, 1 - h2(0.11))


def test_budget_errors_and_edges():
    w = np.array([[0.89, 0.11], [0.11, 0.89]])
    with pytest.raises(InputError, match="budget"):
        blahut_arimoto(w, cost=[1.0, 2.0], budget=0.5)
    with pytest.raises(InputError, match="cost"):
        blahut_arimoto(w, budget=0.5)
    with pytest.raises(InputError, match="row sums"):
        blahut_arimoto(np.array([[0.9, 0.3], [0.5, 0.5]]))
    at_min = blahut_arimoto(w, cost=[0.0, 1.0], budget=0.0)  # only the free symbol: 0 bits
    assert at_min.capacity == pytest.approx(0.0, abs=1e-15)


def test_capacity_cost_curve_concave_nondecreasing_and_matches_single_calls():
    levels = np.array([0.0, 1.0, 2.0, 4.0, 8.0])
    t = poisson_transition((0.3 + 0.5 * levels)[:, None])
    budgets = np.array([6.0, 0.25, 0.5, 1.0, 2.0, 3.0, 4.0])
    curve = capacity_cost_curve(t, levels, budgets)
    order = np.argsort(budgets)
    c = np.array([curve[k].capacity for k in order])
    b = budgets[order]
    assert all(r.converged for r in curve), [r.message for r in curve]
    assert np.all(np.diff(c) >= -1e-9)  # nondecreasing (common practice: C(P) is nondecreasing)
    chords = np.diff(c) / np.diff(b)
    assert np.all(np.diff(chords) <= 1e-8)  # concave (Blahut 1972; Cover & Thomas)
    for k in [1, 3, 6]:
        single = blahut_arimoto(t, cost=levels, budget=budgets[k])
        assert single.capacity == pytest.approx(curve[k].capacity, abs=1e-9)
        # each point's certificate brackets the other's value
        assert single.capacity <= curve[k].capacity + curve[k].gap + ROUND
        assert curve[k].mean_cost <= budgets[k] * (1 + 1e-12)


def test_against_dit_on_a_random_channel():
    # dit (a general-purpose information-theory library): dit.algorithms.channel_capacity, plain BA in bits
    dit = pytest.importorskip("dit")
    rng = np.random.default_rng(11)
    w = rng.dirichlet(np.ones(6), size=4)
    their, their_p = dit.algorithms.channel_capacity(w, rtol=0.0, atol=1e-14)
    res = blahut_arimoto(w, tol=1e-11)
    assert res.capacity == pytest.approx(their, abs=1e-9)
    assert their <= res.capacity + res.gap + ROUND  # dit's value is an achievable rate
    assert info_bits(np.asarray(their_p), w) == pytest.approx(their, abs=1e-12)


@pytest.mark.parametrize("lam, ref", [(0.5, 0.241285447972758), (2.0, 0.706874140164037)])
def test_on_off_poisson_is_a_z_channel(lam, ref):
    # references sheet: {0, lam} into Poisson without background = Z channel with p = exp(-lam)
    true = z_capacity(np.exp(-lam))
    assert true == pytest.approx(ref, abs=1e-14)
    t = poisson_transition(np.array([[0.0], [lam]]), tol=1e-12)
    res = blahut_arimoto(t, tol=1e-11)
    certified(res, true)
    assert res.capacity == pytest.approx(true, abs=1e-11)


def _refined_peak_capacity(peak, background):
    """BA on an amplitude grid 0..peak, then on a fine grid (step peak/8000) around the mass points found."""
    coarse = np.linspace(0.0, peak, 41)
    res = blahut_arimoto(poisson_transition((coarse + background)[:, None], tol=1e-12), tol=1e-10)
    support = coarse[res.input_distribution > 1e-6]
    fine = [np.clip(x + np.linspace(-peak / 80, peak / 80, 21), 0, peak) for x in support]
    grid = np.unique(np.concatenate(fine + [np.array([0.0, peak])]))
    return blahut_arimoto(poisson_transition((grid + background)[:, None], tol=1e-12), tol=1e-10), grid


@pytest.mark.parametrize(
    "peak, background, ref",
    [(5.0, 0.0, 1.0252723),
     pytest.param(10.0, 0.0, 1.3212870, marks=pytest.mark.slow),
     pytest.param(5.0, 1.0, 0.73977391, marks=pytest.mark.slow),
     (10.0, 1.0, 1.05723480)],
)
def test_peak_limited_poisson_capacity(peak, background, ref):
    # references sheet [computed] (Shamai 1990 discrete optimum; Cao, Hranilovic, Chen 2014)
    res, grid = _refined_peak_capacity(peak, background)
    assert res.converged, res.message
    digits = 5e-8  # the sheet gives 8 significant digits
    # a grid can only lose capacity (the grid law is a feasible input): lower bound up to the sheet's rounding
    assert res.capacity <= ref + digits
    # the mass points sit within half a fine step of the true ones: the loss is second order (< 1e-7 here)
    assert res.capacity >= ref - 1e-7 - digits
    assert res.input_distribution[0] > 0 and res.input_distribution[-1] > 0  # 0 and the peak are used


def test_mutual_information_equals_capacity_at_optimum_and_envelope_gradient():
    means = np.array([[0.2], [2.0], [6.0]])
    t = poisson_transition(means, tol=1e-13)
    res = blahut_arimoto(t, tol=1e-12)
    i_opt = float(mutual_information(res.input_distribution, t.log_matrix))
    assert i_opt == pytest.approx(res.capacity, abs=1e-10)
    assert info_bits(res.input_distribution, t.matrix) == pytest.approx(i_opt, abs=1e-9)

    outputs = jnp.asarray(t.outputs)
    p_star = jnp.asarray(res.input_distribution)

    def capacity_of(scale):
        return blahut_arimoto(poisson_transition(means * scale, tol=1e-13), tol=1e-12).capacity

    g = jax.jit(jax.grad(lambda a: mutual_information(p_star, poisson_log_transition(jnp.asarray(means) * a,
                                                                                      outputs))))
    # envelope theorem: dC/da = dI(p*, W(a))/da; compared with a central difference of C itself
    fd = (capacity_of(1 + 1e-4) - capacity_of(1 - 1e-4)) / 2e-4
    assert float(g(1.0)) == pytest.approx(fd, rel=1e-4)
    g_means = jax.jit(jax.grad(lambda m: mutual_information(p_star, poisson_log_transition(m, outputs))))
    assert np.all(np.isfinite(np.asarray(g_means(jnp.array([[0.0], [2.0], [6.0]])))))


def test_slope_argument_gives_a_point_of_the_curve():
    w = np.array([[0.89, 0.11], [0.11, 0.89]])
    ref = blahut_arimoto(w, cost=[0.0, 1.0], budget=0.2)
    pt = blahut_arimoto(w, cost=[0.0, 1.0], slope=ref.slope)
    assert pt.mean_cost == pytest.approx(0.2, abs=1e-6)
    assert pt.capacity == pytest.approx(ref.capacity, abs=1e-8)


def _poisson_rows(means, y_top=60):
    """W(y|x) of Poisson counts on 0..y_top-1 from scipy.stats (row mass lost < 1e-30 for the means used)."""
    from scipy.stats import poisson

    return poisson.pmf(np.arange(y_top)[None, :], np.asarray(means)[:, None])


def _slsqp_capacity(w, cost, budget):
    """max_p I(p; W) over the simplex with sum_x p_x b_x <= budget by scipy.optimize SLSQP (several starts), the
    mutual information written out in numpy (``info_bits`` above). Returns (value in bits, law)."""
    n = w.shape[0]
    cons = [{"type": "eq", "fun": lambda p: p.sum() - 1.0, "jac": lambda p: np.ones(n)},
            {"type": "ineq", "fun": lambda p: budget - p @ cost, "jac": lambda p: -cost}]
    best = None
    cheap = np.eye(n)[np.argmin(cost)]
    for start in (np.full(n, 1.0 / n), np.eye(n)[-1], np.linspace(1.0, 2.0, n)[::-1]):
        x0 = start / start.sum()
        if x0 @ cost > budget:  # a feasible start: mix with the cheapest symbol
            x0 = cheap + (x0 - cheap) * (budget - cheap @ cost) / (x0 @ cost - cheap @ cost)
        res = optimize.minimize(lambda p: -info_bits(np.clip(p, 0, None), w), x0, method="SLSQP",
                                bounds=[(0.0, 1.0)] * n, constraints=cons,
                                options={"ftol": 1e-14, "maxiter": 1000})
        if best is None or res.fun < best.fun:
            best = res
    return -best.fun, np.clip(best.x, 0, None)


def test_capacity_cost_curve_points_match_scipy_slsqp_single_budget_optimisation():
    # outside reference: each point of C(P) is a separate concave maximisation of I(p; W) over the simplex with a
    # mean-cost constraint (Blahut 1972, the capacity-cost function), solved here by scipy.optimize SLSQP on the
    # test's own numpy mutual information with the Poisson pmf of scipy.stats. The curve must match SLSQP to
    # 1e-7 bits (SLSQP's own accuracy on this smooth problem) and bracket it by its certificate.
    levels = np.array([0.0, 3.0, 6.0, 12.0])
    means = 0.4 + 0.35 * levels
    w = _poisson_rows(means)
    t = poisson_transition(means[:, None], tol=1e-14)
    budgets = np.array([0.3, 1.0, 2.5, 4.0])
    curve = capacity_cost_curve(t, levels, budgets, tol=1e-10)
    for k, budget in enumerate(budgets):
        value, law = _slsqp_capacity(w, levels, budget)
        assert law @ levels <= budget + 1e-9
        res = curve[k]
        assert res.converged, res.message
        assert res.capacity == pytest.approx(value, abs=1e-7)
        assert value <= res.capacity + res.gap + 1e-9  # the certificate brackets the outside optimum
        assert res.mean_cost == pytest.approx(budget, rel=1e-9)  # binding budgets: unconstrained cost is higher
        # the reported law achieves the reported value (numpy mutual information, independent of the package)
        assert info_bits(np.asarray(res.input_distribution), w) == pytest.approx(res.capacity, abs=1e-9)
