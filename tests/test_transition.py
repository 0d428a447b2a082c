"""Memoryless transition laws: Poisson grid, exact multinomial law, their distance.

Outside references named beside each check: scipy.stats (Poisson/binomial pmfs, entropy), the
references sheet (Z-channel reduction, Poisson entropy values), Le Cam's inequality, independent Monte Carlo.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy import stats

from capacity.channel.transition import (
    Transition,
    binomial_transition,
    law_distance,
    output_grid,
    poisson_log_transition,
    poisson_transition,
    symbol_means,
)
from capacity.errors import InputError
from capacity.information.blahut_arimoto import blahut_arimoto


def test_symbol_means_matches_the_definition():
    rng = np.random.default_rng(1)
    hits = rng.uniform(0, 0.1, size=(2, 3, 4))
    background = np.array([0.5, 1.0, 2.0])
    symbols = np.array([[0.0, 0.0], [100.0, 0.0], [0.0, 50.0], [30.0, 70.0]])
    interference = np.array([0.1, 0.2, 0.3])
    got = np.asarray(symbol_means(hits, background, symbols, interference=interference))
    # definition written out with loops (design notes: b_j + sum_i x_i p[i, j, 0] + interference_j)
    for s in range(4):
        for j in range(3):
            want = background[j] + interference[j] + sum(symbols[s, i] * hits[i, j, 0] for i in range(2))
            assert got[s, j] == pytest.approx(want, rel=1e-14)
    # differentiable: d mean[s, j] / d hits[i, j, 0] = symbols[s, i] (linear map)
    grad = jax.grad(lambda h: symbol_means(h, background, symbols)[3, 1])(jnp.asarray(hits))
    assert np.asarray(grad)[:, 1, 0] == pytest.approx(symbols[3])


def test_symbol_means_rejects_wrong_shapes():
    with pytest.raises(InputError, match="symbols"):
        symbol_means(np.zeros((2, 1, 3)), np.zeros(1), np.zeros((4, 3)))


def test_output_grid_holds_all_but_tol_and_is_minimal():
    means = np.array([[0.0, 3.0], [7.5, 0.2], [2.0, 12.0]])
    tol = 1e-8
    out = output_grid(means, tol=tol)
    ymax = out.max(axis=0)
    assert out.shape == ((ymax[0] + 1) * (ymax[1] + 1), 2)
    # scipy.stats.poisson: every receiver's tail beyond y_max is below tol/R for every symbol
    assert np.all(stats.poisson.sf(ymax[None, :], means) <= tol / 2)
    # ... and y_max - 1 would not do for at least one symbol (minimal)
    assert np.all(np.any(stats.poisson.sf(ymax[None, :] - 1, means) > tol / 2, axis=0))


def test_output_grid_too_large_names_the_fix():
    with pytest.raises(InputError, match="Monte Carlo"):
        output_grid(np.full((2, 3), 1e4), max_outputs=1000)


def test_poisson_log_transition_matches_scipy_and_handles_zero_means():
    means = np.array([[0.0, 2.5], [4.0, 0.0], [1.3, 7.1]])
    outputs = output_grid(means, tol=1e-12)
    got = np.asarray(poisson_log_transition(means, outputs))
    # scipy.stats.poisson.logpmf, independent receivers
    want = stats.poisson.logpmf(outputs[None, :, 0], means[:, None, 0]) + stats.poisson.logpmf(
        outputs[None, :, 1], means[:, None, 1])
    finite = np.isfinite(want)
    assert np.array_equal(finite, np.isfinite(got))
    assert np.allclose(got[finite], want[finite], rtol=1e-12, atol=1e-12)


def test_poisson_log_transition_gradients_finite_and_match_finite_differences():
    outputs = jnp.asarray(output_grid(np.array([[6.0, 6.0]]), tol=1e-12))
    weights = jnp.asarray(np.random.default_rng(2).uniform(size=outputs.shape[0]))

    def f(means):
        return jnp.sum(weights * jnp.exp(poisson_log_transition(means, outputs)))

    grad_f = jax.jit(jax.grad(f))
    f = jax.jit(f)
    m0 = jnp.array([[0.0, 2.0], [3.0, 0.5]])
    g = np.asarray(grad_f(m0))
    assert np.all(np.isfinite(g))
    m1 = jnp.array([[1.5, 2.0], [3.0, 0.5]])
    g1 = np.asarray(grad_f(m1))
    h = 1e-6  # central differences (common practice)
    for idx in [(0, 0), (1, 1)]:
        e = np.zeros((2, 2))
        e[idx] = h
        fd = (f(m1 + e) - f(m1 - e)) / (2 * h)
        assert g1[idx] == pytest.approx(float(fd), rel=1e-6)


def test_poisson_transition_reports_truncation_and_entropy_matches_scipy():
    lams = np.array([1.0, 10.0])
    t = poisson_transition(lams[:, None], tol=1e-12)
    assert isinstance(t, Transition) and t.law == "poisson"
    # row sums plus reported tail = 1
    assert np.allclose(t.matrix.sum(axis=1) + t.truncated_mass, 1.0, atol=1e-14)
    assert np.all(t.truncated_mass <= 1e-12)
    # scipy.stats.poisson(lam).entropy(); references sheet: 1.30484224225625 and 2.56140993527491 nats
    ent = -np.sum(np.where(t.matrix > 0, t.matrix * t.log_matrix, 0.0), axis=1)
    assert ent == pytest.approx([stats.poisson(1.0).entropy(), stats.poisson(10.0).entropy()], abs=1e-10)
    assert ent == pytest.approx([1.30484224225625, 2.56140993527491], abs=1e-10)


def _z_capacity(p):
    """Z-channel capacity, bits (references sheet): log2(1 + (1 - p) p^(p / (1 - p)))."""
    return np.log2(1 + (1 - p) * p ** (p / (1 - p)))


def test_binomial_binary_on_off_is_a_z_channel():
    n, p = 10, 0.1
    t = binomial_transition(np.array([[0], [n]]), np.array([[p]]), np.zeros(1), tol=1e-14)
    assert t.law == "binomial"
    res = blahut_arimoto(t, tol=1e-11)
    # references sheet: Binomial N=10, p=0.1, {0, N} = Z(0.9^10) = 0.454746444603235 bits
    want = _z_capacity(0.9**10)
    assert want == pytest.approx(0.454746444603235, abs=1e-13)
    assert res.capacity <= want + 1e-12 <= res.capacity + res.gap + 2e-12
    assert res.capacity == pytest.approx(want, abs=1e-10)


def test_multinomial_marginals_and_negative_covariance():
    n, pa, pb = 20, 0.3, 0.2
    t = binomial_transition(np.array([[n]]), np.array([[pa, pb]]), np.zeros(2), tol=1e-14)
    w, out = t.matrix[0], t.outputs
    # scipy.stats.binom: each receiver alone counts Binomial(N, p_j)
    for j, pj in enumerate([pa, pb]):
        marg = np.bincount(out[:, j], weights=w, minlength=n + 1)[: n + 1]
        assert marg == pytest.approx(stats.binom.pmf(np.arange(n + 1), n, pj), abs=1e-14)
    mean = w @ out
    cov = w @ (out[:, 0] * out[:, 1]) - mean[0] * mean[1]
    # multinomial covariance -N p_a p_b (references sheet, counting)
    assert cov == pytest.approx(-n * pa * pb, rel=1e-10)


def test_binomial_law_with_background_against_monte_carlo():
    symbols = np.array([[0, 0], [40, 0], [25, 30]])
    probs = np.array([[0.15, 0.05], [0.04, 0.2]])
    bg = np.array([0.7, 1.2])
    t = binomial_transition(symbols, probs, bg, tol=1e-12)
    assert np.allclose(t.matrix.sum(axis=1) + t.truncated_mass, 1.0, atol=1e-12)
    rng = np.random.default_rng(7)  # independent Monte Carlo of the physical description
    n_mc = 200_000
    index = {tuple(o): k for k, o in enumerate(t.outputs)}
    for s in range(3):
        counts = rng.poisson(bg, size=(n_mc, 2))
        for i in range(2):
            pvals = np.array([probs[i, 0], probs[i, 1], 1 - probs[i].sum()])
            counts += rng.multinomial(symbols[s, i], pvals, size=n_mc)[:, :2]
        freq = np.zeros(len(t.outputs))
        for c, k in zip(*np.unique(counts, axis=0, return_counts=True), strict=True):
            freq[index[tuple(c)]] += k / n_mc
        tv = 0.5 * np.abs(freq - t.matrix[s]).sum()
        assert tv < 0.02  # sampling noise of a 2e5-sample histogram over ~100 cells is ~0.01


def test_poisson_vs_binomial_distance_obeys_le_cam():
    n, p = 200, 0.02
    symbols = np.array([[0], [n]])
    exact = binomial_transition(symbols, np.array([[p]]), np.array([0.5]), tol=1e-13)
    approx = poisson_transition(np.array([[0.5], [0.5 + n * p]]), tol=1e-13)
    d = law_distance(exact, approx)
    # Le Cam (1960): TV(Binomial(N, p), Poisson(Np)) <= N p^2 (adding the same background cannot increase it)
    assert d["tv_per_symbol"][0] == pytest.approx(0.0, abs=1e-12)
    assert 0 < d["max_tv"] <= n * p**2
    assert abs(d["capacity_difference_bits"]) < 0.05
    assert d["capacity_a"] == pytest.approx(d["capacity_b"] + d["capacity_difference_bits"])


def test_binomial_transition_rejects_bad_input():
    with pytest.raises(InputError, match="whole molecule"):
        binomial_transition(np.array([[1.5]]), np.array([[0.1]]), np.zeros(1))
    with pytest.raises(InputError, match="row sums"):
        binomial_transition(np.array([[1]]), np.array([[0.7, 0.6]]), np.zeros(2))
