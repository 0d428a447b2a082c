"""A lone partially absorbing (reactive) sphere: closed-form reaction-time law of a point source outside it.

Setting: sphere of radius ``a``, point source at centre distance ``R0 = a + d``, diffusion ``D``, first-order
degradation ``k`` in the bulk, and the radiation (Robin, Collins-Kimball) boundary condition ``D dc/dn = kappa c``
on the surface: a molecule that touches the sphere reacts (and is counted) at the finite rate ``kappa`` (m/s).
``kappa -> infinity`` is the absorbing sphere of :mod:`capacity.physics.lone`.

Laplace transform of the reaction-time density (``s`` the Laplace variable, ``q = sqrt((s + k)/D)``)::

    f~(s) = a/R0 * kappa a / (kappa a + D (1 + a q)) * exp(-d q)

(the exterior solution ``a/r exp(-(r-a) q)`` of ``(s + k) u = D Lap u`` times the coefficient fixed by the Robin
condition). With ``beta = (D + kappa a) / (a sqrt(D))`` (1/sqrt(s)), ``P = a/R0 * kappa / sqrt(D)`` and the
variables ``xi = d / sqrt(4 D t)``, ``sigma = sqrt(k t)``, ``eta = beta sqrt(t)``, the inversion by partial fractions
in ``sqrt(s + k)`` and the pair ``L^-1[exp(-x sqrt(s)) / (s (sqrt(s) + c))]`` (Carslaw & Jaeger, *Conduction of
Heat in Solids*, 2nd ed. 1959, Appendix V [memory]; Abramowitz & Stegun 29.3.89 [memory]) gives the CDF::

    F(t) = P [ e^(-2 xi sigma) erfc(xi - sigma) / (2 (beta + sqrt k))
               - e^(-xi^2 - k t) ( erfcx(xi + eta) / (2 (beta + sqrt k)) + sqrt(t)/2 * DD(xi + sigma, xi + eta) ) ]

``DD(y1, y2) = (erfcx(y2) - erfcx(y1)) / (y2 - y1)`` is the divided difference of erfcx (its series about the
midpoint when ``y2 - y1`` is small), which removes the removable singularity at ``beta = sqrt(k)``. For
``xi >= sigma`` the first term is ``e^(-xi^2 - k t) erfcx(xi - sigma)`` and the whole CDF is
``-P sqrt(t)/2 e^(-xi^2 - k t) [DD(xi - sigma, xi + eta) + DD(xi + sigma, xi + eta)]`` (no overflow, no
cancellation early). Without degradation it is ``a/R0 * kappa a/(D + kappa a) [erfc(xi) - e^(-xi^2) erfcx(xi +
eta)]``, the classical Collins-Kimball result (Collins & Kimball, J. Colloid Sci. 4, 1949 [memory]); the same
partially absorbing receiver is analysed in molecular communication by Deng, Noel, Elkashlan, Nallanathan &
Cheung, "Modeling and simulation of molecular communication systems with a reversible adsorption receiver",
IEEE Trans. Mol. Biol. Multi-Scale Commun. 1(4), 2015 (their no-desorption special case). The eventual reaction
probability is ``f~(0) = a/R0 * kappa a / (kappa a + D + a sqrt(k D)) * exp(-d sqrt(k/D))``; the part still to come
after ``t`` (:func:`reactive_survival`) is written as a sum of positive terms, so late slots and tails keep their
relative accuracy. Checked against numerical Laplace inversion (mpmath) in tests/test_reactive.py.
"""

from __future__ import annotations

import math
from functools import partial

import jax
import jax.numpy as jnp
from jax.scipy.special import erf, erfc

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics._special import erfcx

_TWO_OVER_SQRT_PI = 2.0 / math.sqrt(math.pi)
#: below this step the divided difference of erfcx uses its Taylor series about the midpoint (error ~ h^6)
_DD_SERIES = 1e-3
#: stand-in for xi = d / sqrt(4 D t) at t = 0 (exp(-xi^2) underflows to exactly 0)
_XI_AT_ZERO = 1e3




def _erfcx_divided_difference(y1, y2):
    """``(erfcx(y2) - erfcx(y1)) / (y2 - y1)`` for ``y1, y2 >= 0``; series about the midpoint for close points.

    Series: ``E'(m) + h^2/24 E'''(m) + h^4/1920 E^(5)(m)`` (``h = y2 - y1``, ``m`` the midpoint), with the erfcx
    derivatives from ``E' = 2 m E - 2/sqrt(pi)``, ``E^(n+1) = 2 m E^(n) + 2 n E^(n-1)``.
    """
    h = y2 - y1
    close = jnp.abs(h) < _DD_SERIES
    direct = (erfcx(y2) - erfcx(y1)) / jnp.where(close, 1.0, h)
    m = 0.5 * (y1 + y2)
    e0 = erfcx(m)
    e1 = 2.0 * m * e0 - _TWO_OVER_SQRT_PI
    e2 = 2.0 * m * e1 + 2.0 * e0
    e3 = 2.0 * m * e2 + 4.0 * e1
    e4 = 2.0 * m * e3 + 6.0 * e2
    e5 = 2.0 * m * e4 + 8.0 * e3
    series = e1 + h * h / 24.0 * e3 + h**4 / 1920.0 * e5
    return jnp.where(close, series, direct)


def _variables(t, radius, gap, diffusion, degradation, rate):
    pos = t > 0.0
    ts = jnp.where(pos, t, 1.0)
    xi = jnp.where(pos, gap / jnp.sqrt(4.0 * diffusion * ts), _XI_AT_ZERO)
    tt = jnp.where(pos, t, 0.0)
    root_k = jnp.sqrt(degradation)
    beta = (diffusion + rate * radius) / (radius * jnp.sqrt(diffusion))
    sigma = jnp.sqrt(degradation * tt)
    eta = beta * jnp.sqrt(tt)
    amp = radius / (radius + gap) * rate / jnp.sqrt(diffusion)
    return pos, xi, sigma, eta, beta, root_k, amp, tt


def _cdf_and_survival(t, radius, gap, diffusion, degradation, rate):
    """(F(t), eventual - F(t)) of the module docstring, both as sums without catastrophic cancellation."""
    pos, xi, sigma, eta, beta, root_k, amp, tt = _variables(t, radius, gap, diffusion, degradation, rate)
    e = jnp.exp(-xi * xi - degradation * tt)
    half_t = 0.5 * jnp.sqrt(tt)
    dd_plus = _erfcx_divided_difference(xi + sigma, xi + eta)
    early = xi >= sigma
    # F for xi >= sigma: -P sqrt(t)/2 e [DD(xi - sigma, xi + eta) + DD(xi + sigma, xi + eta)]
    dd_minus = _erfcx_divided_difference(jnp.where(early, xi - sigma, xi + sigma), xi + eta)
    f_early = -amp * half_t * e * (dd_minus + dd_plus)
    # F for xi < sigma: the first term as exp(-2 xi sigma) erfc(xi - sigma) (erfc of a negative argument <= 2)
    first = jnp.exp(-2.0 * xi * sigma) * erfc(xi - sigma) / (2.0 * (beta + root_k))
    rest = e * (erfcx(xi + eta) / (2.0 * (beta + root_k)) + half_t * dd_plus)
    f_late = amp * (first - rest)
    cdf = jnp.where(early, f_early, f_late)
    # part still to come: P [exp(-2 xi sigma) erfc(sigma - xi) / (2 (beta + sqrt k)) + rest], each term >= 0
    # (erfc(sigma - xi) = 1 + erf(xi - sigma) = 2 - erfc(xi - sigma); for xi < sigma via erfcx, no overflow)
    lead = jnp.where(early, jnp.exp(-2.0 * xi * sigma) * (1.0 + erf(xi - sigma)),
                     e * erfcx(jnp.where(early, 0.0, sigma - xi)))
    survival = amp * (lead / (2.0 * (beta + root_k)) + rest)
    # k = 0: the cancellation-free form P/beta [erf(xi) + e erfcx(xi + eta)]
    survival = jnp.where(degradation == 0.0, amp / beta * (erf(xi) + e * erfcx(xi + eta)), survival)
    total = reactive_total(radius, gap, diffusion, degradation, rate)
    return jnp.where(pos, cdf, 0.0), jnp.where(pos, survival, total)


def _as_f64(*values):
    return [jnp.asarray(v, dtype=jnp.float64) for v in values]


@jax.jit
def reactive_total(radius, gap, diffusion, degradation, rate):
    """Eventual reaction probability ``a/(a+d) * kappa a / (kappa a + D + a sqrt(k D)) * exp(-d sqrt(k/D))``.

    radius : a, m. gap : d, m (source to SURFACE). diffusion : D, m^2/s. degradation : k, 1/s. rate : kappa, m/s.
    """
    radius, gap, diffusion, degradation, rate = _as_f64(radius, gap, diffusion, degradation, rate)
    root = jnp.sqrt(degradation * diffusion)
    return (radius / (radius + gap) * rate * radius / (rate * radius + diffusion + radius * root)
            * jnp.exp(-gap * jnp.sqrt(degradation / diffusion)))


@jax.jit
def reactive_cdf(t, radius, gap, diffusion, degradation, rate):
    """Fraction of the released molecules that have reacted with a lone reactive sphere by time ``t``.

    t : s (array; t <= 0 gives 0). radius : a, m. gap : d, m, from the point source to the sphere SURFACE (> 0).
    diffusion : D, m^2/s. degradation : k, 1/s (>= 0). rate : kappa, m/s (> 0), Robin condition
    ``D dc/dn = kappa c``. Formula in the module docstring; broadcasts over its arguments. Dimensionless.
    """
    t, radius, gap, diffusion, degradation, rate = _as_f64(t, radius, gap, diffusion, degradation, rate)
    return _cdf_and_survival(t, radius, gap, diffusion, degradation, rate)[0]


@jax.jit
def reactive_survival(t, radius, gap, diffusion, degradation, rate):
    """Fraction that reacts AFTER ``t``: :func:`reactive_total` minus :func:`reactive_cdf`, without cancellation.

    Arguments as :func:`reactive_cdf`.
    """
    t, radius, gap, diffusion, degradation, rate = _as_f64(t, radius, gap, diffusion, degradation, rate)
    return _cdf_and_survival(t, radius, gap, diffusion, degradation, rate)[1]


@jax.jit
def reactive_density(t, radius, gap, diffusion, degradation, rate):
    """Reaction-time density, 1/s: ``P e^(-k t) [e^(-xi^2)/sqrt(pi t) - beta e^(-xi^2) erfcx(xi + eta)]``.

    (``L^-1[exp(-x sqrt(s))/(sqrt(s) + beta)]``, Carslaw & Jaeger Appendix V [memory], shifted by ``k``.) Arguments
    as :func:`reactive_cdf`.
    """
    t, radius, gap, diffusion, degradation, rate = _as_f64(t, radius, gap, diffusion, degradation, rate)
    pos, xi, _, eta, beta, _, amp, tt = _variables(t, radius, gap, diffusion, degradation, rate)
    ts = jnp.where(pos, tt, 1.0)
    e = jnp.exp(-xi * xi - degradation * tt)
    f = amp * e * (1.0 / jnp.sqrt(jnp.pi * ts) - beta * erfcx(xi + eta))
    return jnp.where(pos, f, 0.0)


def _pair(emitter, centre, radius, rate, diffusion, degradation, symbol_interval, memory):
    diff = emitter - centre
    gap = jnp.sqrt(jnp.sum(diff * diff)) - radius
    edges = jnp.arange(memory + 2, dtype=jnp.float64) * symbol_interval
    cdf, surv = _cdf_and_survival(edges, radius, gap, diffusion, degradation, rate)
    hits = jnp.where(cdf[1:] <= surv[1:], cdf[1:] - cdf[:-1], surv[:-1] - surv[1:])
    return hits, surv[-1]


@partial(jax.jit, static_argnames=("memory",))
def reactive_hits(emitters, centres, radii, rates, diffusion, degradation, symbol_interval, memory: int):
    """Slot reaction probabilities of every emitter and lone reactive sphere.

    emitters : (E, 3) m. centres : (R, 3) m. radii : (R,) m. rates : (R,) kappa, m/s. diffusion : m^2/s.
    degradation : 1/s. symbol_interval : Ts, s. memory : L (static).

    Returns ``(hits (E, R, L+1), tail (E, R))``: ``hits[l] = F((l+1) Ts) - F(l Ts)`` (a difference of F early
    and of the survival late), ``tail`` the reaction probability after ``(L+1) Ts``.
    """
    emitters, centres, radii, rates = _as_f64(emitters, centres, radii, rates)
    diffusion, degradation, symbol_interval = _as_f64(diffusion, degradation, symbol_interval)
    one = partial(_pair, diffusion=diffusion, degradation=degradation, symbol_interval=symbol_interval,
                  memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0))
    return jax.vmap(over_receivers, in_axes=(0, None, None, None))(emitters, centres, radii, rates)
