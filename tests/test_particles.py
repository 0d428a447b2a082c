"""Tests of the particle (Brownian simulation) response model against closed forms and exact series.

Every expected value is computed here, independently of the code under test, from the published formula named
beside it (scipy.special for erfc/erfcx). Monte Carlo checks use 4 standard errors, SE = sqrt(p(1-p)/N).
To keep the default run short all default tests share one kernel compilation (<= 2 spheres, memory L = 4) plus
one for the test that stores survivors' positions.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import erfc, erfcx
from scipy.stats import f as f_dist

import capacity  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.physics.particles import _simulate, simulate_hits

UM = 1e-6
D = 79.4e-12  # m^2/s, base case of the reference sheet
A = 5.0 * UM  # radius
GAP = 5.0 * UM  # gap from the source to the surface
L = 4
ORIGIN = np.zeros((1, 3))


def lone_cdf(t, a=A, gap=GAP, k=0.0):
    """Fraction absorbed by t, lone sphere (Yilmaz et al., IEEE Commun. Lett. 18(6) 2014; degraded form Heren et
    al., IEEE TMBMC 1(2) 2015), growing term as erfcx(y) exp(x - y^2) to avoid overflow."""
    t = np.asarray(t, dtype=float)
    z = gap / np.sqrt(4 * D * t)
    if k == 0.0:
        return a / (a + gap) * erfc(z)
    x, s = gap * np.sqrt(k / D), np.sqrt(k * t)
    return a / (a + gap) * 0.5 * (np.exp(-x) * erfc(z - s) + erfcx(z + s) * np.exp(x - (z + s) ** 2))


def slot_probs(ts, memory, **kw):
    edges = np.arange(memory + 2) * ts
    cdf = np.concatenate([[0.0], lone_cdf(edges[1:], **kw)])
    return np.diff(cdf)


def passive_prob(t, a, rho):
    """Exact probability inside a transparent sphere (reference sheet erfc form; Noel, Cheung, Schober 2013)."""
    s = np.sqrt(4 * D * t)
    first = 0.5 * (erfc((rho - a) / s) - erfc((rho + a) / s))
    second = np.sqrt(D * t / np.pi) / rho * (np.exp(-((rho - a) ** 2) / s**2) - np.exp(-((rho + a) ** 2) / s**2))
    return first - second


def two_sphere_capture(x, c, a, n_images=80):
    """Eventual capture probabilities by two grounded spheres from sources x (M, 3): alternating Kelvin images.

    Image of charge q at p in sphere j: -q a_j/|p - c_j| at c_j + a_j^2 (p - c_j)/|p - c_j|^2 (reference sheet,
    classical electrostatics). Capture by j = -(sum of the image charges inside j), both chains (j first, other
    first)."""
    x = np.atleast_2d(x)
    out = np.zeros((x.shape[0], 2))
    for first in (0, 1):
        p, q, j = x.copy(), np.ones(x.shape[0]), first
        for _ in range(n_images):
            rel = p - c[j]
            r = np.linalg.norm(rel, axis=1)
            q = -q * a[j] / r
            p = c[j] + (a[j] ** 2 / r**2)[:, None] * rel
            out[:, j] -= q
            j = 1 - j
    return out


def one_sphere(n, seed=1, k=0.0, ts=0.1, **kw):
    return _simulate(ORIGIN, np.array([[A + GAP, 0, 0]]), np.array([A]), np.array([False]), np.zeros(1), D, k, ts,
                     L, particles=n, seed=seed, **kw)


def test_two_sphere_images_reproduce_reference_values():
    # reference sheet [computed] two-sphere splits (Kelvin images / bispherical coordinates)
    c = np.array([[15, 0, 0], [30, 0, 0]]) * UM
    got = two_sphere_capture(ORIGIN, c, np.array([A, A]))[0]
    np.testing.assert_allclose(got, [0.307920, 0.076189], atol=1e-6)
    c = np.array([[15, 10, 0], [15, -10, 0]]) * UM
    got = two_sphere_capture(np.array([[0, 10 * UM, 0]]), c, np.array([A, A]))[0]
    np.testing.assert_allclose(got, [0.301104, 0.125563], atol=1e-6)


def test_one_absorbing_sphere_matches_closed_form_per_slot_and_tail():
    n = 30_000
    sim = one_sphere(n)
    exact = slot_probs(0.1, L)  # Yilmaz et al. 2014, F((l+1)Ts) - F(lTs)
    se = np.sqrt(exact * (1 - exact) / n)
    assert np.all(np.abs(sim.hits[0, 0] - exact) < 4 * se)
    np.testing.assert_allclose(sim.stderr[0, 0], np.sqrt(sim.hits[0, 0] * (1 - sim.hits[0, 0]) / n))
    # tail: lone eventual capture A/(A+GAP) minus F(T) (Yilmaz et al. 2014); for one sphere the survivors'
    # estimate is exact in expectation (strong Markov property); each term lies in [0, 1] so var <= q(1-q)
    q = A / (A + GAP) - lone_cdf((L + 1) * 0.1)
    assert abs(sim.tail[0, 0] - q) < 4 * np.sqrt(q * (1 - q) / n)
    # the adaptive steps really are fewer than the fixed base steps
    assert sim.steps[0] < 0.1 * sim.ticks[0]


def test_degradation_matches_heren_closed_form():
    n, k = 30_000, 10.0
    sim = one_sphere(n, seed=2, k=k)
    exact = slot_probs(0.1, L, k=k)  # Heren et al., IEEE TMBMC 1(2) 2015, degraded F_k
    se = np.sqrt(exact * (1 - exact) / n)
    assert np.all(np.abs(sim.hits[0, 0] - exact) < 4 * se)
    # degraded eventual capture: a/(a+d) exp(-d sqrt(k/D)) (Heren et al. 2015)
    q = A / (A + GAP) * np.exp(-GAP * np.sqrt(k / D)) - lone_cdf((L + 1) * 0.1, k=k)
    assert abs(sim.tail[0, 0] - q) < 4 * np.sqrt(q * (1 - q) / n) + 1e-12


def test_passive_spheres_match_exact_occupancy():
    n = 30_000
    rho = 10 * UM
    centres = np.array([[rho, 0, 0], [0, -rho, 0]])
    offsets = np.array([0.1, 0.05])  # end of slot, middle of slot
    sim = _simulate(ORIGIN, centres, np.array([A, A]), np.array([True, True]), offsets, D, 0.0, 0.1, L,
                    particles=n, seed=3)
    for j in range(2):
        times = np.arange(L + 1) * 0.1 + offsets[j]
        exact = passive_prob(times, A, rho)  # reference sheet erfc form (exact transparent sphere)
        se = np.sqrt(exact * (1 - exact) / n)
        assert np.all(np.abs(sim.hits[0, j] - exact) < 4 * se)
        # tail: all later samples from the emitter, summed to 2e5 s with the same erfc form (reference sheet),
        # the rest by the far-field density V (4 pi D t)^(-3/2) integrated (textbook: int t^(-3/2) = 2/sqrt(t))
        later = np.arange(L + 1, 2_000_000) * 0.1 + offsets[j]
        rest = 4 / 3 * np.pi * A**3 * (4 * np.pi * D) ** -1.5 / 0.1 * 2 / np.sqrt(later[-1] + 0.05)
        exact_tail = np.sum(passive_prob(later, A, rho)) + rest
        assert abs(sim.tail[0, j] - exact_tail) < 4 * sim.tail_stderr[0, j]
        assert sim.tail_stderr[0, j] < 0.05 * exact_tail


def test_absorbing_sphere_shadows_passive_sphere():
    # an absorbing sphere between the source and a passive sphere removes most molecules on the way, so the
    # passive counts fall far below the free-space occupancy (reference sheet erfc form, exact without it)
    n = 20_000
    centres = np.array([[11 * UM, 0, 0], [22 * UM, 0, 0]])
    sim = _simulate(ORIGIN, centres, np.array([A, A]), np.array([False, True]), np.array([0.0, 0.1]), D, 0.0,
                    0.1, L, particles=n, seed=4)
    free = passive_prob(np.arange(1, L + 2) * 0.1, A, 22 * UM)
    se_sum = np.sqrt(np.sum(free * (1 - free)) / n)
    assert np.sum(sim.hits[0, 1]) < np.sum(free) - 4 * se_sum
    # the passive sphere does not interact, so the absorbing sphere sees exactly its lone law (Yilmaz et al. 2014)
    exact = slot_probs(0.1, L, gap=6 * UM)
    assert np.all(np.abs(sim.hits[0, 0] - exact) < 4 * np.sqrt(exact * (1 - exact) / n))


@pytest.mark.parametrize(
    "centres_um",
    [[[15, 0, 0], [30, 0, 0]], [[15, 5.5, 0], [15, -5.5, 0]]],
    ids=["one-behind-the-other", "side-by-side-1um-apart"],
)
def test_two_spheres_match_exact_steady_state_split(centres_um):
    # absorbed by the horizon + exact Kelvin capture from each survivor's final position = exact eventual split
    # (strong Markov property), so the comparison is exact up to Monte Carlo error. Reference sheet [computed]
    # values: 0.307920 / 0.076189 and 0.217983 each.
    n = 20_000
    c = np.array(centres_um, dtype=float) * UM
    a = np.array([A, A])
    sim = _simulate(ORIGIN, c, a, np.array([False, False]), np.zeros(2), D, 0.0, 0.1, L, particles=n, seed=5)
    pos = sim.survivor_positions[0]
    assert pos.shape[0] == sim.survivors[0]
    est = sim.hits[0].sum(axis=1) + two_sphere_capture(pos, c, a).sum(axis=0) / n
    exact = two_sphere_capture(ORIGIN, c, a)[0]
    se = np.sqrt(exact * (1 - exact) / n)  # each molecule's contribution lies in [0, 1]
    assert np.all(np.abs(est - exact) < 4 * se)
    # the lone tail estimate over-counts the hidden sphere (no shadowing after the horizon): documented bias
    assert sim.tail[0, 1] > two_sphere_capture(pos, c, a)[:, 1].sum() / n


def test_crossing_correction_convergence_order():
    # bias of F(0.1) for the base case, fixed steps (Gobet 2000: naive O(sqrt(dt)); the radial bridge
    # correction is exact for one sphere, so its bias is zero up to Monte Carlo error).
    n = 20_000
    exact = lone_cdf(0.1)  # Yilmaz et al. 2014
    se = np.sqrt(exact * (1 - exact) / n)
    bias = {}
    for corr in ("none", "radial"):
        for dt in (1e-2, 1e-3):
            sim = one_sphere(n, seed=7, ts=0.02, time_step=dt, adapt=0.0, correction=corr)
            bias[corr, dt] = np.sum(sim.hits[0, 0]) - exact
    # reference sheet [computed] naive bias -36.8 % at dt = 1e-2; the dt = 1e-3 value (-13.6 %) is checked with
    # more molecules in test_naive_bias_at_1ms_matches_reference below
    assert abs(bias["none", 1e-2] / exact + 0.368) < 4 * se / exact
    order = np.log(bias["none", 1e-2] / bias["none", 1e-3]) / np.log(10.0)
    assert 0.3 < order < 0.7  # O(sqrt(dt)) (Gobet 2000)
    assert abs(bias["radial", 1e-2]) < 4 * se and abs(bias["radial", 1e-3]) < 4 * se


# references.md [computed, corrected]: naive step-and-check bias of F(0.1), base case, dt = 1e-3 s, is -13.6 %
# with standard error 0.2 % (2.4e6 molecules, two seeds; an earlier -12.7 % on the sheet was too small).
NAIVE_1MS_BIAS, NAIVE_1MS_SE = -0.136, 0.002


def _check_naive_bias_at_1ms(n, seed):
    exact = lone_cdf(0.1)  # Yilmaz et al. 2014
    sim = one_sphere(n, seed=seed, ts=0.02, time_step=1e-3, adapt=0.0, correction="none")
    rel = np.sum(sim.hits[0, 0]) / exact - 1.0
    # Bernoulli SE of the naive estimate, at the reference's expected probability (references.md "Standard
    # errors"), plus the reference's own SE in quadrature; 4 combined standard errors (common practice)
    p = exact * (1 + NAIVE_1MS_BIAS)
    se_rel = np.sqrt(p * (1 - p) / n) / exact
    assert abs(rel - NAIVE_1MS_BIAS) < 4 * np.hypot(se_rel, NAIVE_1MS_SE), (rel, se_rel)


def test_naive_bias_at_1ms_matches_reference():
    # 2e5 molecules (~6 s): relative SE 0.61 %, combined with the reference 0.64 %, tolerance 2.6 %
    _check_naive_bias_at_1ms(200_000, seed=17)


@pytest.mark.slow  # ~1 min: 2e6 molecules x 100 fixed steps
def test_naive_bias_at_1ms_matches_reference_many_molecules():
    # 2e6 molecules: relative SE 0.19 %, combined with the reference 0.28 %, tolerance 1.1 %
    _check_naive_bias_at_1ms(2_000_000, seed=18)


def test_radial_correction_exact_with_huge_steps_planar_is_not():
    # one step per slot on a small sphere (sqrt(D dt) ~ radius): the radial bridge formula stays exact
    # (closed form, Yilmaz et al. 2014); the planar exp(-d1 d2/(D dt)) over-counts contacts.
    n, a, gap, ts = 20_000, 1 * UM, 1 * UM, 0.02
    exact = slot_probs(ts, L, a=a, gap=gap)
    se = np.sqrt(exact * (1 - exact) / n)
    z = {}
    for corr in ("radial", "planar"):
        sim = _simulate(ORIGIN, np.array([[a + gap, 0, 0]]), np.array([a]), np.array([False]), np.zeros(1), D,
                        0.0, ts, L, particles=n, seed=5, time_step=ts, adapt=0.0, correction=corr)
        z[corr] = (sim.hits[0, 0] - exact) / se
    assert np.all(np.abs(z["radial"]) < 4)
    assert z["planar"][0] > 4


def test_seed_reproducibility_and_chunking():
    args = (np.array([[0, 0, 0], [0, 3 * UM, 0]]), np.array([[A + GAP, 0, 0]]), np.array([A]), np.array([False]),
            np.zeros(1), D, 1.0, 0.1, L)
    h1, t1, s1 = simulate_hits(*args, particles=3000, seed=11)
    h2, t2, s2 = simulate_hits(*args, particles=3000, seed=11)
    np.testing.assert_array_equal(h1, h2)
    np.testing.assert_array_equal(t1, t2)
    assert h1.shape == (2, 1, L + 1) and t1.shape == (2, 1) and s1.shape == (2, 1, L + 1)
    h3, _, _ = simulate_hits(*args, particles=3000, seed=12)
    assert not np.array_equal(h1, h3)
    # chunked into many short kernel calls (progress-bar chunks): identical counts
    other = _simulate(*args, particles=3000, seed=11, block=7)
    np.testing.assert_array_equal(other.hits, h1)
    np.testing.assert_allclose(other.tail, t1, rtol=1e-12)
    # every molecule owns its random stream: molecules 0..2999 of a 6000-molecule run (sharing the buffer with
    # other molecules, in other places) end exactly where they ended in the 3000-molecule run
    bigger = _simulate(*args, particles=6000, seed=11)
    for i in range(2):
        first = bigger.survivor_ids[i] < 3000
        np.testing.assert_array_equal(bigger.survivor_ids[i][first], other.survivor_ids[i])
        np.testing.assert_array_equal(bigger.survivor_positions[i][first], other.survivor_positions[i])


def test_reported_stderr_matches_spread_over_independent_seeds():
    # The simulator reports per-slot SE sqrt(p(1-p)/N) and a tail SE from the sample std of its per-molecule
    # terms; both assume independent molecules. Check them against the spread of k = 24 independent runs (seeds
    # chosen in advance): with correct SEs and near-normal estimates, V / mean(SE^2) ~ F(k-1, k(N-1)) (V: sample
    # variance of the k estimates) -- Fisher's variance-ratio test, common practice. Two-sided 0.1 % quantiles
    # per quantity (0.6 % family-wise over 5 slots + tail, Bonferroni): [0.30, 2.26] in variance, i.e. an SE at
    # most ~1.5x too small or ~1.8x too large (an SE scaled by 0.3 or 3 fails).
    k, n = 24, 3000
    runs = [one_sphere(n, seed=100 + i) for i in range(k)]
    lo, hi = f_dist.ppf([0.0005, 0.9995], k - 1, k * (n - 1))
    est = np.array([r.hits[0, 0] for r in runs])  # (k, L+1)
    se = np.array([r.stderr[0, 0] for r in runs])
    for slot in range(L + 1):
        ratio = est[:, slot].var(ddof=1) / np.mean(se[:, slot] ** 2)
        assert lo < ratio < hi, (slot, ratio, lo, hi)
    tail = np.array([r.tail[0, 0] for r in runs])
    tail_se = np.array([r.tail_stderr[0, 0] for r in runs])
    ratio = tail.var(ddof=1) / np.mean(tail_se**2)
    assert lo < ratio < hi, ("tail", ratio, lo, hi)


@pytest.mark.parametrize(
    "change, field",
    [
        (dict(particles=0), "particles"),
        (dict(particles=2.5), "particles"),
        (dict(diffusion=-1.0), "diffusion"),
        (dict(degradation=-0.1), "degradation"),
        (dict(symbol_interval=0.0), "symbol_interval"),
        (dict(memory=-1), "memory"),
        (dict(radii=np.array([-1e-6])), "radii"),
        (dict(emitters=np.array([[A + GAP, 0, 0]])), "emitters"),
        (dict(emitters=np.zeros(3)), "emitters"),
        (dict(passive=np.array([1])), "passive"),
        (dict(sample_offsets=np.array([0.2]), passive=np.array([True])), "sample_offsets"),
        (dict(time_step=0.5), "time_step"),
        (dict(centres=np.array([[np.nan, 0, 0]])), "centres"),
    ],
)
def test_bad_input_raises_input_error(change, field):
    kw = dict(emitters=ORIGIN, centres=np.array([[A + GAP, 0, 0]]), radii=np.array([A]),
              passive=np.array([False]), sample_offsets=np.zeros(1), diffusion=D, degradation=0.0,
              symbol_interval=0.1, memory=L, particles=10, seed=0, time_step=None)
    kw.update(change)
    with pytest.raises(InputError, match=field):
        simulate_hits(**kw)


def test_overlapping_absorbing_spheres_rejected():
    with pytest.raises(InputError, match="overlap"):
        simulate_hits(ORIGIN, np.array([[20 * UM, 0, 0], [26 * UM, 0, 0]]), np.array([A, A]),
                      np.array([False, False]), np.zeros(2), D, 0.0, 0.1, L, particles=10, seed=0)


@pytest.mark.slow
def test_corrected_bias_below_reference_value_with_many_molecules():
    # reference sheet [computed]: the (planar-)corrected bias at dt = 1e-2 is -1.2 % at t = 0.1; the radial
    # correction must do at least as well: |bias| < 1.2 % with SE ~ 0.3 %.
    n = 1_000_000
    exact = lone_cdf(0.1)
    sim = one_sphere(n, seed=8, ts=0.02, time_step=1e-2, adapt=0.0, correction="radial")
    bias = np.sum(sim.hits[0, 0]) - exact
    se = np.sqrt(exact * (1 - exact) / n)
    assert abs(bias) < 4 * se
    assert abs(bias) / exact < 0.012


@pytest.mark.slow
def test_counts_do_not_depend_on_buffer_size():
    # own random stream per molecule: another buffer size (a new compilation) gives the very same counts
    args = (ORIGIN, np.array([[15, 0, 0], [30, 0, 0]]) * UM, np.array([A, A]), np.array([False, False]),
            np.zeros(2), D, 0.0, 0.1, L)
    a = _simulate(*args, particles=5000, seed=5)
    b = _simulate(*args, particles=5000, seed=5, buffer=512)
    np.testing.assert_array_equal(a.hits, b.hits)
    np.testing.assert_allclose(a.tail, b.tail, rtol=1e-12)
