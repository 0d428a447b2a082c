"""Reflecting walls: scenario syntax and errors, the image layouts, the particle reflection, outside checks.

References: the image-source formula for a reflecting plane (Carslaw & Jaeger, Conduction of Heat in Solids, 1959,
Sec. 10.10; Crank, The Mathematics of Diffusion, 1975, Sec. 3.5); the passive-sphere closed form
(references.md); a direct 3-D quadrature (scipy) of the half-space Green's function over the ball; the particle
simulator with exact reflection (independent Monte Carlo) for absorbing spheres.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys

import numpy as np
import pytest
from scipy import integrate

from capacity.errors import InputError
from capacity.physics import images
from capacity.physics.lone import absorbing_cdf, lone_hits
from capacity.physics.particles import _simulate
from capacity.physics.response import channel_response
from capacity.scenario.load import scenario_from_dict
from capacity.scenario.summary import passive_fraction, summarise

D = 79.4e-12
UP = [0, 1, 0]


def _scenario(walls, receivers=None, emitters=None, **channel):
    data = {
        "name": "walled",
        "medium": {"diffusion": D},
        "emitter": emitters or [{"name": "A", "position": ["0 um", "0 um", "0 um"]}],
        "receiver": receivers or [{"name": "R", "centre": ["12 um", "0 um", "0 um"], "radius": "5 um"}],
        "channel": {"symbol_interval": "100 ms", "memory": 6, **channel},
    }
    if walls:
        data["wall"] = walls
    return scenario_from_dict(data)


def _wall(y_um, normal=UP):
    return {"point": ["0 um", f"{y_um} um", "0 um"], "normal": normal}


# ------------------------------------------------------------------------------------------ scenario and errors
def test_walls_parse_and_check_reports_distances():
    s = _scenario([_wall(-7), _wall(8, [0, -2, 0])])
    assert len(s.walls) == 2 and s.walls[1].kind == "reflecting"
    summary = summarise(s)
    walls = summary["walls"]
    assert walls[0]["emitter_distances"]["A"] == pytest.approx(7e-6, rel=1e-12)
    assert walls[1]["normal"] == [0.0, -1.0, 0.0]
    assert walls[1]["receiver_gaps"]["R"] == pytest.approx(8e-6 - 5e-6, rel=1e-12)


@pytest.mark.parametrize(
    "walls, field, words",
    [
        ([_wall(-3)], "receiver[0].centre", "cut by wall[0]"),
        ([_wall(-5)], "receiver[0].centre", "touches wall[0]"),
        ([_wall(2)], "emitter[0].position", "behind wall[0]"),
        ([_wall(0)], "emitter[0].position", "on wall[0]"),
        ([_wall(-7, [0, 0, 0])], "wall[0].normal", "zero vector"),
        ([_wall(-7), _wall(9, [1, -1, 0])], "wall[1].normal", "not parallel"),
        ([_wall(-7), _wall(9)], "wall[1].normal", "points the same way"),
        ([_wall(-7), _wall(9, [0, -1, 0]), _wall(-9)], "wall", "at most two walls"),
        ([{"point": [0, -7e-6, 0], "normal": UP, "kind": "sticky"}], "wall[0].kind", "not a known option"),
        ([{"point": [0, -7e-6, 0]}], "wall[0].normal", "missing"),
    ],
)
def test_bad_walls_are_named_errors(walls, field, words):
    with pytest.raises(InputError, match=re.escape(words)) as err:
        _scenario(walls)
    assert err.value.field == field


def test_cli_check_exits_2_on_a_wall_cutting_a_receiver(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(
        'name = "cut"\n[medium]\ndiffusion = "79.4 um^2/s"\n'
        '[[emitter]]\nname = "A"\nposition = ["0 um", "0 um", "0 um"]\n'
        '[[receiver]]\nname = "R"\ncentre = ["12 um", "0 um", "0 um"]\nradius = "5 um"\n'
        '[[wall]]\npoint = ["0 um", "-3 um", "0 um"]\nnormal = [0, 1, 0]\n'
        '[channel]\nsymbol_interval = "100 ms"\n'
    )
    run = subprocess.run([sys.executable, "-m", "capacity.cli", "check", str(path)], capture_output=True, text=True)
    assert run.returncode == 2
    assert "receiver[0].centre" in run.stderr and "Traceback" not in run.stderr


# ------------------------------------------------------------------------------------------ image geometry
def test_images_fold_back_to_their_original():
    # every image of a point, folded into the fluid by the reflection map, is the point itself (the map the
    # particle kernel uses; an independent check of the cell formulas)
    rng = np.random.default_rng(1)
    geom = images.WallGeometry(np.array([0.6, 0.8, 0.0]), -3e-6, 11e-6)
    pts = rng.normal(size=(20, 3)) * 4e-6
    z = pts @ geom.normal
    pts += ((np.clip(z, -2e-6, 10e-6) - z)[:, None]) * geom.normal  # into the channel
    for cell in images.image_cells(geom, 4):
        img = images.image_points(pts, geom, cell)
        zi = img @ geom.normal
        lo = geom.lower + cell * geom.width
        assert np.all((zi >= lo - 1e-15) & (zi <= lo + geom.width + 1e-15))
        np.testing.assert_allclose(images.reflect_into_fluid(img, geom), pts, rtol=0, atol=1e-18)


def test_kernel_reflection_matches_numpy_reference():
    import jax.numpy as jnp

    from capacity.physics import _particles_kernel as k
    from capacity.physics.particles import _wall_fields

    rng = np.random.default_rng(2)
    x = rng.normal(size=(200, 3)) * 3e-5
    for geom in (images.WallGeometry(np.array([0.0, 0.0, 1.0]), 1e-6, math.inf),
                 images.WallGeometry(np.array([0.0, 0.6, 0.8]), -2e-6, 9e-6)):
        fields = _wall_fields(geom)
        stub = type("G", (), fields)
        got = np.asarray(k._reflect(jnp.asarray(x), stub))
        np.testing.assert_allclose(got, images.reflect_into_fluid(x, geom), rtol=0, atol=1e-20)


# ------------------------------------------------------------------------------------------ passive: exact
def _half_space_ball_integral(t, source, image, centre, a):
    """Direct 3-D quadrature over the ball of the reflecting half-space Green's function G(x-x0) + G(x-x0')."""
    def green(x):
        return sum(math.exp(-float(np.sum((x - p) ** 2)) / (4 * D * t)) for p in (source, image)) \
            / (4 * math.pi * D * t) ** 1.5

    def f(r, th, ph):
        x = centre + r * np.array([math.sin(th) * math.cos(ph), math.sin(th) * math.sin(ph), math.cos(th)])
        return green(x) * r * r * math.sin(th)

    val, _ = integrate.tplquad(lambda ph, th, r: f(r, th, ph), 0, a, 0, math.pi, 0, 2 * math.pi,
                               epsabs=0, epsrel=1e-12)
    return val


def test_passive_sphere_beside_a_wall_is_the_image_source_formula():
    # receiver 12 um from the source, wall 7 um below the source: images at y = -14 um
    s = _scenario([_wall(-7)], receivers=[{"name": "P", "centre": ["12 um", "0 um", "0 um"], "radius": "5 um",
                                           "kind": "passive"}])
    resp = channel_response(s, "lone", memory=4)
    ts = 0.1 * np.arange(5) + 0.1  # sampled at the end of each slot
    source, image, centre = np.zeros(3), np.array([0, -14e-6, 0]), np.array([12e-6, 0, 0])
    # image-source formula: the free passive closed form (references.md) summed over the source and its image
    expected = passive_fraction(ts, 12e-6, 5e-6, D) + passive_fraction(ts, float(np.linalg.norm(centre - image)),
                                                                       5e-6, D)
    np.testing.assert_allclose(resp.hits[0, 0], expected, rtol=1e-9)
    for l in (1,):  # direct 3-D quadrature of the half-space Green's function over the ball (scipy)
        direct = _half_space_ball_integral(ts[l], source, image, centre, 5e-6)
        assert resp.hits[0, 0, l] == pytest.approx(direct, rel=1e-9)


def test_channel_truncation_error_within_the_stated_bound():
    # passive sphere in a 15 um channel, depth 1 (3 copies) against depth 6: the change stays below the bound
    geom = images.WallGeometry(np.array([0.0, 1.0, 0.0]), -7e-6, 8e-6)
    em, c, r = np.zeros((1, 3)), np.array([[12e-6, 0.0, 0.0]]), np.array([5e-6])
    ts, memory = 0.1, 4

    cm, copies = images.mirror_spheres(c, geom, 6)  # cell-major: the first 3 copies are the cells |m| <= 1
    h, _ = lone_hits(em, cm, np.tile(r, copies), np.ones(copies, bool), np.full(copies, ts), D, 0.0, ts,
                     memory=memory)
    short, long = images.fold(np.asarray(h)[:, :3], 3), images.fold(np.asarray(h), copies)
    bound, _ = images.truncation_bounds(geom, em, 1, (memory + 1) * ts, D, 0.0)
    diff = np.abs(short - long).max()
    assert 0.0 < diff <= bound, (diff, bound)
    bound6, _ = images.truncation_bounds(geom, em, 6, (memory + 1) * ts, D, 0.0)
    assert bound6 < 1e-9
    # the depth chosen for the default tolerance meets it
    depth, slot, _ = images.choose_depth(geom, em, (memory + 1) * ts, D, 0.0)
    assert slot <= images.IMAGE_TOLERANCE and depth >= 1


# ------------------------------------------------------------------------------------------ particles
@pytest.mark.parametrize("geom", [images.WallGeometry(np.array([0.0, 1.0, 0.0]), -6e-6, math.inf),
                                  images.WallGeometry(np.array([0.0, 1.0, 0.0]), -3e-6, 7e-6)])
def test_reflection_conserves_molecules(geom):
    # no absorbers, no degradation: every molecule is still there at the horizon, all on the allowed side
    n = 3000
    sim = _simulate(np.zeros((1, 3)), np.array([[10e-6, 0.0, 0.0]]), np.array([2e-6]), np.array([True]),
                    np.array([0.1]), D, 0.0, 0.1, 4, particles=n, seed=4, walls=geom)
    assert int(sim.survivors[0]) == n
    z = sim.survivor_positions[0] @ geom.normal
    assert len(z) == n and np.all(z >= geom.lower) and np.all(z <= geom.upper)


def test_absorbing_sphere_near_a_wall_shadowed_images_vs_particles():
    # sphere 2 um from the wall (its image 4 um away); the targets of the shadowed model: totals 10 %, slots 0.005
    s = _scenario([_wall(-7)], particle_count=40000, seed=5, memory=4)
    sh = channel_response(s, "shadowed")
    pa = channel_response(s, "particles")
    assert np.abs(sh.hits - pa.hits).max() < 0.005
    assert np.all(pa.stderr < 0.0015)
    assert sh.hits.sum() == pytest.approx(pa.hits.sum(), rel=0.10)
    # the wall raises the count above the free-space value (molecules bounce back; lone closed form, no wall)
    free = float(absorbing_cdf(0.5, 5e-6, 7e-6, D))
    assert sh.hits.sum() > 1.1 * free and pa.hits.sum() > 1.1 * free
    assert any("method of images" in n for n in sh.notes)


@pytest.mark.slow
def test_channel_shadowed_images_vs_particles_two_receivers():
    s = _scenario([_wall(-7), _wall(9, [0, -1, 0])],
                  receivers=[{"name": "R1", "centre": ["12 um", "0 um", "0 um"], "radius": "4 um"},
                             {"name": "R2", "centre": ["-12 um", "2 um", "0 um"], "radius": "5 um"}],
                  particle_count=200000, seed=6)
    sh = channel_response(s, "shadowed")
    pa = channel_response(s, "particles")
    assert np.abs(sh.hits - pa.hits).max() < 0.005
    np.testing.assert_allclose(sh.hits.sum(-1), pa.hits.sum(-1), rtol=0.10)
    # no degradation in a channel: every molecule is taken eventually, the tails close the budget
    np.testing.assert_allclose((sh.hits.sum(-1) + sh.tail).sum(-1), 1.0, rtol=1e-12)


# ------------------------------------------------------------------------------------------ design objectives
def test_design_hits_with_walls_match_the_response_and_differentiate():
    import jax
    import jax.numpy as jnp

    from capacity.physics.walled import design_hits

    geom = images.WallGeometry(np.array([0.0, 1.0, 0.0]), -7e-6, 8e-6)
    em, rad = jnp.zeros((1, 3)), jnp.asarray([5e-6])
    passive = np.array([True])

    @jax.jit
    def total(c, ts):
        h, _ = design_hits("lone", geom, 3, None, em, c, rad, passive, jnp.reshape(ts, (1,)), D, 0.0, ts, 3)
        return h.sum()

    c0 = jnp.asarray([[12e-6, 0.0, 0.0]])
    g_c, g_t = jax.jit(jax.grad(total, argnums=(0, 1)))(c0, 0.1)
    for k in range(3):  # central differences (steps 1e-9 m, 1e-6 s)
        step = jnp.zeros((1, 3)).at[0, k].set(1e-9)
        fd = (total(c0 + step, 0.1) - total(c0 - step, 0.1)) / 2e-9
        assert float(g_c[0, k]) == pytest.approx(float(fd), rel=1e-5, abs=1e-3)
    fd_t = (total(c0, 0.1 + 1e-6) - total(c0, 0.1 - 1e-6)) / 2e-6
    assert float(g_t) == pytest.approx(float(fd_t), rel=1e-6)
    # the same images as the response layer (lone model, passive receiver, depth 3 in both)
    cm, copies = images.mirror_spheres(np.asarray(c0), geom, 3)
    ref, _ = lone_hits(np.zeros((1, 3)), cm, np.tile([5e-6], copies), np.ones(copies, bool), np.full(copies, 0.1),
                       D, 0.0, 0.1, memory=3)
    h, _ = design_hits("lone", geom, 3, None, em, c0, rad, passive, jnp.asarray([0.1]), D, 0.0, 0.1, 3)
    np.testing.assert_allclose(np.asarray(h), images.fold(np.asarray(ref), copies), rtol=1e-13)


def test_design_with_walls_refuses_geometry_tunables():
    from capacity.design.optimise import build_problem

    s = _scenario([_wall(-7)])
    with pytest.raises(InputError, match="no wall constraint") as err:
        build_problem(s, ["gap"], "bits-per-second")
    assert err.value.field == "tune"


def test_lone_absorbing_in_a_channel_is_refused_with_a_pointer_to_shadowed():
    # the lone image sum ignores the receiver's own images as absorbers: over 200 slots of a 15 um channel it counts
    # more than every molecule (1.19), which the response layer refuses by name
    s = _scenario([_wall(-7), _wall(8, [0, -1, 0])], memory=200)
    with pytest.raises(InputError, match="shadowed") as err:
        channel_response(s, "lone")
    assert err.value.field == "layout" and "> 1" in str(err.value)


def test_particles_passive_sphere_beside_a_wall_against_the_image_formula():
    # the reflected walk's occupancy of a transparent sphere next to the wall: particles (independent Monte Carlo)
    # against the image-source closed form (free passive formula summed over the source and its mirror image)
    geom = images.WallGeometry(np.array([0.0, 1.0, 0.0]), -4e-6, math.inf)
    centre = np.array([[8e-6, -1e-6, 0.0]])
    sim = _simulate(np.zeros((1, 3)), centre, np.array([2.5e-6]), np.array([True]), np.array([0.1]), D, 0.0, 0.1, 4,
                    particles=30000, seed=8, walls=geom)
    ts = 0.1 * np.arange(1, 6)
    image = np.array([0.0, -8e-6, 0.0])
    exact = passive_fraction(ts, float(np.linalg.norm(centre[0])), 2.5e-6, D) + passive_fraction(
        ts, float(np.linalg.norm(centre[0] - image)), 2.5e-6, D)
    z = (sim.hits[0, 0] - exact) / np.sqrt(exact * (1 - exact) / 30000)
    assert np.abs(z).max() < 4.5, z
    # without the wall the count is clearly lower: the test resolves the reflection
    assert exact[0] > 1.2 * passive_fraction(ts[:1], float(np.linalg.norm(centre[0])), 2.5e-6, D)[0]
