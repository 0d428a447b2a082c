"""Checks of the lone closed forms against outside references (each source named beside its check).

Expected values are recomputed here with scipy / numpy / mpmath from the published formulas, never taken from
the code under test.
"""

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from scipy import integrate, optimize, special

from capacity.physics import lone

R, GAP, D = 5e-6, 5e-6, 79.4e-12  # base case of the reference sheet (gap to the SURFACE)
A = R / (R + GAP)


def ref_cdf(t, k=0.0, r=R, d=GAP, diff=D):
    """F_k(t) from Yilmaz et al. 2014 (k = 0) / Heren et al. 2015 (k > 0), written directly with scipy.special."""
    x = d / np.sqrt(4 * diff * t)
    if k == 0.0:
        return r / (r + d) * special.erfc(x)
    s, q = np.sqrt(k * t), d * np.sqrt(k / diff)
    return r / (r + d) * 0.5 * (np.exp(-q) * special.erfc(x - s) + np.exp(q) * special.erfc(x + s))


def ref_density(t, k=0.0, r=R, d=GAP, diff=D):
    """f(t) e^{-kt}, Yilmaz et al. 2014; Heren et al. 2015."""
    return r / (r + d) * d / np.sqrt(4 * np.pi * diff * t**3) * np.exp(-d * d / (4 * diff * t) - k * t)


def ref_passive(t, a, rho, diff=D, k=0.0):
    """Passive sphere, erfc form of the reference sheet (Noel, Cheung, Schober 2013 setting), numpy."""
    s = np.sqrt(4 * diff * t)
    return np.exp(-k * t) * (0.5 * (special.erfc((rho - a) / s) - special.erfc((rho + a) / s))
                             - np.sqrt(diff * t / np.pi) / rho * (np.exp(-(rho - a) ** 2 / s**2)
                                                                  - np.exp(-(rho + a) ** 2 / s**2)))


def mp_passive(t, a, rho, k=0.0, diff=D):
    """The same erfc form at 40 digits (mpmath), free of cancellation."""
    import mpmath

    mpmath.mp.dps = 40
    t, a, rho, diff = (mpmath.mpf(float(v)) for v in (t, a, rho, diff))
    s = mpmath.sqrt(4 * diff * t)
    val = (0.5 * (mpmath.erfc((rho - a) / s) - mpmath.erfc((rho + a) / s))
           - mpmath.sqrt(diff * t / mpmath.pi) / rho * (mpmath.exp(-(rho - a) ** 2 / s**2)
                                                         - mpmath.exp(-(rho + a) ** 2 / s**2)))
    return float(val * mpmath.exp(-mpmath.mpf(k) * t))


def ball_quadrature(t, a, rho, diff=D):
    """Gaussian kernel integrated over the ball in spherical coordinates about its centre (scipy dblquad):
    radial x polar, azimuth analytic (2 pi)."""
    def integrand(theta, r):
        dist2 = rho * rho + r * r - 2 * rho * r * np.cos(theta)
        return 2 * np.pi * r * r * np.sin(theta) * np.exp(-dist2 / (4 * diff * t)) / (4 * np.pi * diff * t) ** 1.5
    val, _ = integrate.dblquad(integrand, 0.0, a, 0.0, np.pi, epsabs=0.0, epsrel=1e-11)
    return val


def assert_matches_printed(values, printed):
    """Each value agrees with a printed decimal string to within half a unit of its last printed digit."""
    for v, text in zip(values, printed, strict=True):
        mantissa = text.lower().split("e")[0]
        exponent = int(text.lower().split("e")[1]) if "e" in text.lower() else 0
        decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
        assert abs(v - float(text)) <= 0.5 * 10.0 ** (exponent - decimals) * (1 + 1e-9), (v, text)


# ---------------------------------------------------------------------------------------------- absorbing
def test_cdf_reference_check_points():
    # Yilmaz, Heren, Tugcu, Chae 2014 base case; expected recomputed with scipy.special, and that recomputation is
    # itself compared with the [computed] values printed in references.md (to their printed digits)
    times = np.array([0.01, 0.05, 0.1, 0.5, 1.0, 5.0, 10.0, 100.0])
    printed = ["3.628e-5", "0.0379957", "0.1047913", "0.2873561", "0.3457665", "0.4295801", "0.4500752",
               "0.4841751"]
    expected = ref_cdf(times)
    assert_matches_printed(expected, printed)
    np.testing.assert_allclose(np.asarray(lone.absorbing_cdf(times, R, GAP, D)), expected, rtol=1e-13)
    # with degradation (Heren, Yilmaz, Chae, Tugcu 2015), k = 1 and k = 10
    for k, tk, pk in [(1.0, [0.1, 0.5, 1.0, 5.0], ["0.09871589", "0.24295208", "0.27194864", "0.28524609"]),
                      (10.0, [0.1, 1.0], ["0.05898537", "0.08478944"])]:
        tk = np.array(tk)
        expected = ref_cdf(tk, k)
        assert_matches_printed(expected, pk)
        np.testing.assert_allclose(np.asarray(lone.absorbing_cdf(tk, R, GAP, D, k)), expected, rtol=1e-12)


@pytest.mark.parametrize("k", [0.0, 1e-9, 1e-4, 1.0, 30.0])
def test_cdf_equals_quadrature_of_density(k):
    # F(t) = int_0^t f(s) e^{-ks} ds, scipy.integrate.quad of the published density (Yilmaz 2014; Heren 2015)
    times = np.array([0.02, 0.3, 2.0, 40.0])
    got = np.asarray(lone.absorbing_cdf(times, R, GAP, D, k))
    for t, g in zip(times, got, strict=True):
        val, _ = integrate.quad(ref_density, 0.0, t, args=(k,), epsabs=0.0, epsrel=1e-12, limit=200,
                                points=[GAP**2 / (6 * D)] if t > GAP**2 / (6 * D) else None)
        assert g == pytest.approx(val, rel=1e-9)
    dens = np.asarray(lone.absorbing_density(times, R, GAP, D, k))
    np.testing.assert_allclose(dens, ref_density(times, k), rtol=1e-13)


def test_long_time_limit_and_peak():
    # eventual capture r/(r+d) and approach like t^(-1/2): survival ~ A d / sqrt(pi D t) (Redner 2001)
    big = np.array([1e8, 1e10, 1e12])
    surv = np.asarray(lone.absorbing_survival(big, R, GAP, D))
    np.testing.assert_allclose(surv, A * GAP / np.sqrt(np.pi * D * big), rtol=1e-6)
    np.testing.assert_allclose(np.asarray(lone.absorbing_cdf(big, R, GAP, D)), A - surv, rtol=1e-14)
    assert float(lone.absorbing_total(R, GAP, D)) == pytest.approx(A, rel=1e-15)
    # peak of the hitting density at d^2/(6D) (reference sheet), found with scipy.optimize
    res = optimize.minimize_scalar(lambda t: -float(lone.absorbing_density(t, R, GAP, D)),
                                   bounds=(0.01, 0.2), method="bounded", options={"xatol": 1e-10})
    assert res.x == pytest.approx(GAP**2 / (6 * D), rel=1e-5)
    assert -res.fun == pytest.approx(1.46903, rel=1e-5)  # f(t*) [computed] in references.md


@pytest.mark.parametrize("k", [1e-6, 0.3, 10.0, 1e3])
def test_degradation_limit_and_complement(k):
    # eventual capture r/(r+d) exp(-d sqrt(k/D)) (Heren et al. 2015)
    total = A * np.exp(-GAP * np.sqrt(k / D))
    assert float(lone.absorbing_total(R, GAP, D, k)) == pytest.approx(total, rel=1e-14)
    times = np.array([1e-3, 0.05, 0.5, 5.0, 500.0])
    cdf = np.asarray(lone.absorbing_cdf(times, R, GAP, D, k))
    surv = np.asarray(lone.absorbing_survival(times, R, GAP, D, k))
    np.testing.assert_allclose(cdf + surv, total, rtol=1e-13)
    # the complementary form: survival = int_t^inf f e^{-ks} ds (scipy quad), accurate even when tiny
    for t, s in zip(times, surv, strict=True):
        val, _ = integrate.quad(ref_density, t, np.inf, args=(k,), epsabs=0.0, epsrel=1e-12, limit=400)
        assert s == pytest.approx(val, rel=1e-8, abs=1e-300)


def test_cdf_at_zero_and_degradation_zero_is_exact():
    assert float(lone.absorbing_cdf(0.0, R, GAP, D)) == 0.0
    assert float(lone.absorbing_cdf(0.0, R, GAP, D, 2.0)) == 0.0
    t = np.array([0.01, 0.3, 7.0])
    # k = 0: exactly r/(r+d) erfc(d / sqrt(4 D t)) evaluated by the same jax erfc (Yilmaz et al. 2014)
    exact = A * jax.scipy.special.erfc(GAP / jnp.sqrt(4 * D * jnp.asarray(t)))
    got = np.asarray(lone.absorbing_cdf(t, R, GAP, D, 0.0))
    np.testing.assert_allclose(got, np.asarray(exact), rtol=1e-14)  # rounding only


# ---------------------------------------------------------------------------------------------- passive
def test_passive_reference_points_and_ball_quadrature():
    # [computed] values of references.md, recomputed here with the numpy erfc form
    times = np.array([0.05, 0.1, 0.5, 1.0, 5.0])
    printed = ["1.470909e-2", "3.248426e-2", "2.369626e-2", "1.168294e-2", "1.382684e-3"]
    assert_matches_printed(ref_passive(times, 5e-6, 10e-6), printed)
    np.testing.assert_allclose(np.asarray(lone.passive_probability(times, 5e-6, 10e-6, D)),
                               ref_passive(times, 5e-6, 10e-6), rtol=1e-12)
    # direct 3-D quadrature of the Gaussian kernel over the ball (scipy dblquad), sources outside, inside, at the
    # centre, and a small sphere at a late time (series branch)
    cases = [(0.05, 5e-6, 10e-6), (2.0, 5e-6, 10e-6), (0.02, 5e-6, 2e-6), (0.3, 5e-6, 0.0), (60.0, 0.4e-6, 10e-6),
             (0.01, 1e-6, 30e-6)]
    for t, a, rho in cases:
        expected = ball_quadrature(t, a, rho)
        got = float(lone.passive_probability(t, a, rho, D))
        assert got == pytest.approx(expected, rel=1e-9), (t, a, rho)
        got_k = float(lone.passive_probability(t, a, rho, D, 0.8))
        assert got_k == pytest.approx(expected * np.exp(-0.8 * t), rel=1e-9)
    # peak at 0.17524 s with 0.038773 ([computed], references.md), located with scipy.optimize
    res = optimize.minimize_scalar(lambda t: -float(lone.passive_probability(t, 5e-6, 10e-6, D)),
                                   bounds=(0.05, 0.5), method="bounded", options={"xatol": 1e-9})
    assert res.x == pytest.approx(0.17524, rel=1e-4)
    assert -res.fun == pytest.approx(0.038773, rel=1e-4)


def test_passive_series_branch_is_continuous_and_accurate():
    # late times: compare with mpmath at 50 digits (the erfc form evaluated without cancellation)
    import mpmath

    mpmath.mp.dps = 50
    a, rho = 2e-6, 7e-6
    for t in [1.0, 30.0, 2e3, 1e6]:
        s = mpmath.sqrt(4 * mpmath.mpf(D) * t)
        ra, rr = mpmath.mpf(a), mpmath.mpf(rho)
        exact = (0.5 * (mpmath.erfc((rr - ra) / s) - mpmath.erfc((rr + ra) / s))
                 - mpmath.sqrt(mpmath.mpf(D) * t / mpmath.pi) / rr
                 * (mpmath.exp(-(rr - ra) ** 2 / s**2) - mpmath.exp(-(rr + ra) ** 2 / s**2)))
        assert float(lone.passive_probability(t, a, rho, D)) == pytest.approx(float(exact), rel=1e-12)


# ---------------------------------------------------------------------------------------------- lone_hits
EM = np.array([[0.0, 0.0, 0.0], [3e-6, -2e-6, 1e-6]])
CE = np.array([[11e-6, 0.0, 0.0], [0.0, 14e-6, 0.0], [-2e-6, 1e-6, 0.0]])
RA = np.array([5e-6, 3e-6, 4e-6])
PA = np.array([False, False, True])
OFF = np.array([0.05, 0.05, 0.07])
SHORT, LONG = 6, 1500  # the two memories used (one compilation each)


def test_hits_match_slot_integrals_and_sum_to_eventual_capture():
    ts, mem = 0.05, LONG
    for k in (0.0, 2.0):
        hits, tail = (np.asarray(v) for v in lone.lone_hits(EM, CE, RA, PA, OFF, D, k, ts, memory=mem))
        assert hits.shape == (2, 3, mem + 1) and tail.shape == (2, 3)
        for i in range(2):
            for j in range(2):  # absorbing receivers
                d = np.linalg.norm(EM[i] - CE[j]) - RA[j]
                total = RA[j] / (RA[j] + d) * np.exp(-d * np.sqrt(k / D))  # Heren et al. 2015
                assert hits[i, j].sum() + tail[i, j] == pytest.approx(total, rel=1e-13)
                # each slot = quad of the density over the slot (Yilmaz 2014), early and late slots alike
                for lag in (0, 1, 7, 300, mem):
                    val, _ = integrate.quad(ref_density, lag * ts, (lag + 1) * ts, args=(k, RA[j], d),
                                            epsabs=0.0, epsrel=1e-12)
                    assert hits[i, j, lag] == pytest.approx(val, rel=1e-10)
                val, _ = integrate.quad(ref_density, (mem + 1) * ts, np.inf, args=(k, RA[j], d), epsabs=0.0,
                                        epsrel=1e-12, limit=400)
                assert tail[i, j] == pytest.approx(val, rel=1e-9)
            # passive receiver: P(l Ts + offset), numpy erfc form (the source is inside this sphere for emitter 0)
            rho = np.linalg.norm(EM[i] - CE[2])
            times = np.arange(mem + 1) * ts + OFF[2]
            # (the numpy form itself cancels at late lags, ~1e-16 (s/a)^2: 1e-9 there; mpmath at 40 digits exactly)
            np.testing.assert_allclose(hits[i, 2], ref_passive(times, RA[2], rho, k=k), rtol=1e-9)
            for lag in (0, 300, mem):
                assert hits[i, 2, lag] == pytest.approx(mp_passive(times[lag], RA[2], rho, k), rel=1e-12)


def test_late_slots_without_cancellation():
    # slot 1500 of a lone absorbing sphere: F((l+1)Ts) - F(l Ts) against mpmath at 40 digits (Yilmaz 2014)
    import mpmath

    mpmath.mp.dps = 40
    ts, mem = 0.1, LONG
    hits, tail = lone.lone_hits(EM, CE, RA, PA, OFF, D, 0.0, ts, memory=mem)
    d = mpmath.mpf(np.linalg.norm(EM[0] - CE[0]) - RA[0])
    amp = mpmath.mpf(RA[0]) / (mpmath.mpf(RA[0]) + d)
    f = lambda t: amp * mpmath.erfc(d / mpmath.sqrt(4 * mpmath.mpf(D) * t))  # noqa: E731
    assert float(hits[0, 0, mem]) == pytest.approx(float(f(mpmath.mpf(ts) * (mem + 1)) - f(mpmath.mpf(ts) * mem)),
                                                   rel=1e-12)
    assert float(tail[0, 0]) == pytest.approx(float(amp - f(mpmath.mpf(ts) * (mem + 1))), rel=1e-13)


@pytest.mark.parametrize("k", [0.0, 0.05, 3.0])
def test_passive_tail_against_long_sum(k):
    # brute force: the numpy erfc form summed term by term (10^6 terms for k = 0, then the rest from the large-t
    # expansion P ~ V (4 pi D t)^-1.5 (1 - b/t), b = (rho^2 + 3 a^2/5)/(4D) (Pizzetti's ball-mean formula applied
    # to the Gaussian kernel), integrated, plus the Euler-Maclaurin half term; its error ~ (b/t)^2 of ~1e-3)
    ts, mem = 0.1, SHORT
    hits, tail = lone.lone_hits(EM, CE, RA, np.array([True, True, True]), OFF, D, k, ts, memory=mem)
    pairs = [(0, 0), (1, 1)] if k == 0.0 else [(i, j) for i in range(2) for j in range(3)]
    for i, j in pairs:
        rho = np.linalg.norm(EM[i] - CE[j])
        n = 10**6 if k == 0.0 else int(60 / (k * ts))
        times = np.arange(mem + 1, mem + 1 + n) * ts + OFF[j]
        brute = np.sum(ref_passive(times, RA[j], rho, k=k))
        if k == 0.0:
            c = 4 / 3 * np.pi * RA[j] ** 3 * (4 * np.pi * D) ** -1.5
            b = (rho**2 + 0.6 * RA[j] ** 2) / (4 * D)
            t_end = (mem + 1 + n) * ts + OFF[j]
            brute += c * (2 * t_end**-0.5 - 2 / 3 * b * t_end**-1.5) / ts + 0.5 * c * t_end**-1.5
        # k > 0: the long sum is complete (e^-60 left), so only rounding separates the two; k = 0: the brute
        # force's own error (the numpy form cancels as ~1e-16 (s/a)^2 at late times, plus its remainder) is ~1e-10
        assert float(tail[i, j]) == pytest.approx(brute, rel=1e-9 if k == 0.0 else 1e-12), (i, j)


# ---------------------------------------------------------------------------------------------- derivatives
def central(f, x, h):
    return (f(x + h) - f(x - h)) / (2 * h)


@pytest.mark.parametrize("k", [0.0, 1e-7, 0.7])
def test_cdf_and_passive_gradients_vs_finite_differences(k):
    args = np.array([0.2, R, GAP, D, k])
    for fn, pt in ((lone.absorbing_cdf, args), (lone.passive_probability, np.array([0.2, 3e-6, 9e-6, D, k])),
                   (lone.passive_probability, np.array([0.04, 4e-6, 2e-6, D, k]))):
        grads = jax.grad(lambda p, fn=fn: fn(*p))(jnp.asarray(pt))
        assert np.all(np.isfinite(grads))
        for n in range(5):
            def along(v, n=n, fn=fn, pt=pt):
                q = pt.copy()
                q[n] = v
                return float(fn(*q))
            if n == 4 and k == 0.0:  # k >= 0 only: second-order one-sided difference
                h = 1e-4
                fd = (-3 * along(0.0) + 4 * along(h) - along(2 * h)) / (2 * h)
                assert float(grads[n]) == pytest.approx(fd, rel=1e-5, abs=1e-12)
                continue
            h = 1e-5 * abs(pt[n]) if pt[n] != 0 else 1e-6
            if n == 4:
                h = k / 2 if k < 1e-3 else 1e-5 * k
            assert float(grads[n]) == pytest.approx(central(along, pt[n], h), rel=2e-6, abs=1e-12), (fn, n)


def test_lone_hits_gradients_vs_finite_differences():
    ts, mem = 0.08, SHORT
    rng = np.random.default_rng(1)
    wh, wt = rng.uniform(0.5, 1.5, (2, 3, mem + 1)), rng.uniform(0.5, 1.5, (2, 3))
    em = EM + np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 30e-6]])  # emitter 1 outside the passive sphere
    scales = [1e-6, 1e-6, 1e-6, 1e-2, D, 1.0, ts]  # parameter scales for the finite-difference steps

    @jax.jit
    def objectives(em, ce, ra, off, diff, k, tsi):
        h, t = lone.lone_hits(em, ce, ra, PA, off, diff, k, tsi, memory=mem)
        return jnp.sum(h * wh), jnp.sum(t * wt)

    def both(*a):
        oh, ot = objectives(*a)
        return oh + ot, oh

    grad_fn = jax.jit(jax.jacrev(both, argnums=tuple(range(7))))
    for k in (0.9, 0.0):
        p = [em, CE, RA, OFF, D, k, ts]
        g_all, g_hits = grad_fn(*p)
        for which, grads in (("all", g_all), ("hits", g_hits)):
            for n, g in enumerate(grads):
                g = np.atleast_1d(np.asarray(g)).ravel()
                assert np.all(np.isfinite(g)), (which, n)
                flat = np.atleast_1d(np.asarray(p[n], dtype=float)).ravel()
                for idx in range(flat.size):
                    def along(v, n=n, idx=idx, which=which, p=p, flat=flat):
                        q = list(p)
                        arr = flat.copy()
                        arr[idx] = v
                        q[n] = arr.reshape(np.shape(p[n])) if np.ndim(p[n]) else float(arr[0])
                        oh, ot = objectives(*q)
                        return float(oh + ot) if which == "all" else float(oh)
                    x0 = flat[idx]
                    if n == 5 and k == 0.0:
                        if which == "all":  # d tail / dk = -inf at k = 0: returned as a huge negative number
                            assert g[idx] < -1e100
                            continue
                        h = 1e-5  # k >= 0 only: second-order one-sided difference
                        fd = (-3 * along(0.0) + 4 * along(h) - along(2 * h)) / (2 * h)
                        assert g[idx] == pytest.approx(fd, rel=1e-5)
                        continue
                    h = 1e-5 * max(abs(x0), scales[n])
                    fd = central(along, x0, h)
                    assert g[idx] == pytest.approx(fd, rel=1e-5, abs=1e-7 * abs(fd) + 1e-9 / scales[n]), \
                        (which, k, n, idx)


def test_jit_vmap_and_no_recompile():
    traces = []

    @jax.jit
    def run(em, ce, ra, off, diff, k, ts):
        traces.append(1)
        return lone.lone_hits(em, ce, ra, PA, off, diff, k, ts, memory=SHORT)

    h1, _ = run(EM, CE, RA, OFF, D, 0.0, 0.1)
    h2, _ = run(EM * 1.1, CE, RA * 0.9, OFF, 2 * D, 0.5, 0.2)  # new values, same shapes
    assert len(traces) == 1
    assert not np.allclose(h1, h2)
    # vmap over times of absorbing_cdf equals the array call (the closed form of Yilmaz et al. via ref_cdf)
    times = jnp.linspace(0.01, 3.0, 7)
    v = jax.vmap(lambda t: lone.absorbing_cdf(t, R, GAP, D, 0.4))(times)
    np.testing.assert_allclose(np.asarray(v), ref_cdf(np.asarray(times), 0.4), rtol=1e-12)
    size = lone.lone_hits._cache_size()
    lone.lone_hits(EM, CE, RA, PA, OFF, D, 0.1, 0.1, memory=SHORT)
    lone.lone_hits(EM * 0.5, CE, RA, PA, OFF, 3 * D, 0.2, 0.3, memory=SHORT)
    assert lone.lone_hits._cache_size() <= size + 1


# ---------------------------------------------------------------------------------------------- first slots
def _mp_absorbing_cdf(t, k, r, d, diff):
    """F_k(t) at 300 digits (Heren, Yilmaz, Chae, Tugcu, IEEE TMBMC 1(2), 2015; Yilmaz et al. 2014 for k = 0);
    enough digits that slot differences down to 1e-250 keep full relative accuracy."""
    import mpmath

    mpmath.mp.dps = 300
    t, k, r, d, diff = (mpmath.mpf(float(v)) for v in (t, k, r, d, diff))
    if t == 0:
        return mpmath.mpf(0)
    x, s, q = d / mpmath.sqrt(4 * diff * t), mpmath.sqrt(k * t), d * mpmath.sqrt(k / diff)
    return r / (r + d) * (mpmath.exp(-q) * mpmath.erfc(x - s) + mpmath.exp(q) * mpmath.erfc(x + s)) / 2


@pytest.mark.parametrize("k", [0.0, 0.8, 10.0])
@pytest.mark.parametrize("ts", [0.05, 0.5, 5.0, 50.0])
def test_every_slot_against_the_closed_form_including_first_slots_holding_most_of_the_mass(k, ts):
    # one emitter at the origin, an absorbing sphere r = 5 um centred 10 um away, D = 79.4 um^2/s: at Ts >= 0.5 s
    # the first slot holds most of what is eventually captured, the case where slot 0 was once wrong for k > 0.
    # Reference: F_k((l+1)Ts) - F_k(l Ts) at 300 digits (Heren et al. 2015), tail = limit - F_k((L+1)Ts).
    import mpmath

    mem = 4
    em, ce, ra = np.zeros((1, 3)), np.array([[10e-6, 0.0, 0.0]]), np.array([5e-6])
    hits, tail = (np.asarray(v) for v in lone.lone_hits(em, ce, ra, np.array([False]), np.array([0.0]), D, k, ts,
                                                        memory=mem))
    d = 5e-6
    f = [_mp_absorbing_cdf(l * ts, k, 5e-6, d, D) for l in range(mem + 2)]
    limit = mpmath.mpf(5e-6) / (mpmath.mpf(5e-6) + mpmath.mpf(d)) * mpmath.exp(-mpmath.mpf(d)
                                                                            * mpmath.sqrt(mpmath.mpf(k) / D))
    expected = np.array([float(f[l + 1] - f[l]) for l in range(mem + 1)])
    np.testing.assert_allclose(hits[0, 0], expected, rtol=1e-9)
    assert tail[0, 0] == pytest.approx(float(limit - f[-1]), rel=1e-9)
    assert hits[0, 0].sum() + tail[0, 0] == pytest.approx(float(limit), rel=1e-12)
    # the survival at t = 0 is the whole eventual capture (nothing has arrived yet)
    assert float(lone.absorbing_survival(0.0, 5e-6, d, D, k)) == pytest.approx(float(limit), rel=1e-14)


@pytest.mark.parametrize("k", [0.0, 3.0])
@pytest.mark.parametrize("rho_um", [0.0, 3.0, 12.0])
def test_passive_first_samples_at_and_after_release(k, rho_um):
    # passive sphere a = 5 um sampled at l Ts (offset 0: the first sample is at the release instant, where the
    # count is 1 inside the sphere and 0 outside) and at l Ts + 1 ms; reference: the erfc form at 40 digits
    # (reference sheet, passive sphere; setting of Noel, Cheung, Schober 2013).
    ts, mem = 0.2, 3
    em, ce, ra = np.zeros((1, 3)), np.array([[rho_um * 1e-6, 0.0, 0.0]]), np.array([5e-6])
    for off in (0.0, 1e-3):
        hits, _ = lone.lone_hits(em, ce, ra, np.array([True]), np.array([off]), D, k, ts, memory=mem)
        hits = np.asarray(hits)[0, 0]
        for l in range(mem + 1):
            t = l * ts + off
            if t == 0.0:
                assert hits[l] == (1.0 if rho_um < 5.0 else 0.0)
            elif rho_um == 0.0:  # centre: P = erf(a/s) - 2 a/(s sqrt(pi)) exp(-a^2/s^2), the rho -> 0 limit
                import mpmath

                mpmath.mp.dps = 40
                s, a = mpmath.sqrt(4 * mpmath.mpf(D) * t), mpmath.mpf(5e-6)
                ref = (mpmath.erf(a / s) - 2 * a / (s * mpmath.sqrt(mpmath.pi)) * mpmath.exp(-a**2 / s**2)) \
                    * mpmath.exp(-k * t)
                assert hits[l] == pytest.approx(float(ref), rel=1e-9)
            else:
                assert hits[l] == pytest.approx(mp_passive(t, 5e-6, rho_um * 1e-6, k), rel=1e-9)
