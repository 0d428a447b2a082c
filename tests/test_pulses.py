"""Rectangular release pulses: closed form, quadrature, the shadowed transform and particles.

References: scipy.integrate.quad of the impulse CDF over the release window (the definition of the pulse
response); mpmath for the derivatives of G(t) = int_0^t F; the lone closed form for one sphere; the particle
simulator (each molecule released at a uniform random time; independent Monte Carlo).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import mpmath as mp
import numpy as np
import pytest
from scipy.integrate import quad

from capacity.errors import InputError
from capacity.physics import lone, pulses
from capacity.physics.particles import simulate_hits
from capacity.physics.response import channel_response
from capacity.physics.shadowed import shadowed_hits
from capacity.scenario.load import scenario_from_dict

D, R, GAP = 79.4e-12, 5e-6, 5e-6
E1, C1, R1 = np.zeros((1, 3)), np.array([[R + GAP, 0.0, 0.0]]), np.array([R])


def _quad_cdf(t, pulse, k):
    """(1/T) int_0^T F(t - tau) dtau by scipy quad (F = 0 before the release)."""
    if t <= 0.0:
        return 0.0
    f = lambda tau: float(lone.absorbing_cdf(t - tau, R, GAP, D, k))  # noqa: E731
    return quad(f, 0.0, min(pulse, t), epsabs=0.0, epsrel=1e-13, limit=200)[0] / pulse


@pytest.mark.parametrize("k", [0.0, 1.0])
def test_cdf_integral_against_quad(k):
    for t in (0.01, 0.1, 1.0, 10.0):
        ref = quad(lambda s: float(lone.absorbing_cdf(s, R, GAP, D, k)), 0.0, t, epsabs=0.0, epsrel=1e-13,
                   limit=200)[0]  # scipy quad of the closed-form CDF
        assert float(pulses.absorbing_cdf_integral(t, R, GAP, D, k)) == pytest.approx(ref, rel=1e-11)


def test_cdf_integral_derivatives_against_mpmath():
    # dH/dx and dH/dw of H = Phi - x beta (the custom JVP) against 40-digit mpmath differentiation
    mp.mp.dps = 40

    def h(x, w):
        x, w = mp.mpf(x), mp.mpf(w)
        s = mp.sqrt(w)
        phi = (mp.exp(-2 * x * s) * mp.erfc(x - s) + mp.exp(2 * x * s) * mp.erfc(x + s)) / 2
        beta = (mp.exp(-2 * x * s) * mp.erfc(x - s) - mp.exp(2 * x * s) * mp.erfc(x + s)) / (2 * s)
        return phi - x * beta

    grad = jax.jit(jax.grad(pulses._h, argnums=(0, 1)))
    for x in (0.1, 0.7, 2.0):
        for w in (1e-8, 5e-4, 2e-3, 0.3, 3.0):
            gx, gw = (float(v) for v in grad(x, w))
            assert gx == pytest.approx(float(mp.diff(lambda v, w=w: h(v, w), x)), rel=1e-10)
            assert gw == pytest.approx(float(mp.diff(lambda v, x=x: h(x, v), w)), rel=1e-9)
    # and the k = 0 gradient of a pulsed slot is finite in every argument
    g = jax.grad(lambda a: pulses._pulse_cdf(jnp.asarray([0.3]), 0.05, a[0], a[1], a[2], a[3])[0])(
        jnp.asarray([R, GAP, D, 0.0]))
    assert np.all(np.isfinite(np.asarray(g)))


@pytest.mark.parametrize("k", [0.0, 1.0])
def test_lone_pulse_hits_against_quadrature(k):
    pulse, ts, memory = 0.05, 0.1, 6
    hits, tail = pulses.lone_pulse_hits(E1, C1, R1, np.array([False]), np.array([ts]), np.array([pulse]), D, k, ts,
                                        memory=memory)
    ref = np.diff([_quad_cdf(l * ts, pulse, k) for l in range(memory + 2)])
    np.testing.assert_allclose(np.asarray(hits[0, 0]), ref, rtol=1e-10)
    eventual = float(lone.absorbing_total(R, GAP, D, k))
    assert float(tail[0, 0]) == pytest.approx(eventual - _quad_cdf((memory + 1) * ts, pulse, k), rel=1e-9)
    # passive: window average of the closed-form occupancy, by quad
    off = 0.03
    hits_p, _ = pulses.lone_pulse_hits(E1, C1, R1, np.array([True]), np.array([off]), np.array([pulse]), D, k, ts,
                                       memory=memory)
    for l in range(memory + 1):
        t = l * ts + off
        ref_p = quad(lambda tau, t=t: float(lone.passive_probability(t - tau, R, R + GAP, D, k)), 0.0, min(t, pulse),
                     epsabs=0.0, epsrel=1e-13)[0] / pulse
        assert float(hits_p[0, 0, l]) == pytest.approx(ref_p, rel=1e-9, abs=1e-15)


def test_shadowed_pulse_one_sphere_is_the_lone_closed_form():
    pulse, ts, memory = 0.04, 0.1, 4
    h1, t1 = pulses.shadowed_pulse_hits(E1, C1, R1, D, 0.0, ts, memory, np.array([pulse]))
    hl, tl = pulses.lone_pulse_hits(E1, C1, R1, np.array([False]), np.array([ts]), np.array([pulse]), D, 0.0, ts,
                                    memory=memory)
    np.testing.assert_allclose(np.asarray(h1), np.asarray(hl), rtol=1e-8, atol=1e-13)
    np.testing.assert_allclose(np.asarray(t1), np.asarray(tl), rtol=1e-8)


@pytest.mark.slow
def test_shadowed_pulse_two_spheres_average_the_impulse_model():
    pulse, ts = 0.04, 0.1
    # two spheres: the pulsed CDF at t equals the window average of the impulse model's CDF (scipy quad over the
    # release time of shadowed_hits evaluated with one slot of length t - tau)
    centres, radii = np.array([[10e-6, 0.0, 0.0], [0.0, 12e-6, 0.0]]), np.array([5e-6, 4e-6])
    h2, _ = pulses.shadowed_pulse_hits(E1, centres, radii, D, 0.0, ts, 1, np.array([pulse]))

    def impulse_cdf(t, j):
        return float(shadowed_hits(E1, centres, radii, D, 0.0, t, 0)[0][0, j, 0]) if t > 0 else 0.0

    t = 2 * ts
    for j in range(2):
        ref = quad(lambda tau, j=j: impulse_cdf(t - tau, j), 0.0, pulse, epsabs=0.0, epsrel=1e-10)[0] / pulse
        assert float(np.asarray(h2)[0, j].sum()) == pytest.approx(ref, rel=1e-8)


def test_particles_with_pulse_against_the_closed_form():
    pulse, ts, memory = 0.05, 0.1, 4
    hits, _, se = simulate_hits(E1, C1, R1, np.array([False]), np.array([0.0]), D, 0.0, ts, memory,
                                particles=30000, seed=11, pulses=[pulse])
    ref, _ = pulses.lone_pulse_hits(E1, C1, R1, np.array([False]), np.array([ts]), np.array([pulse]), D, 0.0, ts,
                                    memory=memory)
    z = (hits[0, 0] - np.asarray(ref[0, 0])) / se[0, 0]
    assert np.abs(z).max() < 4.5, z
    # pulse 0 is the impulse, molecule for molecule (the release word is separate from the step words)
    a = simulate_hits(E1, C1, R1, np.array([False]), np.array([0.0]), D, 0.0, ts, memory, particles=3000, seed=3)
    b = simulate_hits(E1, C1, R1, np.array([False]), np.array([0.0]), D, 0.0, ts, memory, particles=3000, seed=3,
                      pulses=[0.0])
    np.testing.assert_array_equal(a[0], b[0])


def _scenario(pulse, walls=None):
    data = {"name": "p", "medium": {"diffusion": D},
            "emitter": [{"name": "A", "position": [0, 0, 0], "pulse": pulse},
                        {"name": "B", "position": ["0 um", "-12 um", "0 um"]}],
            "receiver": [{"name": "R", "centre": ["10 um", "0 um", "0 um"], "radius": "5 um"}],
            "channel": {"symbol_interval": "100 ms", "memory": 4}}
    return scenario_from_dict(data)


def test_scenario_pulse_through_channel_response():
    s = _scenario("20 ms")
    assert s.emitters[0].pulse == pytest.approx(0.02) and s.emitters[1].pulse == 0.0
    resp = channel_response(s, "lone")
    ref, _ = pulses.lone_pulse_hits(E1, C1, R1, np.array([False]), np.array([0.1]), np.array([0.02]), D, 0.0, 0.1,
                                    memory=4)
    np.testing.assert_allclose(resp.hits[0, 0], np.asarray(ref[0, 0]), rtol=1e-12)
    imp = lone.lone_hits(np.array([[0.0, -12e-6, 0.0]]), C1, R1, np.array([False]), np.array([0.1]), D, 0.0, 0.1,
                         memory=4)[0]
    np.testing.assert_allclose(resp.hits[1, 0], np.asarray(imp[0, 0]), rtol=1e-12)
    assert any("release pulses" in n for n in resp.notes)


@pytest.mark.parametrize("pulse, words", [("-1 ms", "must not be negative"), ("200 ms", "longer than the symbol")])
def test_bad_pulse(pulse, words):
    with pytest.raises(InputError, match=words) as err:
        _scenario(pulse)
    assert err.value.field == "emitter[0].pulse"
