"""One sphere alone in a uniform flow ``v``: passive (exact) and absorbing or reactive spheres (Laplace domain).

Passive sphere (exact): the fluid carries the whole Gaussian cloud, so the probability of being inside the ball at
time ``t`` is the no-flow form (:func:`capacity.physics.lone.passive_probability`) at the drifted centre distance
``|x0 + v t - c|`` (reference sheet, passive sphere with uniform flow).

Absorbing sphere (exact up to the numerical inversion). Girsanov's theorem for Brownian motion with constant drift
``v`` (generator ``D Lap + v . grad``), stopped at the hitting time ``tau`` of the sphere, gives the density of the
drifted path law against the driftless one on ``F_tau``::

    dP_v / dP_0 = exp( v . (X_tau - x0) / (2 D) - |v|^2 tau / (4 D) )

(Karatzas & Shreve, *Brownian Motion and Stochastic Calculus*, 1991, Thm 3.5.1 and Cor. 3.5.2 [memory]). So the
joint law of the hitting time and the landing point ``xi = c + a n`` with flow is the driftless one times
``exp(v.(c - x0)/(2D)) exp(a v.n/(2D)) exp(-|v|^2 t/(4D))``. The last factor shifts the Laplace variable,
``p -> p + |v|^2/(4D)`` (like degradation); the driftless joint transform per solid angle is the Legendre series
``g~(p) / (4 pi) sum_n (2n+1) P_n(n . e) rho_n(p)`` (:mod:`capacity.physics._laplace`; ``e`` the unit vector from
the centre to the source), and integrating ``exp(beta n . u)`` (``u = v/|v|``, ``beta = a |v| / (2 D) = Pe/2``)
against it over the sphere by the Funk-Hecke formula (``exp(beta cos) = sum_l (2l+1) i_l(beta) P_l(cos)``, with
``i_l`` the modified spherical Bessel functions of the first kind) leaves a single series::

    F~_v(p) = exp(v . (c - x0) / (2 D)) g~(p') sum_n (2n+1) i_n(beta) P_n(e . u) rho_n(p'),
    p' = p + k + |v|^2 / (4 D).

Slot-edge CDFs by the fixed Talbot contour (Abate & Valko 2004, as in the shadowed model); the eventual capture is
the transform at ``p = 0``. The combination of the Girsanov weight with the Funk-Hecke series is our own
derivation. Numerics: ``i_n`` from its positive power series (no cancellation); the series in ``n`` alternates in
sign when the flow points from the source towards the sphere (``e . u < 0``), where terms of size ~exp(beta)
cancel to a result of size ~exp(-beta): relative round-off ~ 1e-16 exp(2 beta) = 1e-16 exp(Pe), so the model is
limited to Pe = |v| a / D <= :data:`MAX_PECLET` (round-off below ~1e-7 there).

Reactive sphere (Robin condition ``D dc/dn = kappa c``): with ``u = exp(-v.x/(2D)) w`` the condition on the
sphere picks up the term ``v.r/2`` (the flow pushes molecules against the surface on the upstream face), which
couples neighbouring Legendre orders; the coefficients then solve a tridiagonal system per Laplace node (see
:func:`flow_transform`). Without flow the modes decouple and the ``n = 0`` mode is the closed form of
:mod:`capacity.physics.reactive`.
"""

from __future__ import annotations

import math
from functools import partial

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import gammaln

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics._laplace import talbot_nodes
from capacity.physics.lone import passive_probability

#: Legendre orders of the landing series (as in the shadowed model)
N_ORDERS = 80
#: terms of the power series of i_n(beta) (enough for beta = Pe/2 <= 40)
N_SERIES = 96
#: nodes of the fixed Talbot contour per slot edge
TALBOT_TERMS = 24
#: largest Peclet number |v| a / D for absorbing / reactive spheres (see the module docstring)
MAX_PECLET = 20.0
#: passive tails: explicit samples after lag L before the Euler-Maclaurin remainder
PASSIVE_TAIL_TERMS = 2048
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(64)
_GL_U, _GL_W = 0.5 * (_GL_NODES + 1.0), 0.5 * _GL_WEIGHTS
_LOG2 = math.log(2.0)


def _cx(a):
    return jnp.asarray(a).astype(jnp.complex128)


def _log_odd_double_factorial(m):
    """log (2m+1)!! = (m+1) log 2 + lgamma(m + 3/2) - log(pi)/2."""
    return (m + 1.0) * _LOG2 + gammaln(m + 1.5) - 0.5 * math.log(math.pi)


def spherical_i(beta, n_max: int = N_ORDERS, n_series: int = N_SERIES):
    """Modified spherical Bessel functions of the first kind ``i_n(beta)``, n = 0..n_max, for real ``beta >= 0``.

    Power series ``i_n(b) = sum_k b^(n+2k) / (2^k k! (2n+2k+1)!!)`` (DLMF 10.53.3 [memory]), all terms positive,
    summed in log form; ``i_0(0) = 1`` and ``i_n(0) = 0`` for n >= 1 exactly. Shape (n_max+1,).
    """
    n = jnp.arange(n_max + 1, dtype=jnp.float64)[:, None]
    k = jnp.arange(n_series, dtype=jnp.float64)[None, :]
    power = n + 2.0 * k
    pos = beta > 0.0
    log_b = jnp.log(jnp.where(pos, beta, 1.0))
    log_term = power * log_b - k * _LOG2 - gammaln(k + 1.0) - _log_odd_double_factorial(n + k)
    term = jnp.where(power == 0.0, 1.0, jnp.where(pos, jnp.exp(log_term), 0.0))
    return jnp.sum(term, axis=1)


def _legendre(x, n_max: int):
    """``P_n(x)`` for n = 0..n_max at a scalar x."""

    def step(carry, n):
        p_prev, p_cur = carry
        p_next = ((2.0 * n + 1.0) * x * p_cur - n * p_prev) / (n + 1.0)
        return (p_cur, p_next), p_next

    _, rest = jax.lax.scan(step, (jnp.ones_like(x), x), jnp.arange(1, n_max, dtype=jnp.float64))
    return jnp.concatenate([jnp.ones_like(x)[None], x[None], rest])


def _mode_ratios(x_out, x_in, n_max: int):
    """``rho_n = k_n(x_out) k_0(x_in) / (k_0(x_out) k_n(x_in))`` and ``u_(n+1)(x_in) = k_(n+1)/k_n (x_in)``,
    n = 0..n_max (shapes (n_max+1, P)), from the upward recurrence ``u_1 = 1 + 1/x``, ``u_(i+1) = 1/u_i +
    (2i+1)/x`` (stable for k_n)."""

    def step(carry, i):
        u_out, u_in, rho = carry
        rho_next = rho * u_out / u_in
        order = _cx(2.0 * i + 1.0)
        return (1.0 / u_out + order / x_out, 1.0 / u_in + order / x_in, rho_next), (rho, u_in)

    init = (1.0 + 1.0 / x_out, 1.0 + 1.0 / x_in, jnp.ones_like(x_out))
    _, (rho, u_in) = jax.lax.scan(step, init, jnp.arange(1, n_max + 2, dtype=jnp.float64))
    return rho, u_in


def _thomas(lower, diag, upper, rhs):
    """Solve tridiagonal systems along axis 0 (shape (N+1, P)) by the Thomas algorithm (``lax.scan``)."""

    def forward(carry, row):
        c_prev, d_prev = carry
        lo, di, up, b = row
        denom = di - lo * c_prev
        c_new, d_new = up / denom, (b - lo * d_prev) / denom
        return (c_new, d_new), (c_new, d_new)

    zero = jnp.zeros_like(rhs[0])
    _, (c, d) = jax.lax.scan(forward, (zero, zero), (lower, diag, upper, rhs))

    def backward(x_next, row):
        c_i, d_i = row
        x = d_i - c_i * x_next
        return x, x

    _, x = jax.lax.scan(backward, zero, (c, d), reverse=True)
    return x


def flow_transform(q, source, centre, radius, inverse_rate, diffusion, flow, n_max: int = N_ORDERS,
                   reactive: bool = True):
    """Laplace transform of the hitting (reaction) time density of one sphere in a uniform flow.

    q : (P,) complex, ``sqrt((p + k + |v|^2/(4D)) / D)``. source, centre : (3,) m. radius : m. inverse_rate :
    ``1/kappa`` in s/m (0 for an absorbing sphere). diffusion : m^2/s. flow : (3,) m/s. Returns (P,) complex.

    ``u = e^(-v.x/(2D)) w`` turns the backward equation ``D Lap u + v.grad u = p u`` into the modified Helmholtz
    equation for ``w`` (``q`` above); the Robin condition ``D du/dr = kappa (u - 1)`` (reflected diffusion with
    killing on the boundary local time; it does not involve the drift) becomes
    ``D dw/dr = (kappa + v.r/2) w - kappa exp(v.x/(2D))`` on the sphere. With the axis along ``v``,
    ``w = exp(v.c/(2D)) sum_n A_n k_n(q r)/k_n(q a) P_n(cos)``; ``cos P_n = ((n+1) P_(n+1) + n P_(n-1))/(2n+1)`` and
    the Funk-Hecke expansion of ``exp(beta cos)`` give, divided by ``kappa``, the tridiagonal system
    ``A_n (D q k_n'/k_n / kappa - 1) - |v|/(2 kappa) (n/(2n-1) A_(n-1) + (n+1)/(2n+3) A_(n+1)) = -(2n+1) i_n(beta)``
    (truncated at ``n_max``). For an absorbing sphere (``1/kappa = 0``) ``A_n = (2n+1) i_n(beta)``, the Girsanov
    form of the module docstring; for a reactive one it is exact as well (our own derivation). ``reactive``
    (static) False skips the tridiagonal solve (absorbing spheres only: ``inverse_rate`` is then ignored).
    """
    rel = source - centre
    r0 = jnp.linalg.norm(rel)
    speed = jnp.linalg.norm(flow)
    moving = speed > 0.0
    cos_g = jnp.where(moving, jnp.dot(rel, flow) / (r0 * jnp.where(moving, speed, 1.0)), 1.0)
    beta = radius * speed / (2.0 * diffusion)
    rho, u_in = _mode_ratios(_cx(r0) * q, _cx(radius) * q, n_max)  # (N+1, P)
    n = jnp.arange(n_max + 1, dtype=jnp.float64)
    x_in = _cx(radius) * q
    log_deriv = _cx(n)[:, None] / x_in[None, :] - u_in  # k_n'(x)/k_n(x), (N+1, P)
    eps = _cx(inverse_rate)
    diag = eps * _cx(diffusion) * q[None, :] * log_deriv - 1.0
    half = eps * _cx(0.5 * speed)
    lower = jnp.broadcast_to(-half * _cx(n / jnp.maximum(2.0 * n - 1.0, 1.0))[:, None], diag.shape)
    upper = jnp.broadcast_to(-half * _cx((n + 1.0) / (2.0 * n + 3.0))[:, None], diag.shape)
    rhs = jnp.broadcast_to(-_cx((2.0 * n + 1.0) * spherical_i(beta, n_max))[:, None], diag.shape)
    coeff = _thomas(lower, diag, upper, rhs) if reactive else -rhs  # A_n, (N+1, P)
    series = jnp.einsum("n,np->p", _cx(_legendre(cos_g, n_max)), coeff * rho)
    lone = _cx(radius / r0) * jnp.exp(-_cx(r0 - radius) * q)
    girsanov = jnp.exp(jnp.dot(flow, centre - source) / (2.0 * diffusion))
    return _cx(girsanov) * lone * series


def _absorbing_pair(source, centre, radius, inverse_rate, diffusion, degradation, flow, symbol_interval, memory):
    edges = symbol_interval * jnp.arange(1, memory + 2, dtype=jnp.float64)
    points, gamma = talbot_nodes(edges, TALBOT_TERMS)  # (L+1, M)
    p = points.reshape(-1)
    shift = degradation + jnp.dot(flow, flow) / (4.0 * diffusion)
    q = jnp.sqrt((p + _cx(shift)) / _cx(diffusion))
    transform = flow_transform(q, source, centre, radius, inverse_rate, diffusion, flow)
    cdf = jnp.real(jnp.sum(gamma * (transform / p).reshape(memory + 1, TALBOT_TERMS), axis=1))
    hits = jnp.diff(jnp.concatenate([jnp.zeros(1), cdf]))
    floor = 1e-12 / radius  # stands in for q = 0 (no flow, no degradation): changes the result by ~1e-12
    q0 = jnp.maximum(jnp.sqrt(shift / diffusion), floor)
    eventual = jnp.real(flow_transform(_cx(q0)[None], source, centre, radius, inverse_rate, diffusion, flow))[0]
    return hits, eventual - cdf[-1]


def _drifted(t, source, centre, flow):
    rel = source[None, :] + t[:, None] * flow[None, :] - centre[None, :]
    sq = jnp.sum(rel * rel, axis=1)
    return jnp.where(sq > 0.0, jnp.sqrt(jnp.where(sq > 0.0, sq, 1.0)), 0.0)


def _passive_pair(source, centre, radius, offset, diffusion, degradation, flow, symbol_interval, memory):
    """Samples ``P(l Ts + offset)`` at the drifted distance, and the sum of all later samples.

    Tail: ``PASSIVE_TAIL_TERMS`` explicit samples, then the Euler-Maclaurin remainder from ``t_K``:
    ``(1/Ts) int_{t_K}^inf P + P(t_K)/2 - Ts/12 P'(t_K)`` (P' by a central difference), the integral by 64-point
    Gauss-Legendre in ``u``, ``t = t_K / u^2`` (``P ~ t^-3/2 exp(-(k + |v|^2/4D) t)`` far out, smooth in u).
    """

    def value(t):
        return passive_probability(t, radius, _drifted(t, source, centre, flow), diffusion, degradation)

    times = jnp.arange(memory + 1, dtype=jnp.float64) * symbol_interval + offset
    start = (memory + 1) * symbol_interval + offset
    terms = PASSIVE_TAIL_TERMS
    samples = value(start + jnp.arange(terms + 2, dtype=jnp.float64) * symbol_interval)  # j = 0 .. K+1
    tk = start + terms * symbol_interval
    u = jnp.asarray(_GL_U)
    integral = jnp.sum(jnp.asarray(_GL_W) * value(tk / u**2) * 2.0 * tk / u**3)
    cd = (samples[terms + 1] - samples[terms - 1]) / (2.0 * symbol_interval)
    remainder = integral / symbol_interval + 0.5 * samples[terms] - symbol_interval / 12.0 * cd
    return value(times), jnp.sum(samples[:terms]) + remainder


@partial(jax.jit, static_argnames=("memory",))
def _absorbing_all(emitters, centres, radii, inverse_rates, diffusion, degradation, flow, symbol_interval,
                   memory: int):
    one = partial(_absorbing_pair, diffusion=diffusion, degradation=degradation, flow=flow,
                  symbol_interval=symbol_interval, memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0))
    return jax.vmap(over_receivers, in_axes=(0, None, None, None))(emitters, centres, radii, inverse_rates)


@partial(jax.jit, static_argnames=("memory",))
def _passive_all(emitters, centres, radii, offsets, diffusion, degradation, flow, symbol_interval, memory: int):
    one = partial(_passive_pair, diffusion=diffusion, degradation=degradation, flow=flow,
                  symbol_interval=symbol_interval, memory=memory)
    over_receivers = jax.vmap(one, in_axes=(None, 0, 0, 0))
    return jax.vmap(over_receivers, in_axes=(0, None, None, None))(emitters, centres, radii, offsets)


def flow_hits_traced(emitters, centres, radii, passive, rates, sample_offsets, diffusion, degradation, flow,
                     symbol_interval, memory: int):
    """:func:`flow_hits` for traced inputs (JAX arrays out, differentiable in every float argument); ``passive``
    (R,) and ``rates`` (R,) m/s must be concrete (numpy)."""
    passive = np.asarray(passive, dtype=bool)
    rates = np.asarray(rates, dtype=float)
    inverse = jnp.asarray(np.where(np.isinf(rates) | passive, 0.0, 1.0 / np.where(rates > 0.0, rates, 1.0)))
    emitters, centres, radii, offsets = (jnp.asarray(v, dtype=jnp.float64) for v in
                                         (emitters, centres, radii, sample_offsets))
    args = tuple(jnp.asarray(v, dtype=jnp.float64) for v in (diffusion, degradation, flow, symbol_interval))
    hits = jnp.zeros((emitters.shape[0], radii.shape[0], int(memory) + 1))
    tail = jnp.zeros((emitters.shape[0], radii.shape[0]))
    for mask, fn, extra in ((~passive, _absorbing_all, inverse), (passive, _passive_all, offsets)):
        idx = np.flatnonzero(mask)
        if idx.size:
            h, t = fn(emitters, centres[idx], radii[idx], extra[idx], *args, memory=int(memory))
            hits, tail = hits.at[:, idx].set(h), tail.at[:, idx].set(t)
    return hits, tail


def flow_hits(emitters, centres, radii, passive, rates, sample_offsets, diffusion, degradation, flow,
              symbol_interval, memory: int):
    """Slot hit probabilities of every emitter and lone sphere in a uniform flow.

    emitters : (E, 3) m. centres : (R, 3) m. radii : (R,) m. passive : (R,) bool (concrete). rates : (R,) surface
    reaction rates kappa, m/s (``inf`` for absorbing spheres; ignored for passive ones). sample_offsets : (R,) s
    (passive sampling instant within the slot). diffusion : m^2/s. degradation : 1/s. flow : (3,) m/s.
    symbol_interval : s. memory : L.

    Returns numpy ``(hits (E, R, L+1), tail (E, R))``. Passive: samples at ``l Ts + offset`` and the sum of the
    later ones. Absorbing / reactive: slot probabilities of the first hit (reaction) and the probability after
    ``(L+1) Ts``. With ``flow = 0`` this reproduces :func:`capacity.physics.lone.lone_hits` and
    :func:`capacity.physics.reactive.reactive_hits` (tests/test_flow.py). The two kinds are computed by two
    jitted functions (each differentiable and ``vmap``-ed over emitters and receivers), so a layout compiles only
    the kind it has.
    """
    emitters, centres = np.asarray(emitters, dtype=float), np.asarray(centres, dtype=float)
    radii, offsets = np.asarray(radii, dtype=float), np.asarray(sample_offsets, dtype=float)
    passive = np.asarray(passive, dtype=bool)
    rates = np.asarray(rates, dtype=float)
    inverse = np.where(np.isinf(rates) | passive, 0.0, 1.0 / np.where(rates > 0.0, rates, 1.0))
    args = (jnp.asarray(diffusion, dtype=jnp.float64), jnp.asarray(degradation, dtype=jnp.float64),
            jnp.asarray(flow, dtype=jnp.float64), jnp.asarray(symbol_interval, dtype=jnp.float64))
    hits = np.zeros((emitters.shape[0], radii.shape[0], int(memory) + 1))
    tail = np.zeros((emitters.shape[0], radii.shape[0]))
    for mask, fn, extra in ((~passive, _absorbing_all, inverse), (passive, _passive_all, offsets)):
        if mask.any():
            h, t = fn(jnp.asarray(emitters), jnp.asarray(centres[mask]), jnp.asarray(radii[mask]),
                      jnp.asarray(extra[mask]), *args, memory=int(memory))
            hits[:, mask], tail[:, mask] = np.asarray(h), np.asarray(t)
    return hits, tail


def peclet_numbers(radii, flow, diffusion) -> np.ndarray:
    """Pe = |v| a / D per sphere (dimensionless), radii (R,) m, flow (3,) m/s, diffusion m^2/s."""
    return np.asarray(radii, dtype=float) * float(np.linalg.norm(np.asarray(flow, dtype=float))) / float(diffusion)


@jax.jit
def eventual_capture(sources, centre, radius, rate, diffusion, degradation, flow):
    """Probability that a molecule at each of ``sources`` (S, 3) m is eventually taken by one lone sphere in the
    flow: the transform of :func:`flow_transform` at ``p = 0``. centre (3,) m, radius m, rate kappa m/s (inf:
    absorbing), diffusion m^2/s, degradation 1/s, flow (3,) m/s. Returns (S,)."""
    sources, centre, flow = (jnp.asarray(v, dtype=jnp.float64) for v in (sources, centre, flow))
    radius, rate, diffusion, degradation = (jnp.asarray(v, dtype=jnp.float64) for v in
                                            (radius, rate, diffusion, degradation))
    inverse_rate = jnp.where(jnp.isinf(rate), 0.0, 1.0 / jnp.where(rate > 0.0, rate, 1.0))
    shift = degradation + jnp.dot(flow, flow) / (4.0 * diffusion)
    q0 = _cx(jnp.maximum(jnp.sqrt(shift / diffusion), 1e-12 / radius))[None]

    def one(source):
        return jnp.real(flow_transform(q0, source, centre, radius, inverse_rate, diffusion, flow))[0]

    return jax.vmap(one)(sources)
