"""Uniform flow: passive sphere (exact), absorbing and reactive spheres (Laplace series), particles, bad input."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import jax
import numpy as np
import pytest
from scipy import integrate

from capacity.errors import InputError
from capacity.physics.flow import flow_hits, flow_hits_traced, spherical_i
from capacity.physics.lone import lone_hits, passive_probability
from capacity.physics.particles import simulate_hits
from capacity.physics.reactive import reactive_hits

D = 79.4e-12
EM = np.array([[0.0, 0.0, 0.0]])
CE = np.array([[10e-6, 0.0, 0.0]])
RA = np.array([5e-6])
LAGS = 5  # one memory everywhere: the compiled kernels are shared between the tests


def test_spherical_bessel_series_against_scipy():
    from scipy.special import spherical_in

    # outside reference: scipy's modified spherical Bessel functions of the first kind
    for beta in (0.0, 1e-4, 0.7, 3.7, 12.0):
        ours = np.asarray(spherical_i(beta, 30))
        ref = spherical_in(np.arange(31), beta)
        big = ref > 1e-280
        np.testing.assert_allclose(ours[big], ref[big], rtol=1e-13)


@pytest.mark.parametrize("k", [0.0, 2.0])
def test_still_fluid_gives_the_lone_closed_forms(k):
    # flow = 0: the Laplace series must reproduce the closed forms (Yilmaz et al. 2014 / Heren et al. 2015 for
    # the absorbing sphere, the reactive closed form, the passive erfc form) through the Talbot inversion
    for centre in (CE, np.array([[3e-6, 11e-6, -2e-6]])):
        h, t = flow_hits(EM, centre, RA, np.array([False]), np.array([np.inf]), np.zeros(1), D, k, np.zeros(3),
                         0.1, LAGS)
        h0, t0 = lone_hits(EM, centre, RA, np.array([False]), np.zeros(1), D, k, 0.1, LAGS)
        np.testing.assert_allclose(h, np.asarray(h0), rtol=1e-8, atol=1e-13)
        np.testing.assert_allclose(t, np.asarray(t0), rtol=1e-8, atol=1e-13)
        h, t = flow_hits(EM, centre, RA, np.array([False]), np.array([1e-6]), np.zeros(1), D, k, np.zeros(3), 0.1,
                         LAGS)
        r0, rt = reactive_hits(EM, centre, RA, np.array([1e-6]), D, k, 0.1, LAGS)
        np.testing.assert_allclose(h, np.asarray(r0), rtol=1e-7, atol=1e-13)
        np.testing.assert_allclose(t, np.asarray(rt), rtol=1e-8, atol=1e-13)
        hp, tp = flow_hits(EM, centre, RA, np.array([True]), np.array([np.inf]), np.array([0.05]), D, k,
                           np.zeros(3), 0.1, LAGS)
        p0, q0 = lone_hits(EM, centre, RA, np.array([True]), np.array([0.05]), D, k, 0.1, LAGS)
        np.testing.assert_allclose(hp, np.asarray(p0), rtol=1e-12, atol=1e-16)
        np.testing.assert_allclose(tp, np.asarray(q0), rtol=1e-9)


def test_passive_sphere_in_a_flow_against_3d_quadrature():
    # outside reference: scipy 3-D quadrature (tplquad) of the drifted Gaussian kernel over the ball, and the
    # reference sheet's exact form (the no-flow erfc form at the drifted distance |x0 + v t - c|)
    v = np.array([12e-6, -5e-6, 3e-6])
    a, c = 4e-6, np.array([9e-6, 2e-6, -1e-6])
    hits, _ = flow_hits(EM, c[None], np.array([a]), np.array([True]), np.array([np.inf]), np.array([0.05]), D, 0.0,
                        v, 0.1, LAGS)
    for lag in (2,):
        t = lag * 0.1 + 0.05
        mean = EM[0] + v * t
        var = 2.0 * D * t

        def density(phi, theta, r, mean=mean, var=var):
            y = c + r * np.array([np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)])
            g = np.exp(-np.sum((y - mean) ** 2) / (2.0 * var)) / (2.0 * np.pi * var) ** 1.5
            return g * r * r * np.sin(theta)

        ref, _ = integrate.tplquad(density, 0.0, a, 0.0, np.pi, 0.0, 2.0 * np.pi, epsabs=1e-13, epsrel=1e-10)
        drifted = np.linalg.norm(mean - c)
        assert hits[0, 0, lag] == pytest.approx(ref, rel=1e-7)
        assert hits[0, 0, lag] == pytest.approx(float(passive_probability(t, a, drifted, D)), rel=1e-12)


def _numpy_walk(v, n, dt, horizon, seed):
    """A plain fixed-step NumPy simulation written for this test (independent of the kernel): x += v dt +
    sqrt(2 D dt) z; absorbed when the end point is inside, or with the planar Brownian-bridge probability
    exp(-d1 d2 / (D dt)) (Lamm & Schulten 1983; Andrews & Bray 2004). Returns the absorbed fraction per 0.1 s."""
    rng = np.random.default_rng(seed)
    x = np.zeros((n, 3))
    alive = np.ones(n, bool)
    steps = int(round(horizon / dt))
    per_slot = int(round(0.1 / dt))
    counts = np.zeros(steps // per_slot)
    d1 = np.linalg.norm(x - CE[0], axis=1) - RA[0]
    for s in range(steps):
        x2 = x + v * dt + np.sqrt(2 * D * dt) * rng.standard_normal((n, 3))
        d2 = np.linalg.norm(x2 - CE[0], axis=1) - RA[0]
        hit = alive & ((d2 <= 0) | (rng.random(n) < np.exp(-np.maximum(d1, 0) * np.maximum(d2, 0) / (D * dt))))
        counts[s // per_slot] += hit.sum()
        alive &= ~hit
        x, d1 = x2, d2
    return counts / n


@pytest.mark.parametrize("v", [[2e-5, 0.0, 0.0], pytest.param([-2e-5, 0.0, 0.0], marks=pytest.mark.slow),
                               pytest.param([0.0, 2e-5, 0.0], marks=pytest.mark.slow)])
def test_absorbing_sphere_in_a_flow_against_a_plain_simulation(v):
    # Pe = |v| a / D = 1.26: flow toward, away from and across the sphere. The Laplace series (exact up to the
    # inversion) and the particle simulator against the plain NumPy walk (dt = 2e-4 s, 2e4 molecules)
    v = np.array(v)
    n = 20000
    plain = _numpy_walk(v, n, 2e-4, 0.3, seed=7)
    model, _ = flow_hits(EM, CE, RA, np.array([False]), np.array([np.inf]), np.zeros(1), D, 0.0, v, 0.1, LAGS)
    sim, _, se = simulate_hits(EM, CE, RA, np.array([False]), np.zeros(1), D, 0.0, 0.1, LAGS, particles=n, seed=5,
                               flow=v)
    model, sim, se = model[..., :3], sim[..., :3], se[..., :3]  # the plain walk covers three slots
    se_plain = np.sqrt(plain * (1 - plain) / n)
    assert np.all(np.abs(model[0, 0] - plain) < 4 * se_plain + 2e-3)  # 2e-3: the plain walk's step bias
    assert np.all(np.abs(sim[0, 0] - plain) < 4 * np.hypot(se[0, 0], se_plain) + 2e-3)
    assert np.all(np.abs(sim[0, 0] - model[0, 0]) < 4 * se[0, 0] + 1e-4)


def test_reactive_sphere_in_a_flow_against_particles():
    # the drift term of the Robin condition couples the Legendre orders (tridiagonal solve); the Girsanov form
    # without it under-counts by ~12 % here, so this check can tell them apart (particle SE ~0.4 %)
    v = np.array([2e-5, 0.0, 0.0])
    n = 30000
    model, mtail = flow_hits(EM, CE, RA, np.array([False]), np.array([2e-5]), np.zeros(1), D, 0.0, v, 0.1, LAGS)
    sim, tail, se = simulate_hits(EM, CE, RA, np.array([False]), np.zeros(1), D, 0.0, 0.1, LAGS, particles=n, seed=2,
                                  flow=v, reaction_rates=[2e-5])
    total_se = np.sqrt(sim.sum() * (1 - sim.sum()) / n)
    assert abs(sim.sum() - model.sum()) < 4 * total_se
    assert np.all(np.abs(sim - model) < 4 * se + 1e-4)
    assert tail[0, 0] == pytest.approx(mtail[0, 0], rel=0.1)


@pytest.mark.slow
def test_gradient_through_the_flow_series():
    # reverse-mode derivative of the captured fraction with respect to the flow speed and the slot length against
    # central differences
    def total(speed, ts):
        h, t = flow_hits_traced(EM, CE, RA, np.array([False]), np.array([np.inf]), np.zeros(1), D, 0.0,
                                speed * np.array([1.0, 0.0, 0.0]), ts, 3)
        return h.sum()

    g_speed, g_ts = jax.grad(total, argnums=(0, 1))(1e-5, 0.1)
    step_v, step_t = 1e-8, 1e-5
    fd_v = (total(1e-5 + step_v, 0.1) - total(1e-5 - step_v, 0.1)) / (2 * step_v)
    fd_t = (total(1e-5, 0.1 + step_t) - total(1e-5, 0.1 - step_t)) / (2 * step_t)
    assert float(g_speed) == pytest.approx(float(fd_v), rel=1e-5)
    assert float(g_ts) == pytest.approx(float(fd_t), rel=1e-5)


# ----------------------------------------------------------------------------------------------- scenario keys
SCENARIO = textwrap.dedent(
    """
    name = "flow pair"
    [medium]
    diffusion = "79.4 um^2/s"
    flow = FLOW
    [[emitter]]
    name = "A"
    position = [0, 0, 0]
    [[receiver]]
    name = "bead"
    centre = ["10 um", 0, 0]
    radius = "5 um"
    [channel]
    symbol_interval = "100 ms"
    memory = 5
    response = "lone"
    """
)


def _load(text):
    from capacity.scenario.load import scenario_from_dict

    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    return scenario_from_dict(tomllib.loads(text))


def test_flow_goes_through_response_design_and_check():
    from capacity.design.objectives import response
    from capacity.design.optimise import build_problem
    from capacity.design.params import base_physical, layout
    from capacity.physics.response import channel_response
    from capacity.scenario.summary import summarise

    sc = _load(SCENARIO.replace("FLOW", '["20 um/s", "0 um/s", "0 um/s"]'))
    assert sc.medium.flow == pytest.approx((2e-5, 0.0, 0.0))
    resp = channel_response(sc, "lone")
    ref, _ = flow_hits(EM, CE, RA, np.array([False]), np.array([np.inf]), np.zeros(1), D, 0.0,
                       np.array([2e-5, 0, 0]), 0.1, LAGS)
    np.testing.assert_allclose(resp.hits, ref, rtol=1e-12)
    problem = build_problem(sc, ("symbol_interval",), "bits-per-second")
    assert problem.transport is not None and problem.model == "lone"
    hits, _ = response(problem._replace(memory=LAGS), layout(problem.space, base_physical(problem.space),
                                                          problem.base_symbols))
    np.testing.assert_allclose(np.asarray(hits), ref, rtol=1e-10)
    summary = summarise(sc)
    assert summary["flow"]["peclet"]["bead"] == pytest.approx(2e-5 * 5e-6 / D)


@pytest.mark.parametrize("flow,match", [
    ('"10 um/s"', "single value"),
    ('["10 um/s", "0 um/s"]', "3 velocity components"),
    ('["10 um", "0 um/s", "0 um/s"]', "velocity"),
    ('["2 m/s", "0 um/s", "0 um/s"]', "beyond"),
])
def test_bad_flow_is_a_named_error(flow, match):
    with pytest.raises(InputError, match=match) as err:
        _load(SCENARIO.replace("FLOW", flow))
    assert "medium.flow" in str(err.value)


def test_cli_scalar_flow_exits_2(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(SCENARIO.replace("FLOW", '"10 um/s"'))
    proc = subprocess.run([sys.executable, "-m", "capacity.cli", "check", str(path)], capture_output=True,
                          text=True, timeout=120)
    assert proc.returncode == 2
    assert "medium.flow" in proc.stderr and "Traceback" not in proc.stderr


def test_builtin_channel_flow_loads_with_walls_flow_and_a_reactive_bead():
    import capacity

    sc = capacity.load_scenario("channel_flow")
    assert len(sc.walls) == 2 and sc.flow[0] > 0.0
    assert [r.kind for r in sc.receivers] == ["reactive", "absorbing"]


@pytest.mark.slow
def test_design_stage_matches_the_response_layer_on_channel_flow():
    # the design objectives' differentiable response (images + flow series in JAX) against the response layer
    import capacity
    from capacity.design.objectives import response
    from capacity.design.optimise import build_problem
    from capacity.design.params import base_physical, layout
    from capacity.physics.response import channel_response

    sc = capacity.load_scenario("channel_flow").with_channel(memory=6)
    problem = build_problem(sc, ("symbol_interval",), "bits-per-second")
    assert problem.walls is not None and problem.transport is not None
    hits, tail = response(problem, layout(problem.space, base_physical(problem.space), problem.base_symbols))
    ref = channel_response(sc, "lone")
    np.testing.assert_allclose(np.asarray(hits), ref.hits, rtol=1e-6, atol=1e-12)


def test_flow_across_a_wall_is_refused():
    text = SCENARIO.replace("FLOW", '["0 um/s", "0 um/s", "10 um/s"]') + textwrap.dedent(
        """
        [[wall]]
        point = [0, 0, "-10 um"]
        normal = [0, 0, 1]
        """
    )
    with pytest.raises(InputError, match="across wall"):
        _load(text)


@pytest.mark.slow
def test_renewal_model_in_a_flow():
    # flow = 0: the renewal model of capacity.physics.shadowed (same landing law, to round-off); one sphere: the
    # lone flow series; a bead 1 um from a wall in a flow (bead + mirror image): the particle simulator with the
    # exact reflection, where the lone image sum over-counts by 14 % (results/validation/flow_walls.csv)
    from capacity.physics.flow_shadowed import shadowed_flow_arrays
    from capacity.physics.shadowed import shadowed_hits

    d = 1e-10
    pair = np.array([[14e-6, 0.0, -5e-6], [14e-6, 0.0, -15e-6]])
    radii = np.array([4e-6, 4e-6])
    h, t = shadowed_flow_arrays(EM, pair, radii, d, 0.0, np.zeros(3), 0.1, LAGS)
    h0, t0 = shadowed_hits(EM, pair, radii, d, 0.0, 0.1, LAGS)
    np.testing.assert_allclose(h, np.asarray(h0), atol=1e-12)
    np.testing.assert_allclose(t, np.asarray(t0), atol=1e-12)
    v = np.array([4e-5, 0.0, 0.0])
    h1, t1 = shadowed_flow_arrays(EM, pair[:1], radii[:1], d, 0.0, v, 0.1, LAGS)
    hl, tl = flow_hits(EM, pair[:1], radii[:1], np.array([False]), np.array([np.inf]), np.zeros(1), d, 0.0, v, 0.1,
                       LAGS)
    np.testing.assert_allclose(h1, hl, atol=1e-12)
    np.testing.assert_allclose(t1, tl, atol=1e-12)
    hw, _ = shadowed_flow_arrays(EM, pair, radii, d, 0.0, v, 0.1, LAGS)
    from capacity.physics.images import wall_geometry
    from capacity.scenario.types import Wall

    walls = wall_geometry((Wall(point=(0.0, 0.0, -10e-6), normal=(0.0, 0.0, 1.0)),))
    n = 200000
    sim, _, se = simulate_hits(EM, pair[:1], radii[:1], np.array([False]), np.zeros(1), d, 0.0, 0.1, LAGS,
                               particles=n, seed=9, flow=v, walls=walls)
    real = hw[:, 0] + hw[:, 1]  # the image's captures belong to the real bead
    assert abs(real.sum() - sim.sum()) < 0.02 * sim.sum()
    assert np.all(np.abs(real - sim[:, 0]) < 4 * se[:, 0] + 1e-3)
