"""Differentiable design objectives: values against independent scipy computations, gradients against central
finite differences, and the geometry each tunable moves.

Small layout of our own: one point emitter, one absorbing sphere of radius 5 um with a 5 um gap, D = 1e-10 m^2/s,
background 0.5 counts per slot, Ts = 0.2 s.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy import optimize, special, stats

from capacity import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.design.objectives import Fixed, Objective, _surrogate, channel_means, design_arrays
from capacity.design.optimise import build_problem
from capacity.design.params import base_physical, constrain, geometry, layout, make_space, unconstrain
from capacity.errors import InputError

R, GAP, D, B0, TS = 5e-6, 5e-6, 1e-10, 0.5, 0.2


def scenario(memory=0, residual="drop", levels=2, peak=100.0, budget=None):
    return Scenario("one-link", Medium(D), (Emitter("e", (0.0, 0.0, 0.0)),),
                    (Receiver("r", (R + GAP, 0.0, 0.0), R),),
                    Channel(TS, memory=memory, background=(B0,), residual=residual, response="lone"),
                    Signalling(levels=levels, peak=peak, budget=budget))


def yilmaz_cdf(t, gap=GAP, radius=R):
    """F(t) = r/(r+d) erfc(d / sqrt(4 D t)) (Yilmaz et al., IEEE Commun. Lett. 18(6), 2014), via scipy."""
    return radius / (radius + gap) * special.erfc(gap / np.sqrt(4.0 * D * t))


def mi_bits(law, means_by_symbol, weights=None):
    """I(X;Y) in bits by direct summation with scipy.stats.poisson pmfs (mixtures over pasts if given)."""
    y = np.arange(0, 400)
    rows = []
    for m in means_by_symbol:  # m: array of means over pasts
        m = np.atleast_1d(m)
        w = np.full(m.size, 1.0 / m.size) if weights is None else weights
        rows.append(np.sum(w[:, None] * stats.poisson.pmf(y[None, :], m[:, None]), axis=0))
    W = np.array(rows)
    q = law @ W
    terms = np.where(W > 0, W * (np.log(np.maximum(W, 1e-300)) - np.log(np.maximum(q, 1e-300))), 0.0)
    return float(law @ terms.sum(axis=1) / np.log(2.0))


def fd_check(obj, u, rtol):
    ev = obj.evaluate(u, grad=True)
    for name, x in u.items():
        x = np.asarray(x, dtype=float)
        for idx in np.ndindex(x.shape):
            h = 1e-5
            up, dn = x.copy(), x.copy()
            up[idx] += h
            dn[idx] -= h
            fd = (obj.evaluate({**u, name: jnp.asarray(up)}).value
                  - obj.evaluate({**u, name: jnp.asarray(dn)}).value) / (2 * h)
            # central differences, error O(h^2) (common practice)
            assert np.asarray(ev.grad[name])[idx] == pytest.approx(fd, rel=rtol, abs=rtol * abs(ev.value)), name
    return ev


@pytest.fixture(scope="module")
def memoryless():
    """Envelope rate on the memoryless channel (memory 0, tail dropped) with a binding molecule budget."""
    problem = build_problem(scenario(levels=3, budget=20.0), ("symbol_interval", "gap", "levels"),
                            "bits-per-second")
    return problem, Objective(problem)


def test_envelope_value_matches_constrained_capacity_by_scipy(memoryless):
    problem, obj = memoryless
    u = unconstrain(problem.space, {"symbol_interval": TS, "gap": GAP, "levels": np.array([25.0, 90.0])})
    ev = obj.evaluate(u)
    p0 = yilmaz_cdf(TS)
    levels = np.array([0.0, 25.0, 90.0])
    means = B0 + levels * p0
    cons = {"type": "ineq", "fun": lambda q: 20.0 - q @ levels}
    res = optimize.minimize(lambda q: -mi_bits(np.abs(q) / np.abs(q).sum(), means), np.full(3, 1 / 3),
                            constraints=[cons, {"type": "eq", "fun": lambda q: q.sum() - 1}], method="SLSQP",
                            options={"ftol": 1e-14, "maxiter": 500})
    # capacity under a mean-cost constraint by direct constrained maximisation (scipy SLSQP)
    assert ev.bits == pytest.approx(-res.fun, rel=1e-6)
    assert ev.value == pytest.approx(ev.bits / TS, rel=1e-12)
    assert ev.molecules == pytest.approx(20.0, rel=1e-5)  # the budget binds
    assert ev.slope > 0


def test_envelope_gradient_matches_finite_differences_of_capacity(memoryless):
    # Envelope theorem with the cost multiplier: dC/dθ = ∂/∂θ [I - s (Σ p b - B)] at (p*, s*) (standard
    # constrained sensitivity, Boyd & Vandenberghe §5.6); checked against central differences of the capacity
    # itself, Blahut-Arimoto re-solved at every point.
    problem, obj = memoryless
    u = unconstrain(problem.space, {"symbol_interval": 0.15, "gap": 4e-6, "levels": np.array([30.0, 80.0])})
    fd_check(obj, u, rtol=1e-4)


def test_isi_as_noise_value_and_gradient():
    problem = build_problem(scenario(memory=3, residual="interference", levels=2, peak=60.0),
                            ("symbol_interval", "gap", "levels"), "bits-per-molecule", rate="isi-as-noise")
    assert problem.lags == 3
    obj = Objective(problem)
    u = unconstrain(problem.space, {"symbol_interval": TS, "gap": GAP, "levels": np.array([50.0])})
    ev = fd_check(obj, u, rtol=1e-6)
    # brute force: ISI-as-noise bound I(X_k; Y_k) with uniform i.i.d. OOK input, the three past symbols
    # enumerated (8 equally likely pasts) and the tail beyond lag 3 as mean interference (Shamai, Ozarow & Wyner
    # 1991 symbol-by-symbol bound); hits from the Yilmaz closed form via scipy.special.erfc.
    edges = yilmaz_cdf(np.arange(1, 5) * TS)
    hits = np.diff(np.concatenate([[0.0], edges]))
    tail = R / (R + GAP) - edges[-1]
    a = 50.0
    pasts = np.array(np.meshgrid(*[[0.0, a]] * 3, indexing="ij")).reshape(3, -1).T
    base = B0 + 0.5 * a * tail + pasts @ hits[1:]
    law = np.array([0.5, 0.5])
    expected = mi_bits(law, [base, base + a * hits[0]])
    assert ev.bits == pytest.approx(expected, rel=1e-9)
    assert ev.value == pytest.approx(expected / (0.5 * a), rel=1e-9)


@pytest.mark.slow
def test_envelope_with_mean_interference_gradient_at_fixed_law():
    # With ISI as mean interference the law enters the channel; the gradient is exact with the law frozen.
    problem = build_problem(scenario(memory=3, residual="interference"), ("symbol_interval", "gap"),
                            "bits-per-second", rate="mean-isi")
    obj = Objective(problem)
    u = unconstrain(problem.space, base_physical(problem.space))
    ev = obj.evaluate(u, grad=True)
    lo = np.zeros(1)
    sizes = obj._sizes
    fixed = Fixed(jnp.asarray(ev.law), jnp.asarray(ev.slope), jnp.asarray(lo))

    frozen_jit = jax.jit(lambda v: _surrogate(problem, sizes, design_arrays(problem, v), fixed)[0])

    def frozen(v):
        return float(frozen_jit(v))

    for name in u:
        h = 1e-5
        fd = (frozen({**u, name: u[name] + h}) - frozen({**u, name: u[name] - h})) / (2 * h)
        assert ev.grad[name] == pytest.approx(fd, rel=1e-6)  # central differences (common practice)
    means, _ = channel_means(problem, *design_arrays(problem, u)[:3], jnp.asarray(ev.law))
    assert np.asarray(means).shape == (2, 1, 1)


def test_geometry_of_each_tunable():
    sc = Scenario("two", Medium(D), (Emitter("a", (0.0, 0.0, 0.0)), Emitter("b", (0.0, 30e-6, 0.0))),
                  (Receiver("r0", (10e-6, 0.0, 0.0), 5e-6), Receiver("r1", (12e-6, 30e-6, 0.0), 4e-6)),
                  Channel(TS, memory=2), Signalling(scheme="multiplex", levels=2, peak=50.0))
    sym = np.array([[0, 0], [0, 50], [50, 0], [50, 50]], dtype=float)
    space = make_space(sc, sym, ("gap", "spacing", "radius", "split", "levels", "symbol_interval"))
    base = base_physical(space)
    assert float(base["gap"]) == pytest.approx(5e-6)  # smallest given gap: r0, 10 - 5 um (by hand)
    # round trip through the reparametrisation
    back = constrain(space, unconstrain(space, base))
    for k in base:  # a level on the peak is nudged inside by 1e-3 of the range (documented)
        expected = 0.999 * 50.0 if k == "levels" else base[k]
        np.testing.assert_allclose(np.asarray(back[k]), np.asarray(expected), rtol=1e-9)
    # gap +2 um: both receivers move 2 um further along their emitter lines (by hand)
    lay = layout(space, {**base, "gap": jnp.asarray(7e-6)}, sym)
    np.testing.assert_allclose(np.asarray(lay.centres), [[12e-6, 0, 0], [14e-6, 30e-6, 0]], atol=1e-15)
    # radius x2 keeps each surface gap (5 um and 8 um)
    g = geometry(space, {**base, "radius": jnp.asarray(2.0)})
    np.testing.assert_allclose(g["radii"], [10e-6, 8e-6])
    np.testing.assert_allclose(g["gaps"], [5e-6, 8e-6], rtol=1e-12)
    # spacing 2: receiver separation doubles about the centroid
    g = geometry(space, {**base, "spacing": jnp.asarray(2.0)})
    assert g["receiver_distance"] == pytest.approx(2 * np.hypot(2e-6, 30e-6))
    # split: multiplex columns scaled by E w_e; levels rebuild every symbol
    lay = layout(space, {**base, "split": jnp.array([0.25, 0.75]), "levels": jnp.array([40.0])}, sym)
    np.testing.assert_allclose(np.asarray(lay.symbols), [[0, 0], [0, 60], [20, 0], [20, 60]])
    # softplus floors: any u keeps the gap and the receiver spacing above the minimum
    low = constrain(space, {**unconstrain(space, base), "gap": jnp.asarray(-50.0), "spacing": jnp.asarray(-50.0)})
    assert float(low["gap"]) >= space.min_gap
    assert float(low["spacing"]) > 0


def test_bad_tunables_are_refused():
    sc = scenario()
    sym = np.array([[0.0], [100.0]])
    with pytest.raises(InputError, match="not a tunable"):
        make_space(sc, sym, ("colour",))
    with pytest.raises(InputError, match="two receivers"):
        make_space(sc, sym, ("spacing",))
    with pytest.raises(InputError, match="two emitters"):
        make_space(sc, sym, ("split",))
    with pytest.raises(InputError, match="lo < hi"):
        make_space(sc, sym, ("symbol_interval",), bounds={"symbol_interval": (1.0, 0.5)})
