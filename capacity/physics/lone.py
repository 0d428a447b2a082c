"""The ``lone`` response model: closed forms for one sphere on its own in an unbounded 3-D fluid.

Public functions (JAX, float64, differentiable in every argument, ``jit``/``vmap`` friendly):

* :func:`absorbing_cdf`, :func:`absorbing_density`, :func:`absorbing_total` -- a fully absorbing sphere;
* :func:`passive_probability` -- a passive (transparent) sphere;
* :func:`lone_hits` -- slot hit probabilities and tails for every emitter-receiver pair.

Absorbing sphere, radius r, gap d from the point source to the SURFACE, diffusion D, degradation k
(Yilmaz, Heren, Tugcu, Chae, IEEE Commun. Lett. 18(6), 2014; Redner, *A Guide to First-Passage Processes*, 2001;
with degradation Heren, Yilmaz, Chae, Tugcu, IEEE Trans. Mol. Biol. Multi-Scale Commun. 1(2), 2015)::

    F(t) = r/(r+d) * Phi(x, w),   x = d / sqrt(4 D t),   w = k t,   sigma = sqrt(w),   q = 2 x sigma = d sqrt(k/D)
    Phi  = 1/2 [exp(-q) erfc(x - sigma) + exp(q) erfc(x + sigma)]      (= erfc(x) when k = 0)
    eventual capture r/(r+d) exp(-q);   Phic = exp(-q) - Phi  (the part still to come).

Phi is evaluated with ``erfcx`` (the growing term as erfcx(x+sigma) exp(-x^2 - w), never exp(q) alone) and Phic
by a complementary form (erf(x) when k = 0), so that early values, late values and slot differences keep
their relative accuracy. Phi is an even function of sigma, hence smooth in w = k t; its derivatives are supplied
by a custom JVP built on ``beta(x, sigma) = [erfcx(x-sigma) - erfcx(x+sigma)] exp(-x^2-w) / (2 sigma)``::

    dPhi/dx = -2 w beta - (2/sqrt(pi)) exp(-x^2 - w),      dPhi/dw = -x beta

(a Taylor series in sigma below 1e-3), so the gradient with respect to k is finite at k = 0. Only the eventual
capture and the tails have an infinite k-derivative at k = 0 (the mean hitting time is infinite): their
gradient with respect to ``degradation`` is -inf there (and finite everywhere else, in every other argument).
"""

from __future__ import annotations

import math
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import erf, erfc, erfcx

from capacity import _jax  # noqa: F401  (float64)

_TWO_OVER_SQRT_PI = 2.0 / math.sqrt(math.pi)
#: below this sigma = sqrt(k t) the divided difference beta uses its Taylor series (error ~ sigma^6 / 5040)
_SIGMA_SERIES = 1e-3
#: stand-in for x = d / sqrt(4 D t) at t = 0 (exp(-x^2) underflows to exactly 0)
_X_AT_ZERO = 1e3
#: passive tails: explicit terms after lag L before the Euler-Maclaurin remainder; Gauss-Legendre nodes
PASSIVE_TAIL_TERMS = 1024
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(64)
_GL_V, _GL_W = 0.5 * (_GL_NODES + 1.0), 0.5 * _GL_WEIGHTS  # nodes and weights on (0, 1)


# ---------------------------------------------------------------------------------------------- Phi, Phic
def _phi_value(x, w):
    """Phi(x, w) of the module docstring, without overflow (value only)."""
    s = jnp.sqrt(w)
    e = jnp.exp(-x * x - w)
    ge = x >= s
    early = 0.5 * e * (erfcx(jnp.where(ge, x - s, 0.0)) + erfcx(x + s))
    late = jnp.exp(-2.0 * x * s) - 0.5 * e * (erfcx(jnp.where(ge, 0.0, s - x)) - erfcx(s + x))
    return jnp.where(w == 0.0, erfc(x), jnp.where(ge, early, late))


def _phic_value(x, w):
    """Phic = exp(-2 x sqrt(w)) - Phi, by a form without cancellation in each region (value only)."""
    s = jnp.sqrt(w)
    e = jnp.exp(-x * x - w)
    below = x < s
    small = x < 0.5
    b1 = 0.5 * e * (erfcx(jnp.where(below, s - x, 0.0)) - erfcx(s + x))
    xs, ss = jnp.where(small, x, 0.0), jnp.where(small, s, 0.0)
    b2 = -jnp.sinh(2.0 * xs * ss) + 0.5 * (jnp.exp(-2.0 * xs * ss) * erf(xs - ss) + jnp.exp(2.0 * xs * ss) * erf(xs + ss))
    b3 = jnp.exp(-2.0 * x * s) - 0.5 * e * (erfcx(jnp.where(below, 0.0, x - s)) + erfcx(x + s))
    general = jnp.where(below, b1, jnp.where(small, b2, b3))
    return jnp.where(w == 0.0, erf(x), general)


def _beta(x, w):
    """[erfcx(x-s) - erfcx(x+s)] exp(-x^2-w) / (2 s), s = sqrt(w) >= 0 (>= 0, smooth, even in s)."""
    s = jnp.sqrt(w)
    e = jnp.exp(-x * x - w)
    # Taylor series in s: erfcx derivatives from y' = 2 x y - 2/sqrt(pi), y^(n+1) = 2 x y^(n) + 2 n y^(n-1)
    y0 = erfcx(x)
    y1 = 2.0 * x * y0 - _TWO_OVER_SQRT_PI
    y2 = 2.0 * x * y1 + 2.0 * y0
    y3 = 2.0 * x * y2 + 4.0 * y1
    y4 = 2.0 * x * y3 + 6.0 * y2
    y5 = 2.0 * x * y4 + 8.0 * y3
    series = -e * (y1 + w * y3 / 6.0 + w * w * y5 / 120.0)
    big = s >= _SIGMA_SERIES
    sb = jnp.where(big, s, 1.0)
    ge = x >= sb
    b_early = e * (erfcx(jnp.where(ge, x - sb, 0.0)) - erfcx(x + sb))
    b_late = 2.0 * jnp.exp(-2.0 * x * sb) - e * (erfcx(jnp.where(ge, 0.0, sb - x)) + erfcx(sb + x))
    direct = jnp.where(ge, b_early, b_late) / (2.0 * sb)
    return jnp.where(big, direct, series)


def _phi_partials(x, w):
    beta = _beta(x, w)
    dx = -2.0 * w * beta - _TWO_OVER_SQRT_PI * jnp.exp(-x * x - w)
    dw = -x * beta
    return dx, dw


@jax.custom_jvp
def _phi(x, w):
    return _phi_value(x, w)


@_phi.defjvp
def _phi_jvp(primals, tangents):
    x, w = primals
    xd, wd = tangents
    dx, dw = _phi_partials(x, w)
    return _phi_value(x, w), dx * xd + dw * wd


@jax.custom_jvp
def _phic(x, w, q):
    """Phic(x, w); q = 2 x sqrt(w) is passed separately so that only q carries the sqrt(k) singularity."""
    del q
    return _phic_value(x, w)


@_phic.defjvp
def _phic_jvp(primals, tangents):
    x, w, q = primals
    xd, wd, qd = tangents
    dx, dw = _phi_partials(x, w)
    return _phic_value(x, w), -jnp.exp(-q) * qd - dx * xd - dw * wd


@jax.custom_jvp
def _slot(x1, w1, x2, w2):
    """Phi(x2, w2) - Phi(x1, w1) for t1 < t2: the difference of Phi early on, of Phic late (no cancellation)."""
    p1, p2 = _phi_value(x1, w1), _phi_value(x2, w2)
    c1, c2 = _phic_value(x1, w1), _phic_value(x2, w2)
    return jnp.where(p2 <= c2, p2 - p1, c1 - c2)


@_slot.defjvp
def _slot_jvp(primals, tangents):
    x1, w1, x2, w2 = primals
    x1d, w1d, x2d, w2d = tangents
    a1, b1 = _phi_partials(x1, w1)
    a2, b2 = _phi_partials(x2, w2)
    return _slot(x1, w1, x2, w2), a2 * x2d + b2 * w2d - a1 * x1d - b1 * w1d


def _as_f64(*values):
    return [jnp.asarray(v, dtype=jnp.float64) for v in values]


def _x_w(t, gap, diffusion, degradation):
    """x = d/sqrt(4 D t) and w = k t, with t = 0 mapped to a finite x whose exp(-x^2) is exactly 0."""
    pos = t > 0.0
    ts = jnp.where(pos, t, 1.0)
    x = jnp.where(pos, gap / jnp.sqrt(4.0 * diffusion * ts), _X_AT_ZERO)
    return x, degradation * jnp.where(pos, t, 0.0)


def _q(gap, diffusion, degradation):
    return gap * jnp.sqrt(degradation) / jnp.sqrt(diffusion)


# ---------------------------------------------------------------------------------------------- absorbing
def absorbing_cdf(t, radius, gap, diffusion, degradation=0.0):
    """Fraction of the released molecules absorbed by a lone absorbing sphere by time ``t``.

    t : s (array, broadcast against the others; t <= 0 gives 0). radius : r, m. gap : d, m, from the point
    source to the sphere SURFACE (> 0). diffusion : D, m^2/s. degradation : k, 1/s (>= 0).
    Formula: ``r/(r+d) * Phi`` (module docstring); Yilmaz et al. 2014 (k = 0), Heren et al. 2015 (k > 0).
    k = 0 gives exactly ``r/(r+d) erfc(d / sqrt(4 D t))``. Dimensionless, same shape as the broadcast inputs.
    """
    t, radius, gap, diffusion, degradation = _as_f64(t, radius, gap, diffusion, degradation)
    x, w = _x_w(t, gap, diffusion, degradation)
    return jnp.where(t > 0.0, radius / (radius + gap) * _phi(x, w), 0.0)


def absorbing_survival(t, radius, gap, diffusion, degradation=0.0):
    """Fraction absorbed AFTER ``t``: eventual capture minus :func:`absorbing_cdf`, computed without cancellation.

    Arguments as :func:`absorbing_cdf`. ``r/(r+d) * Phic``; equals ``r/(r+d) erf(d/sqrt(4 D t))`` when k = 0.
    """
    t, radius, gap, diffusion, degradation = _as_f64(t, radius, gap, diffusion, degradation)
    x, w = _x_w(t, gap, diffusion, degradation)
    return radius / (radius + gap) * _phic(x, w, _q(gap, diffusion, degradation))


def absorbing_density(t, radius, gap, diffusion, degradation=0.0):
    """Hitting-time density of a lone absorbing sphere, 1/s: ``r/(r+d) d/sqrt(4 pi D t^3) exp(-d^2/(4Dt) - k t)``.

    Arguments as :func:`absorbing_cdf` (Yilmaz et al. 2014; the factor exp(-k t): Heren et al. 2015).
    """
    t, radius, gap, diffusion, degradation = _as_f64(t, radius, gap, diffusion, degradation)
    pos = t > 0.0
    ts = jnp.where(pos, t, 1.0)
    f = (radius / (radius + gap) * gap / jnp.sqrt(4.0 * jnp.pi * diffusion * ts**3)
         * jnp.exp(-gap * gap / (4.0 * diffusion * ts) - degradation * ts))
    return jnp.where(pos, f, 0.0)


def absorbing_total(radius, gap, diffusion, degradation=0.0):
    """Eventual capture probability ``r/(r+d) exp(-d sqrt(k/D))`` (Heren et al. 2015; r/(r+d) for k = 0).

    Its derivative with respect to ``degradation`` is -inf at k = 0 (infinite mean hitting time).
    """
    radius, gap, diffusion, degradation = _as_f64(radius, gap, diffusion, degradation)
    return radius / (radius + gap) * jnp.exp(-_q(gap, diffusion, degradation))


# ---------------------------------------------------------------------------------------------- passive
def _passive_undegraded(t, radius, distance, diffusion):
    """P(t) without degradation for t > 0 (safe everywhere: no NaN for distance = 0 or inside the sphere)."""
    s2 = 4.0 * diffusion * t
    s = jnp.sqrt(s2)
    a, rho = radius, distance
    # exact erfc form: 1/2[erfc((rho-a)/s) - erfc((rho+a)/s)] - sqrt(Dt/pi) e^{-(rho-a)^2/s^2} (4a/s^2) g(4 rho a/s^2)
    z = 4.0 * rho * a / s2
    tiny = z < 1e-6
    zs = jnp.where(tiny, 1.0, z)
    g = jnp.where(tiny, 1.0 - z / 2.0 + z * z / 6.0, -jnp.expm1(-zs) / zs)
    exact = (0.5 * (erfc((rho - a) / s) - erfc((rho + a) / s))
             - jnp.sqrt(diffusion * t / jnp.pi) * jnp.exp(-((rho - a) ** 2) / s2) * (4.0 * a / s2) * g)
    # small sphere / late time: ball-mean expansion V [G + a^2/10 lap G + a^4/280 lap^2 G + a^6/15120 lap^3 G]
    eps2 = a * a / s2
    u = rho * rho / s2
    poly = (1.0 + eps2 * (4.0 * u - 6.0) / 10.0 + eps2**2 * (16.0 * u * u - 80.0 * u + 60.0) / 280.0
            + eps2**3 * (64.0 * u**3 - 672.0 * u * u + 1680.0 * u - 840.0) / 15120.0)
    series = (4.0 / 3.0) * jnp.pi * a**3 * (jnp.pi * s2) ** -1.5 * jnp.exp(-u) * poly
    use_series = eps2 * jnp.maximum(1.0, u) < 4e-4
    return jnp.where(use_series, series, exact)


def passive_probability(t, radius, distance, diffusion, degradation=0.0):
    """Probability that a molecule released at time 0 is inside a passive sphere at time ``t``.

    t : s (t <= 0 gives 1 if the source is inside the sphere, else 0). radius : a, m. distance : rho, m, from the
    source to the sphere CENTRE (>= 0; the source may be inside). diffusion : D, m^2/s. degradation : k, 1/s.
    Formula (the Gaussian kernel integrated over the ball; setting of Noel, Cheung, Schober, ICC 2013)::

        P = exp(-k t) {1/2 [erfc((rho-a)/s) - erfc((rho+a)/s)]
                       - sqrt(D t/pi)/rho [exp(-(rho-a)^2/s^2) - exp(-(rho+a)^2/s^2)]},   s = sqrt(4 D t)

    the second bracket written as exp(-(rho-a)^2/s^2) (1 - exp(-z))/z * 4 a/s^2 (z = 4 rho a / s^2), which removes
    the singularity at rho = 0. When a/s is small (late times) the two terms cancel (relative error ~ 1e-16 s^2/a^2),
    so there the ball-mean (Pizzetti) series to a^6 is used (switch at (a/s)^2 max(1, rho^2/s^2) < 4e-4, series
    error below ~1e-15 relative). Dimensionless.
    """
    t, radius, distance, diffusion, degradation = _as_f64(t, radius, distance, diffusion, degradation)
    pos = t > 0.0
    ts = jnp.where(pos, t, 1.0)
    p = _passive_undegraded(ts, radius, distance, diffusion) * jnp.exp(-degradation * ts)
    return jnp.where(pos, p, jnp.where(distance < radius, 1.0, 0.0))


def _passive_tail(radius, distance, diffusion, degradation, symbol_interval, start, terms: int):
    """sum_{j >= 0} P(start + j Ts): ``terms`` explicit terms, then Euler-Maclaurin for the rest.

    Remainder from t_K = start + terms*Ts: (1/Ts) int_{t_K}^inf P + P(t_K)/2 - Ts P'(t_K)/12 + Ts^3 P'''/720, with
    int P = int m + int (P - m); m(t) = c t^-1.5 exp(-b/t - k t) (c = V (4 pi D)^-1.5, b = (rho^2 + 3a^2/5)/(4D))
    matches P to first order in 1/t and is integrated in closed form (c sqrt(pi/b) Phic(sqrt(b/t_K), k t_K)); the
    correction int (P - m) (O(t^-2.5)) by 64-point Gauss-Legendre in v, t = t_K / v^2 (a smooth integrand).
    Derivatives of P in the EM terms are those of m (their error is second order in b/t_K and Ts/t_K).
    """
    j = jnp.arange(terms, dtype=jnp.float64)
    explicit = jnp.sum(passive_probability(start + j * symbol_interval, radius, distance, diffusion, degradation))
    tk = start + float(terms) * symbol_interval
    vol = 4.0 / 3.0 * jnp.pi * radius**3
    c = vol * (4.0 * jnp.pi * diffusion) ** -1.5
    b = (distance**2 + 0.6 * radius**2) / (4.0 * diffusion)

    def model(t):
        return c * t**-1.5 * jnp.exp(-b / t - degradation * t)

    q = 2.0 * jnp.sqrt(b) * jnp.sqrt(degradation)
    int_model = c * jnp.sqrt(jnp.pi / b) * _phic(jnp.sqrt(b / tk), degradation * tk, q)
    v = jnp.asarray(_GL_V)
    tv = tk / v**2
    corr = jnp.sum(jnp.asarray(_GL_W) * (passive_probability(tv, radius, distance, diffusion, degradation)
                                           - model(tv)) * 2.0 * tk / v**3)
    m = model(tk)
    h = -1.5 / tk + b / tk**2 - degradation  # m'/m
    dh = 1.5 / tk**2 - 2.0 * b / tk**3
    ddh = -3.0 / tk**3 + 6.0 * b / tk**4
    m1 = m * h
    m3 = m * (h**3 + 3.0 * h * dh + ddh)
    p_k = passive_probability(tk, radius, distance, diffusion, degradation)
    remainder = ((int_model + corr) / symbol_interval + 0.5 * p_k - symbol_interval / 12.0 * m1
                 + symbol_interval**3 / 720.0 * m3)
    return explicit + remainder


# ---------------------------------------------------------------------------------------------- all pairs
def _pair_hits(emitter, centre, radius, passive, offset, diffusion, degradation, symbol_interval, memory):
    diff = emitter - centre
    sq = jnp.sum(diff * diff)
    rho = jnp.where(sq > 0.0, jnp.sqrt(jnp.where(sq > 0.0, sq, 1.0)), 0.0)
    # absorbing: slot l covers [l Ts, (l+1) Ts)
    gap = jnp.where(passive, radius, rho - radius)
    edges = jnp.arange(memory + 2, dtype=jnp.float64) * symbol_interval
    x, w = _x_w(edges, gap, diffusion, degradation)
    amp = radius / (radius + gap)
    absorb = amp * _slot(x[:-1], w[:-1], x[1:], w[1:])
    absorb_tail = amp * _phic(x[-1], w[-1], _q(gap, diffusion, degradation))
    # passive: sampled at l Ts + offset
    times = edges[:-1] + offset
    samples = passive_probability(times, radius, rho, diffusion, degradation)
    sample_tail = _passive_tail(radius, rho, diffusion, degradation, symbol_interval,
                                edges[-1] + offset, PASSIVE_TAIL_TERMS)
    return jnp.where(passive, samples, absorb), jnp.where(passive, sample_tail, absorb_tail)


@partial(jax.jit, static_argnames=("memory",))
def lone_hits(emitters, centres, radii, passive, sample_offsets, diffusion, degradation, symbol_interval,
              memory: int):
    """Slot hit probabilities of every emitter-receiver pair, each receiver treated as if alone.

    emitters : (E, 3) m. centres : (R, 3) m. radii : (R,) m. passive : (R,) bool. sample_offsets : (R,) s, sampling
    instant of each passive receiver within its slot (ignored for absorbing ones). diffusion : m^2/s.
    degradation : 1/s. symbol_interval : Ts, s. memory : L (static int).

    Returns ``(hits, tail)``: hits (E, R, L+1), tail (E, R), dimensionless.
    Absorbing: ``hits[l] = F((l+1)Ts) - F(l Ts)`` evaluated as a difference of Phi early and of Phic late (no
    cancellation); ``tail = r/(r+d) Phic((L+1) Ts)`` (eventual capture minus the kept sum, in complementary
    form). An emitter in or on an absorbing sphere gives NaN (validate first).
    Passive: ``hits[l] = P(l Ts + offset)``; ``tail = sum_{l > L} P(l Ts + offset)``, 1024 explicit terms and an
    Euler-Maclaurin remainder (see ``_passive_tail``; relative error measured below 1e-10 against long sums).
    Written for one pair and vmapped over receivers, then emitters. The tails' derivative with respect to
    ``degradation`` is -inf at k = 0; every other derivative is finite.
    """
    emitters, centres, radii, sample_offsets = _as_f64(emitters, centres, radii, sample_offsets)
    diffusion, degradation, symbol_interval = _as_f64(diffusion, degradation, symbol_interval)
    passive = jnp.asarray(passive, dtype=bool)
    one = partial(_pair_hits, diffusion=diffusion, degradation=degradation, symbol_interval=symbol_interval,
                  memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0, 0))
    over_emitters = jax.vmap(over_receivers, in_axes=(0, None, None, None, None))
    return over_emitters(emitters, centres, radii, passive, sample_offsets)
