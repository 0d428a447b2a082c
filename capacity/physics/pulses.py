"""Rectangular release pulses: the molecules of one release leave at times spread uniformly over ``[0, T]``.

The response to such a release is the impulse response averaged over the release time: a molecule counted by time
``t`` has probability ``C(t) = (1/T) int_0^T F(t - tau) dtau = [G(t) - G(t - T)] / T`` with ``F`` the impulse
CDF and ``G(t) = int_0^t F(s) ds`` (``G = 0`` for ``t <= 0``). Slot probabilities are differences of ``C`` at the
slot edges; the tail is the eventual capture minus ``C`` at the horizon. ``T = 0`` is the impulse.

* Lone absorbing sphere (closed form, our integration of the Yilmaz et al. / Heren et al. CDF): with
  ``F = A Phi(x, w)`` (``A = r/(r+d)``, ``x = d/sqrt(4Dt)``, ``w = k t``, notation of :mod:`capacity.physics.lone`)
  and ``G(t) = t F(t) - int_0^t s f(s) ds``, the last integral is
  ``A d/sqrt(4 pi D) int_0^t s^(-1/2) exp(-d^2/(4Ds) - k s) ds = A x t beta(x, w)``, so::

      G(t) = A t [Phi(x, w) - x beta(x, w)],    beta = [e^(-2xs) erfc(x-s) - e^(2xs) erfc(x+s)] / (2s), s = sqrt(w)

  (``k = 0``: ``G = A t [(1 + 2x^2) erfc(x) - 2x e^(-x^2)/sqrt(pi)]``). Derivatives by a custom JVP:
  ``dbeta/dx = -2 Phi`` and ``dbeta/dw = (e^(-x^2-w)/sqrt(pi) - beta/2 - x Phi) / w`` (from ``dG/dt = F``), by its
  Taylor series in ``w`` below ``w = 1e-3``.
* Lone passive sphere: the sample ``(1/T) int_0^T P(t_s - tau) dtau`` by composite Gauss-Legendre quadrature over
  the release window (:data:`PASSIVE_PANELS` panels of 8 nodes; ``P`` is smooth, its error is measured in
  tests/test_pulses.py), and the tail by 8-node Gauss-Legendre over the release time of the impulse tail.
* Shadowed model: ``G`` is the inverse Laplace transform of ``P~(p)/p^2`` (fixed Talbot contour, as the impulse
  model inverts ``P~(p)/p``), evaluated at the slot edges and at the edges minus ``T``; no delay factor enters the
  contour.
* Particles: each molecule draws its own release time uniformly in ``[0, T]`` (the kernel starts it with a
  fractional first step), which is exact.
"""

from __future__ import annotations

import math
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics import lone as _lone
from capacity.physics._laplace import eventual_capture, solve_transforms, talbot_nodes

__all__ = ["absorbing_cdf_integral", "laplace_hits", "lone_pulse_hits", "shadowed_pulse_hits"]

_SQRT_PI = math.sqrt(math.pi)
#: below this w = k t, dbeta/dw uses its Taylor series (the direct form loses ~1e-16/w to cancellation)
_BETA_W_SERIES = 1e-3
#: panels of the composite 8-node Gauss-Legendre rule over the release window (passive spheres)
PASSIVE_PANELS = 32
_GL8, _GW8 = np.polynomial.legendre.leggauss(8)
_GL8_V, _GL8_W = 0.5 * (_GL8 + 1.0), 0.5 * _GW8  # nodes and weights on (0, 1)


# ----------------------------------------------------------------------------------- H = Phi - x beta and its JVP
def _h_parts(x, w):
    phi, _, beta = _lone._core(x, w)
    return phi, beta


@jax.custom_jvp
def _h(x, w):
    """``Phi(x, w) - x beta(x, w)``: ``G(t) / (A t)`` (module docstring)."""
    phi, beta = _h_parts(x, w)
    return phi - x * beta


@_h.defjvp
def _h_jvp(primals, tangents):
    x, w = primals
    xd, wd = tangents
    phi, beta = _h_parts(x, w)
    e = jnp.exp(-x * x - w)
    phi_x = -2.0 * w * beta - 2.0 / _SQRT_PI * e
    phi_w = -x * beta
    beta_x = -2.0 * phi
    big = w >= _BETA_W_SERIES
    y0 = jax.scipy.special.erfcx(x)
    y1 = 2.0 * x * y0 - 2.0 / _SQRT_PI
    y2 = 2.0 * x * y1 + 2.0 * y0
    y3 = 2.0 * x * y2 + 4.0 * y1
    y4 = 2.0 * x * y3 + 6.0 * y2
    y5 = 2.0 * x * y4 + 8.0 * y3
    y6 = 2.0 * x * y5 + 10.0 * y4
    y7 = 2.0 * x * y6 + 12.0 * y5
    series = -beta - e * (y3 / 6.0 + w * y5 / 60.0 + w * w * y7 / 1680.0)
    direct = (e / _SQRT_PI - 0.5 * beta - x * phi) / jnp.where(big, w, 1.0)
    beta_w = jnp.where(big, direct, series)
    h_x = phi_x - beta - x * beta_x
    h_w = phi_w - x * beta_w
    return phi - x * beta, h_x * xd + h_w * wd


@jax.jit
def absorbing_cdf_integral(t, radius, gap, diffusion, degradation=0.0):
    """``G(t) = int_0^t F(s) ds`` (seconds) for a lone absorbing sphere, ``F`` = :func:`lone.absorbing_cdf`.

    Arguments as :func:`capacity.physics.lone.absorbing_cdf` (t in s, lengths in m, D in m^2/s, k in 1/s);
    ``t <= 0`` gives 0. Formula in the module docstring.
    """
    t, radius, gap, diffusion, degradation = _lone._as_f64(t, radius, gap, diffusion, degradation)
    x, w = _lone._x_w(t, gap, diffusion, degradation)
    ts = jnp.where(t > 0.0, t, 0.0)
    return jnp.where(t > 0.0, radius / (radius + gap) * ts * _h(x, w), 0.0)


# ----------------------------------------------------------------------------------- lone, one pair
def _pulse_cdf(times, pulse, radius, gap, diffusion, degradation):
    """``C(t)`` at ``times`` for a release spread over ``pulse`` > 0 (absorbing sphere)."""
    g_now = absorbing_cdf_integral(times, radius, gap, diffusion, degradation)
    g_before = absorbing_cdf_integral(times - pulse, radius, gap, diffusion, degradation)
    return (g_now - g_before) / pulse


def _passive_window(times, pulse, radius, rho, diffusion, degradation):
    """``(1/T) int_0^T P(t - tau) dtau`` at ``times`` (T = pulse > 0), P = 0 before the release."""
    panel = pulse / PASSIVE_PANELS
    starts = panel * jnp.arange(PASSIVE_PANELS, dtype=jnp.float64)
    taus = (starts[:, None] + panel * jnp.asarray(_GL8_V)[None, :]).reshape(-1)  # (K,)
    weights = jnp.tile(jnp.asarray(_GL8_W), PASSIVE_PANELS) * panel / pulse
    lags = times[:, None] - taus[None, :]
    pos = lags > 0.0
    values = _lone.passive_probability(jnp.where(pos, lags, 1.0), radius, rho, diffusion, degradation)
    return jnp.sum(jnp.where(pos, values, 0.0) * weights[None, :], axis=1)


def _pair_pulse_hits(emitter, centre, radius, passive, offset, pulse, diffusion, degradation, symbol_interval,
                     memory):
    diff = emitter - centre
    sq = jnp.sum(diff * diff)
    rho = jnp.where(sq > 0.0, jnp.sqrt(jnp.where(sq > 0.0, sq, 1.0)), 0.0)
    gap = jnp.where(passive, radius, rho - radius)
    edges = jnp.arange(memory + 2, dtype=jnp.float64) * symbol_interval
    cdf = _pulse_cdf(edges, pulse, radius, gap, diffusion, degradation)
    absorb = jnp.diff(cdf)
    absorb_tail = _lone.absorbing_total(radius, gap, diffusion, degradation) - cdf[-1]
    samples = _passive_window(edges[:-1] + offset, pulse, radius, rho, diffusion, degradation)
    # tail of the samples: the impulse tail from start (L+1) Ts + offset - tau, averaged over tau in [0, T]
    start = edges[-1] + offset
    terms = _lone.PASSIVE_TAIL_TERMS

    def impulse_tail(begin):
        xm, wm, qm, _ = _lone._passive_model_point(radius, rho, diffusion, degradation, symbol_interval, begin,
                                                   terms)
        _, phic = _lone._phi_pair(xm, wm, qm)
        values = _lone.passive_probability(_lone._passive_tail_times(begin, symbol_interval, terms), radius, rho,
                                           diffusion, degradation)
        return _lone._passive_tail(values, phic, radius, rho, diffusion, degradation, symbol_interval, begin, terms)

    tails = jax.vmap(impulse_tail)(start - pulse * jnp.asarray(_GL8_V))
    sample_tail = jnp.sum(jnp.asarray(_GL8_W) * tails)
    return jnp.where(passive, samples, absorb), jnp.where(passive, sample_tail, absorb_tail)


@partial(jax.jit, static_argnames=("memory",))
def lone_pulse_hits(emitters, centres, radii, passive, sample_offsets, pulses, diffusion, degradation,
                    symbol_interval, memory: int):
    """:func:`capacity.physics.lone.lone_hits` for releases spread over ``pulses`` (E,) seconds, each > 0.

    Returns ``(hits (E, R, L+1), tail (E, R))``. Absorbing: differences of ``C`` at the slot edges (closed form,
    module docstring); passive: window-averaged samples (quadrature). Use :func:`lone_hits` for impulses.
    """
    emitters, centres, radii, sample_offsets, pulses = _lone._as_f64(emitters, centres, radii, sample_offsets,
                                                                     pulses)
    diffusion, degradation, symbol_interval = _lone._as_f64(diffusion, degradation, symbol_interval)
    passive = jnp.asarray(passive, dtype=bool)
    one = partial(_pair_pulse_hits, diffusion=diffusion, degradation=degradation, symbol_interval=symbol_interval,
                  memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0, 0, None))
    over_emitters = jax.vmap(over_receivers, in_axes=(0, None, None, None, None, 0))
    return over_emitters(emitters, centres, radii, passive, sample_offsets, pulses)


# ----------------------------------------------------------------------------------- shadowed
#: bytes of surface-quadrature arrays allowed per chunk of slot edges in :func:`laplace_hits`
CHUNK_BYTES = 2.5e8


def _laplace_values(times, source, centres, radii, diffusion, degradation, terms, quad, power):
    """``Re sum gamma P~_j(p) / p^power`` (R,) at each time (T,) > 0: the CDF (power 1) or its integral G
    (power 2) of every sphere, by the fixed Talbot contour."""
    points, gamma = talbot_nodes(times, terms)
    p = points.reshape(-1)
    q = jnp.sqrt((p + degradation.astype(jnp.complex128)) / diffusion.astype(jnp.complex128))
    transforms = solve_transforms(q, source, centres, radii, quad)
    terms_ = (transforms / (p**power)[:, None]).reshape(times.shape[0], terms, -1)
    return jnp.real(jnp.einsum("lm,lmj->lj", gamma, terms_))


def _chunked(times, chunk, fn):
    """``fn`` on (chunk,) blocks of ``times`` with lax.map (bounded memory), results (T, R)."""
    n = times.shape[0]
    blocks = -(-n // chunk)
    padded = jnp.concatenate([times, jnp.broadcast_to(times[-1:], (blocks * chunk - n,))])
    out = jax.lax.map(fn, padded.reshape(blocks, chunk))
    return out.reshape(blocks * chunk, -1)[:n]


def _one_emitter_laplace(source, pulse, centres, radii, diffusion, degradation, symbol_interval, memory, terms, quad,
                         spread, chunk):
    edges = symbol_interval * jnp.arange(1, memory + 2, dtype=jnp.float64)  # (L+1,)

    def values(power):
        return lambda tc: _laplace_values(tc, source, centres, radii, diffusion, degradation, terms, quad, power)

    if spread:
        before = edges - pulse
        ok = before > 0.0
        g_now = _chunked(edges, chunk, values(2))
        g_before = jnp.where(ok[:, None], _chunked(jnp.where(ok, before, symbol_interval), chunk, values(2)), 0.0)
        cdf = (g_now - g_before) / pulse  # (L+1, R)
    else:
        cdf = _chunked(edges, chunk, values(1))
    hits = jnp.diff(jnp.concatenate([jnp.zeros((1, cdf.shape[1])), cdf], axis=0), axis=0).T
    return hits, eventual_capture(source, centres, radii, diffusion, degradation, quad) - cdf[-1]


@partial(jax.jit, static_argnames=("memory", "terms", "quad", "spread", "chunk"))
def _laplace_core(emitters, pulses, centres, radii, diffusion, degradation, symbol_interval, memory, terms, quad,
                  spread, chunk):
    fn = partial(_one_emitter_laplace, memory=memory, terms=terms, quad=quad, spread=spread, chunk=chunk)
    return jax.vmap(lambda e, tp: fn(e, tp, centres, radii, diffusion, degradation, symbol_interval))(emitters,
                                                                                                     pulses)


def laplace_hits(emitters, centres, radii, diffusion, degradation, symbol_interval, memory: int, pulses=None, *,
                 terms: int | None = None):
    """The shadowed renewal model (:func:`capacity.physics.shadowed.shadowed_hits`: same arguments, shapes, checks
    and result) evaluated in chunks of slot edges, so that many spheres (image layouts) and long memories fit in
    memory, with optional release ``pulses`` (E,) s: all > 0 (the window-averaged response), or None (impulses).

    Returns ``(hits (E, R, L+1), tail (E, R))``.
    """
    from capacity.physics import shadowed as _sh

    terms = _sh.DEFAULT_TERMS if terms is None else terms
    emitters = jnp.asarray(emitters, dtype=jnp.float64)
    centres = jnp.asarray(centres, dtype=jnp.float64)
    radii = jnp.asarray(radii, dtype=jnp.float64)
    _sh._check_inputs(emitters, centres, radii, diffusion, degradation, symbol_interval, memory, terms)
    n_sph = int(centres.shape[0])
    per_edge = 16.0 * n_sph * n_sph * _sh.N_POLAR * _sh.N_AZIMUTH * terms * 2.0  # complex128 lone kernels, x2
    chunk = int(max(1, min(memory + 1, CHUNK_BYTES // per_edge)))
    spread = pulses is not None
    p = jnp.zeros(emitters.shape[0]) if pulses is None else jnp.asarray(pulses, dtype=jnp.float64)
    args = [jnp.asarray(v, dtype=jnp.float64) for v in (diffusion, degradation, symbol_interval)]
    return _laplace_core(emitters, p, centres, radii, *args, memory=int(memory), terms=int(terms),
                         quad=(_sh.N_POLAR, _sh.N_AZIMUTH, _sh.N_ORDERS), spread=spread, chunk=chunk)


def shadowed_pulse_hits(emitters, centres, radii, diffusion, degradation, symbol_interval, memory: int, pulses,
                        *, terms: int | None = None):
    """:func:`capacity.physics.shadowed.shadowed_hits` for releases spread over ``pulses`` (E,) seconds, each
    > 0. Same arguments, shapes and checks; returns ``(hits (E, R, L+1), tail (E, R))``."""
    return laplace_hits(emitters, centres, radii, diffusion, degradation, symbol_interval, memory, pulses,
                        terms=terms)
