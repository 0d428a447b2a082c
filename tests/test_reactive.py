"""Partially absorbing (reactive) receivers: closed form, particles, scenario keys and bad input."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import jax
import mpmath as mp
import numpy as np
import pytest
from test_flow import _load  # the scenario-text loader shared with the flow tests

from capacity.errors import InputError
from capacity.physics.lone import absorbing_cdf
from capacity.physics.particles import simulate_hits
from capacity.physics.reactive import (
    reactive_cdf,
    reactive_density,
    reactive_hits,
    reactive_survival,
    reactive_total,
)

A, GAP, D = 5e-6, 5e-6, 79.4e-12  # reference-sheet base case (radius, gap to the surface, diffusion)


def _transform(a, d, dcoef, k, kappa):
    """Laplace transform of the reaction-time density, written here from the Robin problem (independent of the
    code): the exterior solution a/r exp(-(r-a) q), q = sqrt((s+k)/D), with D u'(a) = kappa (u(a) - 1)."""
    a, d, dcoef, k, kappa = (mp.mpf(x) for x in (a, d, dcoef, k, kappa))

    def f(s):
        q = mp.sqrt((s + k) / dcoef)
        return a / (a + d) * kappa * a / (kappa * a + dcoef * (1 + a * q)) * mp.exp(-d * q)

    return f


@pytest.mark.parametrize("k", [0.0, 1.0, 10.0])
@pytest.mark.parametrize("kappa", [1e-6, 2e-5, 1e-3])
def test_cdf_and_survival_against_laplace_inversion(k, kappa):
    # outside reference: mpmath's Talbot inversion (30 digits) of the Laplace-domain solution
    mp.mp.dps = 30
    f = _transform(A, GAP, D, k, kappa)
    f0 = f(0)
    for t in (0.003, 0.05, 0.5, 5.0):
        cdf = mp.invertlaplace(lambda s: f(s) / s, t, method="talbot")
        late = mp.invertlaplace(lambda s: (f0 - f(s)) / s, t, method="talbot")
        assert float(reactive_cdf(t, A, GAP, D, k, kappa)) == pytest.approx(float(cdf), rel=1e-8)
        assert float(reactive_survival(t, A, GAP, D, k, kappa)) == pytest.approx(float(late), rel=1e-8)
    assert float(reactive_total(A, GAP, D, k, kappa)) == pytest.approx(float(f0), rel=1e-12)


def test_tiny_late_survival_against_quadrature_of_the_density():
    # k t = 100: the part still to come is ~1e-49; reference: mpmath quadrature of the density (whose own form is
    # checked against Talbot inversion just below) from t to infinity
    mp.mp.dps = 30
    k, kappa, t = 1.0, 1e-6, 100.0
    a, d, dcoef = (mp.mpf(x) for x in (A, GAP, D))
    amp = a / (a + d) * kappa / mp.sqrt(dcoef)
    beta = (dcoef + kappa * a) / (a * mp.sqrt(dcoef))

    def density(x):
        xi, eta = d / mp.sqrt(4 * dcoef * x), beta * mp.sqrt(x)
        return amp * mp.exp(-k * x) * (mp.exp(-xi**2) / mp.sqrt(mp.pi * x)
                                       - beta * mp.exp(2 * xi * eta + eta**2) * mp.erfc(xi + eta))

    f = _transform(A, GAP, D, k, kappa)
    assert float(density(mp.mpf(1))) == pytest.approx(float(mp.invertlaplace(f, 1, method="talbot")), rel=1e-12)
    assert float(reactive_density(1.0, A, GAP, D, k, kappa)) == pytest.approx(float(density(mp.mpf(1))), rel=1e-12)
    late = mp.quad(density, [t, 2 * t, 10 * t, mp.inf])
    assert float(reactive_survival(t, A, GAP, D, k, kappa)) == pytest.approx(float(late), rel=1e-8)


def test_density_is_the_derivative_of_the_cdf():
    # jax.grad of the closed-form CDF against the density form (two different expressions)
    grad = jax.grad(lambda t: reactive_cdf(t, A, GAP, D, 0.5, 3e-5))
    for t in (0.01, 0.2, 3.0):
        assert float(grad(t)) == pytest.approx(float(reactive_density(t, A, GAP, D, 0.5, 3e-5)), rel=1e-9)


@pytest.mark.parametrize("k", [0.0, 2.0])
def test_fast_reaction_gives_the_absorbing_sphere(k):
    # kappa -> infinity: the absorbing sphere (Yilmaz et al. 2014; Heren et al. 2015 with degradation); the
    # relative gap closes like 1/kappa at every time (first order in D / (kappa x length))
    t = np.array([0.01, 0.1, 1.0, 10.0])
    absorbing = np.asarray(absorbing_cdf(t, A, GAP, D, k))
    scaled = []
    for kappa in (1e-1, 1e1, 1e3, 1e5):
        gap = np.asarray(reactive_cdf(t, A, GAP, D, k, kappa)) / absorbing - 1.0
        assert np.all(gap < 0.0)  # a reactive sphere never takes more than the absorbing one
        scaled.append(gap * kappa)
    np.testing.assert_allclose(scaled[1:], [scaled[1]] * 3, rtol=1e-3)
    assert np.max(np.abs(scaled[-1])) / 1e5 < 1e-8


def test_slots_add_up_to_the_eventual_reaction():
    em = np.array([[0.0, 0.0, 0.0], [0.0, 30e-6, 0.0]])
    ce = np.array([[10e-6, 0.0, 0.0]])
    hits, tail = reactive_hits(em, ce, np.array([A]), np.array([2e-5]), D, 0.3, 0.05, 40)
    total = np.asarray(hits).sum(-1) + np.asarray(tail)
    for i, x in enumerate(em):
        gap = np.linalg.norm(x - ce[0]) - A
        assert total[i, 0] == pytest.approx(float(reactive_total(A, gap, D, 0.3, 2e-5)), rel=1e-12)
        edges = 0.05 * np.arange(42)
        cdf = np.asarray(reactive_cdf(edges, A, gap, D, 0.3, 2e-5))
        np.testing.assert_allclose(np.asarray(hits)[i, 0], np.diff(cdf), rtol=1e-9, atol=1e-15)


def test_particles_match_the_closed_form():
    # outside reference for the kernel's reactive step (Skorokhod reflection + Robin killing): the closed form
    em, ce, ts, lags = np.array([[0.0, 0.0, 0.0]]), np.array([[10e-6, 0.0, 0.0]]), 0.1, 5
    kappa = 2e-5
    hits, tail, se = simulate_hits(em, ce, np.array([A]), np.array([False]), np.zeros(1), D, 0.0, ts, lags,
                                   particles=40000, seed=3, reaction_rates=[kappa])
    ref, ref_tail = (np.asarray(x) for x in reactive_hits(em, ce, np.array([A]), np.array([kappa]), D, 0.0, ts,
                                                         lags))
    total_se = np.sqrt(hits.sum() * (1 - hits.sum()) / 40000)
    assert abs(hits.sum() - ref.sum()) < 4 * total_se
    assert np.all(np.abs(hits - ref) < 4 * se + 1e-4)
    assert abs(hits.sum() + tail.sum() - ref.sum() - ref_tail.sum()) < 0.1 * (ref.sum() + ref_tail.sum())


@pytest.mark.slow
@pytest.mark.parametrize("kappa,k", [(2e-6, 0.0), (2e-5, 1.0), (2e-4, 0.0)])
def test_particles_match_the_closed_form_large(kappa, k):
    em, ce, ts, lags = np.array([[0.0, 0.0, 0.0]]), np.array([[12e-6, 0.0, 0.0]]), 0.1, 10
    n = 400000
    hits, _, se = simulate_hits(em, ce, np.array([A]), np.array([False]), np.zeros(1), D, k, ts, lags,
                                particles=n, seed=11, reaction_rates=[kappa])
    ref, _ = (np.asarray(x) for x in reactive_hits(em, ce, np.array([A]), np.array([kappa]), D, k, ts, lags))
    assert abs(hits.sum() - ref.sum()) < 4 * np.sqrt(ref.sum() * (1 - ref.sum()) / n)
    assert np.all(np.abs(hits - ref) < 4 * se + 2e-5)


# ----------------------------------------------------------------------------------------------- scenario keys
def _scenario(extra_receiver: str) -> str:
    return textwrap.dedent(
        """
        name = "reactive bead"
        [medium]
        diffusion = "79.4 um^2/s"
        [[emitter]]
        name = "A"
        position = [0, 0, 0]
        [[receiver]]
        name = "bead"
        centre = ["10 um", 0, 0]
        radius = "5 um"
        """
    ) + extra_receiver + textwrap.dedent(
        """
        [channel]
        symbol_interval = "100 ms"
        memory = 5
        response = "lone"
        """
    )


def test_reactive_scenario_goes_through_the_response_layer():
    from capacity.physics.response import channel_response

    sc = _load(_scenario('kind = "reactive"\nreaction_rate = "20 um/s"\n'))
    assert sc.receivers[0].reaction_rate == pytest.approx(2e-5)
    resp = channel_response(sc, "lone")
    ref, ref_tail = reactive_hits(sc.emitter_positions, sc.receiver_centres, sc.receiver_radii,
                                  np.array([2e-5]), D, 0.0, 0.1, 5)
    np.testing.assert_allclose(resp.hits, np.asarray(ref), rtol=1e-12)
    shadowed = channel_response(sc, "shadowed")  # one receiver: the lone form is exact, with a note
    np.testing.assert_allclose(shadowed.hits, resp.hits, rtol=1e-12)
    assert any("exact" in n for n in shadowed.notes)


@pytest.mark.parametrize("line,match", [
    ('kind = "reactive"\nreaction_rate = "-5 um/s"\n', "must not be negative"),
    ('kind = "reactive"\nreaction_rate = 0\n', "counts nothing"),
    ('kind = "reactive"\n', "is missing"),
    ('reaction_rate = "5 um/s"\n', "only used by reactive receivers"),
    ('kind = "reactive"\nreaction_rate = "5 um"\n', "velocity"),
])
def test_bad_reaction_rates_are_named_errors(line, match):
    with pytest.raises(InputError, match=match) as err:
        _load(_scenario(line))
    assert "reaction_rate" in str(err.value)


def test_cli_negative_reaction_rate_exits_2(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(_scenario('kind = "reactive"\nreaction_rate = "-5 um/s"\n'))
    proc = subprocess.run([sys.executable, "-m", "capacity.cli", "check", str(path)], capture_output=True,
                          text=True, timeout=120)
    assert proc.returncode == 2
    assert "reaction_rate" in proc.stderr and "Traceback" not in proc.stderr


def test_erfcx_is_safe_where_jax_returns_zero():
    # jax.scipy.special.erfcx (jax 0.10.2, float64) returns exactly 0 on [26.5433, 26.6417]; the closed forms use
    # the guarded erfcx of capacity.physics._special (scipy as the outside reference), and a slot whose xi + eta
    # falls in that band stays equal to the mpmath inversion
    from scipy.special import erfcx

    from capacity.physics._special import erfcx as _erfcx

    x = np.concatenate([np.linspace(0.0, 40.0, 40001), np.geomspace(40.0, 1e8, 200)])
    np.testing.assert_allclose(np.asarray(_erfcx(x)), erfcx(x), rtol=1e-14)
    # D = 1e-10, a = 4 um, kappa = 60 um/s: beta = 8.5 1/sqrt(s), so xi + eta = 26.57 .. 26.62 at t = 9.58 .. 9.62 s
    mp.mp.dps = 30
    a, d, dcoef, k, kappa = 4e-6, 16e-6, 1e-10, 0.5, 6e-5
    f = _transform(a, d, dcoef, k, kappa)
    f0 = f(0)
    for t in (9.58, 9.60, 9.62):
        late = mp.invertlaplace(lambda s: (f0 - f(s)) / s, t, method="talbot")
        assert float(reactive_survival(t, a, d, dcoef, k, kappa)) == pytest.approx(float(late), rel=1e-8)
