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
capture and the tails have an infinite k-derivative at k = 0 (the mean hitting time is infinite): there their
gradient with respect to ``degradation`` is returned as the derivative at k = 1e-300, a huge negative number
(~ -1e149 x scale), so that no 0 * inf = NaN reaches any other derivative. Everything else is finite.

Accuracy (measured in tests/test_lone.py): CDF, slots and tails to ~1e-12 relative against scipy quadrature and
40-digit mpmath (slot 1500 included); passive values to ~1e-12 against mpmath and a 3-D quadrature; passive
tails to ~1e-9 or better against long explicit sums.
"""

from __future__ import annotations

import math
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import erf, erfc

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics._special import erfcx

_TWO_OVER_SQRT_PI = 2.0 / math.sqrt(math.pi)
#: below this sigma = sqrt(k t) the divided difference beta uses its Taylor series (error ~ sigma^6 / 5040)
_SIGMA_SERIES = 1e-3
#: stand-in for x = d / sqrt(4 D t) at t = 0 (exp(-x^2) underflows to exactly 0)
_X_AT_ZERO = 1e3
#: passive sphere: 4 D t (m^2) below which t counts as 0 (the t -> 0+ limit), well above the float64 underflow
_S2_AT_ZERO = 1e-280
#: passive tails: explicit terms after lag L before the Euler-Maclaurin remainder; Gauss-Legendre nodes
PASSIVE_TAIL_TERMS = 1024
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(64)
_GL_V, _GL_W = 0.5 * (_GL_NODES + 1.0), 0.5 * _GL_WEIGHTS  # nodes and weights on (0, 1)


# ---------------------------------------------------------------------------------------------- Phi, Phic
def _core(x, w):
    """Phi, Phic and beta at (x, w), sharing one set of special-function calls (values only).

    Phi without overflow; Phic = exp(-2 x sqrt(w)) - Phi by a form without cancellation in each region
    (erf(x) when w = 0); beta = [erfcx(x-s) - erfcx(x+s)] exp(-x^2-w) / (2 s) >= 0, s = sqrt(w), smooth and even
    in s (Taylor series below s = 1e-3, erfcx derivatives from y' = 2xy - 2/sqrt(pi),
    y^(n+1) = 2x y^(n) + 2n y^(n-1)).
    """
    s = jnp.sqrt(w)
    e = jnp.exp(-x * x - w)
    eq = jnp.exp(-2.0 * x * s)
    ge = x >= s
    ym = erfcx(jnp.abs(x - s))
    yp = erfcx(x + s)
    zero = w == 0.0
    phi = jnp.where(zero, erfc(x), jnp.where(ge, 0.5 * e * (ym + yp), eq - 0.5 * e * (ym - yp)))
    small = x < 0.5
    xs, ss = jnp.where(small, x, 0.0), jnp.where(small, s, 0.0)
    xss = 2.0 * xs * ss
    b2 = -jnp.sinh(xss) + 0.5 * (jnp.exp(-xss) * erf(xs - ss) + jnp.exp(xss) * erf(xs + ss))
    early = jnp.where(small, b2, eq - 0.5 * e * (ym + yp))
    phic = jnp.where(zero, erf(x), jnp.where(ge, early, 0.5 * e * (ym - yp)))
    big = s >= _SIGMA_SERIES
    bb = jnp.where(ge, e * (ym - yp), 2.0 * eq - e * (ym + yp))
    direct = bb / (2.0 * jnp.where(big, s, 1.0))
    y0 = erfcx(x)
    y1 = 2.0 * x * y0 - _TWO_OVER_SQRT_PI
    y2 = 2.0 * x * y1 + 2.0 * y0
    y3 = 2.0 * x * y2 + 4.0 * y1
    y4 = 2.0 * x * y3 + 6.0 * y2
    y5 = 2.0 * x * y4 + 8.0 * y3
    series = -e * (y1 + w * y3 / 6.0 + w * w * y5 / 120.0)
    beta = jnp.where(big, direct, series)
    return phi, phic, beta


def _partials(x, w, beta):
    """dPhi/dx and dPhi/dw (module docstring)."""
    return -2.0 * w * beta - _TWO_OVER_SQRT_PI * jnp.exp(-x * x - w), -x * beta


@jax.custom_jvp
def _phi_pair(x, w, q):
    """(Phi, Phic) at (x, w); q = 2 x sqrt(w) = d sqrt(k/D) is passed separately so that only q carries the
    sqrt(k) singularity of the eventual capture exp(-q) (Phic's derivative), and so that Phic at t = 0 (w = 0,
    q > 0) is the eventual capture exp(-q); Phi itself is smooth in w. Pass q = 0 when only Phi is used."""
    phi, phic, _ = _core(x, w)
    return phi, _complement_at_zero_w(phi, phic, w, q)


@_phi_pair.defjvp
def _phi_pair_jvp(primals, tangents):
    x, w, q = primals
    xd, wd, qd = tangents
    phi, phic, beta = _core(x, w)
    phic = _complement_at_zero_w(phi, phic, w, q)
    dx, dw = _partials(x, w, beta)
    dphi = dx * xd + dw * wd
    return (phi, phic), (dphi, -jnp.exp(-q) * qd - dphi)


def _complement_at_zero_w(phi, phic, w, q):
    """Phic where w = k t = 0 although q = d sqrt(k/D) > 0, i.e. at t = 0 with degradation: exp(-q) - Phi.

    ``_core`` only sees (x, w) and returns erf(x) for w = 0, right when k = 0 but not at t = 0 with k > 0, where
    nothing has arrived yet and the part still to come is the whole eventual capture exp(-q) (minus Phi = erfc(x),
    which is exactly 0 there). Away from t = 0, w = 0 means k = 0 and q = 0, and erf(x) is kept.
    """
    return jnp.where((w == 0.0) & (q > 0.0), jnp.exp(-q) - phi, phic)


def _as_f64(*values):
    return [jnp.asarray(v, dtype=jnp.float64) for v in values]


def _x_w(t, gap, diffusion, degradation):
    """x = d/sqrt(4 D t) and w = k t, with t = 0 mapped to a finite x whose exp(-x^2) is exactly 0."""
    pos = t > 0.0
    ts = jnp.where(pos, t, 1.0)
    x = jnp.where(pos, gap / jnp.sqrt(4.0 * diffusion * ts), _X_AT_ZERO)
    return x, degradation * jnp.where(pos, t, 0.0)


@jax.custom_jvp
def _sqrt_rate(k):
    """sqrt(k) for k >= 0 whose derivative at k = 0 is that at k = 1e-300 (~5e149) instead of +inf.

    Only the eventual capture and the tails depend on sqrt(k) non-smoothly; the true derivative at k = 0 is
    infinite. A huge finite value keeps zero tangents and zero cotangents from turning into NaN (0 * inf).
    """
    return jnp.sqrt(k)


@_sqrt_rate.defjvp
def _sqrt_rate_jvp(primals, tangents):
    (k,), (kd,) = primals, tangents
    return jnp.sqrt(k), 0.5 / jnp.sqrt(jnp.maximum(k, 1e-300)) * kd


def _q(gap, diffusion, degradation):
    return gap * _sqrt_rate(degradation) / jnp.sqrt(diffusion)


# ---------------------------------------------------------------------------------------------- absorbing
@jax.jit
def absorbing_cdf(t, radius, gap, diffusion, degradation=0.0):
    """Fraction of the released molecules absorbed by a lone absorbing sphere by time ``t``.

    t : s (array, broadcast against the others; t <= 0 gives 0). radius : r, m. gap : d, m, from the point
    source to the sphere SURFACE (> 0). diffusion : D, m^2/s. degradation : k, 1/s (>= 0).
    Formula: ``r/(r+d) * Phi`` (module docstring); Yilmaz et al. 2014 (k = 0), Heren et al. 2015 (k > 0).
    k = 0 gives exactly ``r/(r+d) erfc(d / sqrt(4 D t))``. Dimensionless, same shape as the broadcast inputs.
    """
    t, radius, gap, diffusion, degradation = _as_f64(t, radius, gap, diffusion, degradation)
    x, w = _x_w(t, gap, diffusion, degradation)
    phi, _ = _phi_pair(x, w, jnp.zeros_like(x))  # q only enters Phic's derivative
    return jnp.where(t > 0.0, radius / (radius + gap) * phi, 0.0)


@jax.jit
def absorbing_survival(t, radius, gap, diffusion, degradation=0.0):
    """Fraction absorbed AFTER ``t``: eventual capture minus :func:`absorbing_cdf`, computed without cancellation.

    Arguments as :func:`absorbing_cdf`. ``r/(r+d) * Phic``; equals ``r/(r+d) erf(d/sqrt(4 D t))`` when k = 0.
    """
    t, radius, gap, diffusion, degradation = _as_f64(t, radius, gap, diffusion, degradation)
    x, w = _x_w(t, gap, diffusion, degradation)
    _, phic = _phi_pair(x, w, _q(gap, diffusion, degradation))
    return radius / (radius + gap) * phic


@jax.jit
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


@jax.jit
def absorbing_total(radius, gap, diffusion, degradation=0.0):
    """Eventual capture probability ``r/(r+d) exp(-d sqrt(k/D))`` (Heren et al. 2015; r/(r+d) for k = 0).

    Its derivative with respect to ``degradation`` is -inf at k = 0 (infinite mean hitting time); it is returned
    as the derivative at k = 1e-300 (a huge finite negative number), see the module docstring.
    """
    radius, gap, diffusion, degradation = _as_f64(radius, gap, diffusion, degradation)
    return radius / (radius + gap) * jnp.exp(-_q(gap, diffusion, degradation))


# ---------------------------------------------------------------------------------------------- passive
def _passive_undegraded(t, radius, distance, diffusion):
    """P(t) without degradation for t > 0 (safe everywhere: no NaN for distance = 0 or inside the sphere)."""
    s2 = 4.0 * diffusion * t
    s = jnp.sqrt(s2)
    a, rho = radius, distance
    # exact erfc form:
    # 1/2[erfc((rho-a)/s) - erfc((rho+a)/s)] - sqrt(Dt/pi) e^{-(rho-a)^2/s^2} (4a/s^2) g(4 rho a/s^2)
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


@jax.jit
def passive_probability(t, radius, distance, diffusion, degradation=0.0):
    """Probability that a molecule released at time 0 is inside a passive sphere at time ``t``.

    t : s (t <= 0 gives 1 if the source is inside the sphere, else 0). radius : a, m. distance : rho, m, from the
    source to the sphere CENTRE (>= 0; the source may be inside). diffusion : D, m^2/s. degradation : k, 1/s.
    Formula (the Gaussian kernel integrated over the ball; setting of Noel, Cheung, Schober, ICC 2013)::

        P = exp(-k t) {1/2 [erfc((rho-a)/s) - erfc((rho+a)/s)]
                       - sqrt(D t/pi)/rho [exp(-(rho-a)^2/s^2) - exp(-(rho+a)^2/s^2)]},   s = sqrt(4 D t)

    the second bracket written as exp(-(rho-a)^2/s^2) (1 - exp(-z))/z * 4 a/s^2 (z = 4 rho a / s^2), which removes
    the singularity at rho = 0. When a/s is small (late times) the two terms cancel (relative error
    ~ 1e-16 s^2/a^2),
    so there the ball-mean (Pizzetti) series to a^6 is used (switch at (a/s)^2 max(1, rho^2/s^2) < 4e-4, series
    error below ~1e-15 relative). Dimensionless.
    """
    t, radius, distance, diffusion, degradation = _as_f64(t, radius, distance, diffusion, degradation)
    # 4 D t below _S2_AT_ZERO (e.g. t = 1e-300 s) counts as t = 0: the spread is then far below any length, the
    # t -> 0+ limit is exact, and 4 D t would otherwise underflow to 0 (0 * inf = NaN in the closed form)
    pos = (t > 0.0) & (4.0 * diffusion * t > _S2_AT_ZERO)
    ts = jnp.where(pos, t, 1.0)
    p = _passive_undegraded(ts, radius, distance, diffusion) * jnp.exp(-degradation * ts)
    return jnp.where(pos, p, jnp.where(distance < radius, 1.0, 0.0))


def _passive_tail_times(start, symbol_interval, terms: int):
    """Times where :func:`_passive_tail` needs P: ``terms`` explicit samples, t_K, t_K + Ts, quadrature nodes."""
    tk = start + float(terms) * symbol_interval
    explicit = start + jnp.arange(terms, dtype=jnp.float64) * symbol_interval
    return jnp.concatenate([explicit, tk[None], (tk + symbol_interval)[None], tk / jnp.asarray(_GL_V) ** 2])


def _passive_model_point(radius, distance, diffusion, degradation, symbol_interval, start, terms: int):
    """(x, w, q) at which :func:`_passive_tail` needs Phic: (sqrt(b/t_K), k t_K, 2 sqrt(b k)); also b (s)."""
    tk = start + float(terms) * symbol_interval
    b = (distance**2 + 0.6 * radius**2) / (4.0 * diffusion)
    return jnp.sqrt(b / tk), degradation * tk, 2.0 * jnp.sqrt(b) * _sqrt_rate(degradation), b


def _passive_tail(values, phic_model, radius, distance, diffusion, degradation, symbol_interval, start,
                  terms: int):
    """sum_{j >= 0} P(start + j Ts) from P at :func:`_passive_tail_times` (``values``) and ``phic_model`` =
    Phic at :func:`_passive_model_point`.

    ``terms`` explicit terms, then the Euler-Maclaurin remainder from t_K = start + terms*Ts:
    (1/Ts) int_{t_K}^inf P + P(t_K)/2 - Ts P^(1)(t_K)/12 + Ts^3 P^(3)(t_K)/720, with int P = int m + int (P - m);
    m(t) = c t^-1.5 exp(-b/t - k t) (c = V (4 pi D)^-1.5, b = (rho^2 + 3a^2/5)/(4D)) matches P to first order in
    1/t and is integrated in closed form (c sqrt(pi/b) Phic(sqrt(b/t_K), k t_K), the absorbing-sphere integral);
    the correction int (P - m) = O(t_K^-2.5) by 64-point Gauss-Legendre in v, t = t_K / v^2 (smooth integrand).
    P' from a central difference of the samples, P''' from m (a term of relative size (Ts/t_K)^3 already).
    """
    explicit, p_k, p_next, p_gl = values[:terms], values[terms], values[terms + 1], values[terms + 2:]
    tk = start + float(terms) * symbol_interval
    c = 4.0 / 3.0 * jnp.pi * radius**3 * (4.0 * jnp.pi * diffusion) ** -1.5
    b = (distance**2 + 0.6 * radius**2) / (4.0 * diffusion)

    def model(t):
        return c * t**-1.5 * jnp.exp(-b / t - degradation * t)

    int_model = c * jnp.sqrt(jnp.pi / b) * phic_model
    v = jnp.asarray(_GL_V)
    corr = jnp.sum(jnp.asarray(_GL_W) * (p_gl - model(tk / v**2)) * 2.0 * tk / v**3)
    m = model(tk)
    h = -1.5 / tk + b / tk**2 - degradation  # m'/m and its derivatives
    dh = 1.5 / tk**2 - 2.0 * b / tk**3
    ddh = -3.0 / tk**3 + 6.0 * b / tk**4
    # P'(t_K) by the central difference (P(t_K+Ts) - P(t_K-Ts)) / (2 Ts) = P' + Ts^2 P'''/6 + ...; its Ts^2 term is
    # folded into the P''' coefficient: -Ts/12 P' + Ts^3/720 P''' = -Ts/12 CD + 11 Ts^3/720 P'''
    cd = (p_next - explicit[-1]) / (2.0 * symbol_interval)
    remainder = ((int_model + corr) / symbol_interval + 0.5 * p_k - symbol_interval / 12.0 * cd
                 + 11.0 * symbol_interval**3 / 720.0 * m * (h**3 + 3.0 * h * dh + ddh))
    return jnp.sum(explicit) + remainder


# ---------------------------------------------------------------------------------------------- all pairs
def _pair_hits(emitter, centre, radius, passive, offset, diffusion, degradation, symbol_interval, memory):
    diff = emitter - centre
    sq = jnp.sum(diff * diff)
    rho = jnp.where(sq > 0.0, jnp.sqrt(jnp.where(sq > 0.0, sq, 1.0)), 0.0)
    # absorbing: slot l covers [l Ts, (l+1) Ts); passive: sampled at l Ts + offset
    gap = jnp.where(passive, radius, rho - radius)
    edges = jnp.arange(memory + 2, dtype=jnp.float64) * symbol_interval
    x, w = _x_w(edges, gap, diffusion, degradation)
    start = edges[-1] + offset
    xm, wm, qm, _ = _passive_model_point(radius, rho, diffusion, degradation, symbol_interval, start,
                                         PASSIVE_TAIL_TERMS)
    # one evaluation of Phi/Phic for the slot edges and the passive remainder's model integral
    q = jnp.concatenate([jnp.broadcast_to(_q(gap, diffusion, degradation), x.shape), qm[None]])
    phi, phic = _phi_pair(jnp.concatenate([x, xm[None]]), jnp.concatenate([w, wm[None]]), q)
    amp = radius / (radius + gap)
    p, c = phi[:-1], phic[:-1]
    # difference of Phi early, of Phic late (no cancellation; the exp(-q) parts of the derivatives cancel exactly)
    absorb = amp * jnp.where(p[1:] <= c[1:], p[1:] - p[:-1], c[:-1] - c[1:])
    absorb_tail = amp * c[-1]
    times = jnp.concatenate([edges[:-1] + offset, _passive_tail_times(start, symbol_interval, PASSIVE_TAIL_TERMS)])
    values = passive_probability(times, radius, rho, diffusion, degradation)
    samples = values[: memory + 1]
    sample_tail = _passive_tail(values[memory + 1:], phic[-1], radius, rho, diffusion, degradation,
                                symbol_interval, start, PASSIVE_TAIL_TERMS)
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
    ``degradation`` is -inf at k = 0, returned as a huge finite negative number; every other derivative is finite
    (hits included, at k = 0 too).
    """
    emitters, centres, radii, sample_offsets = _as_f64(emitters, centres, radii, sample_offsets)
    diffusion, degradation, symbol_interval = _as_f64(diffusion, degradation, symbol_interval)
    passive = jnp.asarray(passive, dtype=bool)
    one = partial(_pair_hits, diffusion=diffusion, degradation=degradation, symbol_interval=symbol_interval,
                  memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0, 0))
    over_emitters = jax.vmap(over_receivers, in_axes=(0, None, None, None, None))
    return over_emitters(emitters, centres, radii, passive, sample_offsets)
