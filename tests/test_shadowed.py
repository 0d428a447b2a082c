"""Checks of the shadowed (renewal) response model against references it does not share code with."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy.special import erfc, erfcx

import capacity  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.physics import particles
from capacity.physics.shadowed import _shadowed_core, shadowed_hits, validity_notes
from tests.reference_images import image_split

UM = 1e-6
D = 79.4e-12


def _scipy_lone_cdf(t, radius, gap, diffusion, k):
    """Closed form of references.md (Yilmaz et al. 2014; degraded: Heren et al. 2015), written with scipy."""
    t = np.asarray(t, dtype=float)
    z = gap / np.sqrt(4 * diffusion * t)
    if k == 0:
        return radius / (radius + gap) * erfc(z)
    s = np.sqrt(k * t)
    x = gap * np.sqrt(k / diffusion)
    return radius / (radius + gap) * 0.5 * (np.exp(-x) * erfc(z - s) + erfcx(z + s) * np.exp(-z * z - k * t))


# --- reference series itself ---------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "source, centres, expected",
    [  # references.md, "Several absorbing spheres" [computed] values, a = 5 um each
        ((0, 10, 0), [(15, 10, 0), (15, -10, 0)], (0.301104, 0.125563)),
        ((0, 0, 0), [(15, 0, 0), (30, 0, 0)], (0.307920, 0.076189)),
        ((0, 0, 0), [(15, 5.5, 0), (15, -5.5, 0)], (0.217983, 0.217983)),
    ],
)
def test_image_series_reproduces_reference_sheet(source, centres, expected):
    got = image_split(np.array(source) * UM, np.array(centres) * UM, [5 * UM, 5 * UM])
    np.testing.assert_allclose(got, expected, atol=6e-7)  # references.md values are given to 6 digits


def test_image_series_one_sphere_is_lone_limit():
    # classical: a lone sphere captures a/rho eventually (references.md, Yilmaz et al. 2014 long-time limit)
    got = image_split(np.zeros(3), np.array([[12 * UM, 0, 0]]), [4 * UM])
    np.testing.assert_allclose(got, [4 / 12], rtol=1e-14)


# --- one sphere: exact closed form -------------------------------------------------------------------------

@pytest.mark.parametrize("k", [0.0, 1.0, 10.0])
def test_one_sphere_equals_lone_closed_form(k):
    ts, memory = 0.1, 4
    centre = np.array([[3 * UM, 9 * UM, -2 * UM]])
    emitter = np.array([[-1 * UM, 1 * UM, 0.5 * UM]])
    hits, tail = shadowed_hits(emitter, centre, np.array([5 * UM]), D, k, ts, memory)
    gap = np.linalg.norm(emitter[0] - centre[0]) - 5 * UM
    edges = ts * np.arange(memory + 2, dtype=float)
    cdf = np.concatenate([[0.0], _scipy_lone_cdf(edges[1:], 5 * UM, gap, D, k)])
    np.testing.assert_allclose(np.asarray(hits)[0, 0], np.diff(cdf), rtol=0, atol=1e-10)  # scipy closed form
    limit = 5 * UM / (5 * UM + gap) * np.exp(-gap * np.sqrt(k / D))
    np.testing.assert_allclose(np.asarray(tail)[0, 0], limit - cdf[-1], atol=1e-10)


def test_one_sphere_reference_sheet_values():
    # references.md base case [computed]: F(0.1) = 0.1047913, F(0.5) = 0.2873561 (k = 0); F(0.1) = 0.09871589 (k=1)
    args = (np.zeros((1, 3)), np.array([[10 * UM, 0, 0]]), np.array([5 * UM]), D)
    hits, _ = shadowed_hits(*args, 0.0, 0.1, 4)
    np.testing.assert_allclose(np.cumsum(np.asarray(hits)[0, 0])[[0, 4]], [0.1047913, 0.2873561], rtol=2e-7)
    hits, _ = shadowed_hits(*args, 1.0, 0.1, 4)
    np.testing.assert_allclose(np.asarray(hits)[0, 0, 0], 0.09871589, rtol=2e-7)


# --- steady state: Kelvin images ------------------------------------------------------------------------------

STEADY_LAYOUTS = {  # name: (source um, centres um, radii um, relative tolerance reached)
    "side_by_side": ((0, 10, 0), [(15, 10, 0), (15, -10, 0)], [5, 5], 0.005),
    "one_behind": ((0, 0, 0), [(15, 0, 0), (30, 0, 0)], [5, 5], 0.025),
    "close_pair": ((0, 0, 0), [(15, 5.5, 0), (15, -5.5, 0)], [5, 5], 0.03),
    "unequal_offset": ((2, -1, 0), [(11, 3, 0), (19, -4, 2)], [3, 6], 0.03),
}


@pytest.mark.parametrize("name", list(STEADY_LAYOUTS))
def test_eventual_split_against_kelvin_images(name):
    source, centres, radii, rtol = STEADY_LAYOUTS[name]
    e, c, r = np.array([source]) * UM, np.array(centres) * UM, np.array(radii, dtype=float) * UM
    hits, tail = shadowed_hits(e, c, r, D, 0.0, 0.2, 4)
    total = np.asarray(hits).sum(-1)[0] + np.asarray(tail)[0]
    expected = image_split(e[0], c, r)  # independent image series (tests/reference_images.py)
    np.testing.assert_allclose(total, expected, rtol=rtol)


# --- physical sanity --------------------------------------------------------------------------------------------

def _three_layout():
    e = np.array([[0.0, 0, 0], [4.0, 20, 0]]) * UM
    c = np.array([[12.0, 0, 0], [-3, 11, 0], [-4, -9, 5]]) * UM
    r = np.array([4.0, 5, 3]) * UM
    return e, c, r


def test_shadowing_only_removes_and_permutation_invariant():
    e, c, r = _three_layout()
    hits, tail = shadowed_hits(e, c, r, 1e-10, 0.5, 0.2, 4)
    hits, tail = np.asarray(hits), np.asarray(tail)
    assert hits.min() > -1e-12 and tail.min() > -1e-12
    edges = 0.2 * np.arange(1, 6, dtype=float)
    gaps = np.linalg.norm(e[:, None] - c[None], axis=-1) - r[None]  # (E, R)
    lone_cdf = _scipy_lone_cdf(edges[None, None, :], r[None, :, None], gaps[..., None], 1e-10, 0.5)
    # first passage with more absorbers can only come later or never (common practice: monotonicity)
    assert np.all(np.cumsum(hits, -1) <= lone_cdf + 1e-12)  # lone: scipy closed form (references.md)
    assert np.all(hits.sum(-1) + tail <= 1.0)
    perm = [2, 0, 1]
    hp, tp = shadowed_hits(e, c[perm], r[perm], 1e-10, 0.5, 0.2, 4)
    np.testing.assert_allclose(np.asarray(hp), hits[:, perm], atol=1e-13)
    np.testing.assert_allclose(np.asarray(tp), tail[:, perm], atol=1e-13)


@pytest.mark.slow  # one extra compilation (~20 s on a loaded machine); the measured numbers are in the docstring
def test_contour_and_quadrature_convergence():
    # refining the Talbot contour (M), the surface nodes and the Legendre order changes nothing that matters
    # (style: convergence measured; the Talbot method converges geometrically in M, Abate & Valko 2004)
    e = jnp.zeros((1, 3))
    c = jnp.array([[12.0, 4.6, 0], [12, -4.6, 0]]) * UM  # close pair, the hardest measured case
    r = jnp.array([4.0, 4.0]) * UM
    args = (e, c, r, jnp.asarray(1e-10), jnp.asarray(0.0), jnp.asarray(0.2))
    base = np.asarray(shadowed_hits(*args, 4)[0])
    fine = np.asarray(_shadowed_core(*args, memory=4, terms=32, quad=(28, 28, 140))[0])
    assert np.abs(fine - base).max() < 1e-7


# --- JAX: jit, no recompile, gradients --------------------------------------------------------------------------

def test_jit_and_no_recompile():
    e, c, r = _three_layout()
    shadowed_hits(e, c, r, 1e-10, 0.0, 0.2, 4)
    before = _shadowed_core._cache_size()
    shadowed_hits(e + 1e-7, c * 1.01, r, 2e-10, 0.3, 0.25, 4)
    assert _shadowed_core._cache_size() == before


def _functional(e, c, r, d, k, ts):
    hits, tail = shadowed_hits(e, c, r, d, k, ts, 4)
    weights = jnp.linspace(1.0, 2.0, 5)
    return jnp.sum(hits * weights) + 0.3 * jnp.sum(tail)


@pytest.mark.parametrize(
    "which, index, step",
    [("c", (1, 0), 1e-9), ("c", (0, 1), 1e-9), ("r", (0,), 1e-9), ("e", (0, 2), 1e-9), ("d", None, 1e-13),
     ("ts", None, 1e-5), ("k", None, 1e-4)],
)
def test_gradient_matches_central_differences(which, index, step):
    e = jnp.array([[0.0, 1.0, 0.5]]) * UM
    c = jnp.array([[12.0, 0, 0], [23, 3, 0]]) * UM
    r = jnp.array([4.0, 5.0]) * UM
    params = {"e": e, "c": c, "r": r, "d": jnp.asarray(1e-10), "k": jnp.asarray(0.7), "ts": jnp.asarray(0.2)}

    def f(p):
        return _functional(p["e"], p["c"], p["r"], p["d"], p["k"], p["ts"])

    grad = jax.grad(f)(params)[which]
    g = grad[index] if index is not None else grad

    def shifted(delta):
        p = dict(params)
        p[which] = p[which].at[index].add(delta) if index is not None else p[which] + delta
        return f(p)

    fd = (shifted(step) - shifted(-step)) / (2 * step)  # central differences (common practice)
    np.testing.assert_allclose(float(g), float(fd), rtol=2e-5, atol=1e-9 * abs(float(fd)) + 1e-14)


# --- input errors and validity notes ----------------------------------------------------------------------------

def test_bad_inputs_raise():
    e, c, r = _three_layout()
    with pytest.raises(InputError, match="overlap"):
        shadowed_hits(e, np.array([[0, 10, 0], [0, 15, 0]]) * UM, np.array([3, 3]) * UM, 1e-10, 0.0, 0.2, 3)
    with pytest.raises(InputError, match="inside"):
        shadowed_hits(np.array([[12.5, 0, 0]]) * UM, c, r, 1e-10, 0.0, 0.2, 3)
    with pytest.raises(InputError, match="diffusion"):
        shadowed_hits(e, c, r, -1.0, 0.0, 0.2, 3)
    with pytest.raises(InputError, match="radii"):
        shadowed_hits(e, c, r[:2], 1e-10, 0.0, 0.2, 3)


def test_validity_notes():
    e, c, r = _three_layout()
    assert validity_notes(e, c, r, 1e-10, 0.0) == []
    close = np.array([[12.0, 0, 0], [12, 8.3, 0]]) * UM
    assert any("gap" in n for n in validity_notes(e[:1], close, np.array([4.0, 4.0]) * UM, 1e-10, 0.0))
    assert any("radius" in n for n in validity_notes(e[:1], c[:2], np.array([1.0, 5.0]) * UM, 1e-10, 0.0))
    # the edge: radii 2.5 and 6 um are the validated ratio 2.4 itself (6e-6 / 2.5e-6 = 2.4000000000000004 in
    # floating point), so no note; just beyond it, a note
    assert not any("radius" in n for n in validity_notes(e[:1], c[:2], np.array([2.5, 6.0]) * UM, 1e-10, 0.0))
    assert any("radius" in n for n in validity_notes(e[:1], c[:2], np.array([2.5, 6.01]) * UM, 1e-10, 0.0))
    behind = np.array([[12.0, 0, 0], [20.05, 0, 0]]) * UM  # gap 1.05 um = 0.35 radius right behind: flagged
    assert any("shadow" in n for n in validity_notes(e[:1], behind, np.array([4.0, 3.0]) * UM, 1e-10, 0.0))
    beside = np.array([[12.0, 3.525, 0], [12, -3.525, 0]]) * UM  # same gap side by side: inside measured range
    assert validity_notes(e[:1], beside, np.array([3.0, 3.0]) * UM, 1e-10, 0.0) == []


# --- against the particle simulator ------------------------------------------------------------------------------

def test_against_particle_simulator_small():
    e = np.array([[0.0, 0, 0]]) * UM
    c = np.array([[14.0, 0, 0], [27.0, 2.0, 0]]) * UM  # one partly behind the other
    r = np.array([5.0, 5.0]) * UM
    ts, memory, n = 0.2, 4, 20_000
    hits, _ = shadowed_hits(e, c, r, 1e-10, 0.0, ts, memory)
    sim, _, se = particles.simulate_hits(e, c, r, np.zeros(2, dtype=bool), np.full(2, ts), 1e-10, 0.0, ts, memory,
                                         particles=n, seed=11)
    hits, sim, se = np.asarray(hits), np.asarray(sim), np.asarray(se)
    # independent Monte Carlo: slot tolerance 0.005 (target) + 4 standard errors
    assert np.all(np.abs(hits - sim) <= 0.005 + 4 * se)
    total_se = np.sqrt(sim.sum(-1) * (1 - sim.sum(-1)) / n)
    assert np.all(np.abs(hits.sum(-1) - sim.sum(-1)) <= 0.10 * sim.sum(-1) + 4 * total_se)


def _slot_check(model, sim, se, rel_tol):
    """Slots carrying >= 10 % of a receiver's simulated total: |model - sim| <= rel_tol * sim + 4 SE per slot.

    Returns a boolean array (R, L+1) of slots that pass (True also for the slots that are not checked)."""
    checked = sim >= 0.10 * sim.sum(-1, keepdims=True)
    return ~checked | (np.abs(model - sim) <= rel_tol * sim + 4 * se), checked


def test_hidden_receiver_time_resolved_against_particles():
    # Time-resolved check on the layout above, where the far sphere sits partly behind the near one. The
    # particle simulator (independent Monte Carlo, exact Gaussian increments and radial bridge) with 4e5
    # molecules gives the hidden sphere's main slots to a relative SE of 4-5 %; shadowing cuts those slots by a
    # factor 3-5 relative to the lone closed form (Yilmaz et al. 2014), far beyond 10 % + 4 SE. Tolerance:
    # 10 % relative, the target accuracy the model states for hidden receivers (its docstring, measured 8.3 % on
    # the total in results/validation/; a 1e6-molecule run on this layout gave -7 +- 2 % on the hidden sphere's
    # late slots), plus 4 SE (common practice for Monte Carlo comparisons).
    e = np.array([[0.0, 0, 0]]) * UM
    c = np.array([[14.0, 0, 0], [27.0, 2.0, 0]]) * UM
    r = np.array([5.0, 5.0]) * UM
    ts, memory, n, diff = 0.2, 4, 400_000, 1e-10
    hits, _ = shadowed_hits(e, c, r, diff, 0.0, ts, memory)
    sim, _, _ = particles.simulate_hits(e, c, r, np.zeros(2, dtype=bool), np.full(2, ts), diff, 0.0, ts, memory,
                                        particles=n, seed=13)
    hits, sim = np.asarray(hits)[0], np.asarray(sim)[0]
    se = np.sqrt(sim * (1 - sim) / n)  # Bernoulli SE per slot, computed here (references.md, "Standard errors")
    ok, checked = _slot_check(hits, sim, se, 0.10)
    assert checked[1].sum() >= 3  # the hidden sphere's main slots are really checked
    assert np.all(ok), (hits, sim)
    # the check is sharp enough to reject the model without shadowing: the lone closed form (scipy, Yilmaz et
    # al. 2014) fails it on the hidden sphere's slots
    gaps = np.linalg.norm(e[0] - c, axis=1) - r
    edges = ts * np.arange(memory + 2, dtype=float)
    lone = np.diff(np.stack([np.concatenate([[0.0], _scipy_lone_cdf(edges[1:], r[j], gaps[j], diff, 0.0)])
                             for j in range(2)]), axis=-1)
    lone_ok, _ = _slot_check(lone, sim, se, 0.10)
    assert not np.any(lone_ok[1][checked[1]])


@pytest.mark.slow
def test_validation_study_quick_mode(tmp_path):
    import json
    import os
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    subprocess.run([sys.executable, str(root / "studies" / "validate_responses.py"), "--quick", "--out",
                    str(tmp_path)], check=True, cwd=root, timeout=600,
                   env={**os.environ, "PYTHONPATH": str(root)})
    record = json.loads((tmp_path / "record.json").read_text())
    assert record["particles_per_emitter"] == 500 and len(record["layouts_micrometres"]) == 2
    for name in record["layouts_micrometres"]:
        assert (tmp_path / f"{name}.png").stat().st_size > 1000
    assert (tmp_path / "accuracy.csv").read_text().count("\n") >= 5
