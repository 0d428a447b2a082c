"""The shadowed (renewal) model for absorbing spheres in a uniform flow.

Same renewal decomposition as :mod:`capacity.physics.shadowed` (a path that would reach sphere ``j`` alone either
reaches ``j`` first or first reaches another sphere ``m`` and would then reach ``j`` from its landing point;
exact by the strong Markov property, which a constant drift keeps), with the lone quantities of a sphere in the
flow (:mod:`capacity.physics.flow`):

* the lone transform from a point ``x`` to sphere ``j``: :func:`capacity.physics.flow.flow_transform`;
* the landing law on sphere ``m`` at the same frequency: the driftless joint law at ``p' = p + k + |v|^2/(4D)``
  times the Girsanov weight ``exp(v . (xi - x0) / (2D))`` of the landing point ``xi`` (exact for one sphere),
  normalised by the lone transform.

The landing integral uses the harmonic-measure nodes of the shadowed model; the per-frequency ``R x R`` systems
are solved slot edge by slot edge (``lax.map``) to bound memory, and the CDFs follow by the fixed Talbot contour.
Reactive spheres are not covered (their reflections are not part of the renewal decomposition). Accuracy against
particles: ``studies/validate_flow_walls.py``.
"""

from __future__ import annotations

from functools import partial

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics._harmonic import landing_nodes
from capacity.physics._laplace import _bessel_ratios, _legendre, talbot_nodes
from capacity.physics.flow import N_ORDERS, TALBOT_TERMS, flow_transform

N_POLAR = 16
N_AZIMUTH = 16


def _cx(a):
    return jnp.asarray(a).astype(jnp.complex128)


def _transforms(q, source, centres, radii, diffusion, flow):
    """True transforms ``P~ (P, R)`` of the first-hit densities with flow at ``q (P,)`` (complex)."""
    num = centres.shape[0]

    def lone_from(point):  # (R, P): lone flow transforms from ``point`` to every sphere
        return jax.vmap(lambda c, a: flow_transform(q, point, c, a, 0.0, diffusion, flow,
                                                               reactive=False))(centres, radii)

    lone = lone_from(source)  # (R, P)

    def from_sphere(centre_m, radius_m, lone_m):
        points, weights = landing_nodes(source, centre_m, radius_m, N_POLAR, N_AZIMUTH)
        r0 = jnp.linalg.norm(source - centre_m)
        cos_t = jnp.dot(points[::N_AZIMUTH] - centre_m, (source - centre_m) / r0) / radius_m  # (n_polar,)
        s = jnp.sqrt(r0 * r0 + radius_m * radius_m - 2.0 * r0 * radius_m * cos_t)
        poisson = r0 * (r0 * r0 - radius_m * radius_m) / (4.0 * jnp.pi * s**3)
        rho = _bessel_ratios(_cx(r0) * q, _cx(radius_m) * q, N_ORDERS)  # (N+1, P)
        legendre = _legendre(cos_t, N_ORDERS)  # (N+1, n_polar)
        order = (2.0 * jnp.arange(N_ORDERS + 1, dtype=jnp.float64) + 1.0) / (4.0 * jnp.pi)
        landing0 = jnp.einsum("np,ni,n->pi", rho, _cx(legendre), _cx(order))  # driftless, per steradian
        g0 = _cx(radius_m / r0) * jnp.exp(-_cx(r0 - radius_m) * q)  # driftless lone transform at p'
        weight = jnp.exp(jnp.dot(points - source[None, :], flow) / (2.0 * diffusion))  # (Q,) Girsanov
        ratio = (g0 / lone_m)[:, None] * landing0 / _cx(poisson)[None, :]  # (P, n_polar)
        ratio = jnp.repeat(ratio, N_AZIMUTH, axis=1) * _cx(weight * weights)[None, :]  # (P, Q)
        to_all = jax.vmap(lone_from)(points)  # (Q, R, P)
        return jnp.einsum("pq,qjp->pj", ratio, to_all)  # (P, R)

    kernels = jax.vmap(from_sphere)(centres, radii, lone)  # (R_m, P, R_j)
    off = 1.0 - jnp.eye(num, dtype=jnp.float64)
    kernels = jnp.transpose(kernels, (1, 0, 2)) * _cx(off)[None]  # (P, m, j)
    matrix = _cx(jnp.eye(num))[None] + jnp.transpose(kernels, (0, 2, 1))
    return jnp.linalg.solve(matrix, lone.T[..., None])[..., 0]


def _one_emitter(source, centres, radii, diffusion, degradation, flow, symbol_interval, memory):
    edges = symbol_interval * jnp.arange(1, memory + 2, dtype=jnp.float64)
    points, gamma = talbot_nodes(edges, TALBOT_TERMS)  # (L+1, M)
    shift = degradation + jnp.dot(flow, flow) / (4.0 * diffusion)

    def edge(args):
        s, g = args
        q = jnp.sqrt((s + _cx(shift)) / _cx(diffusion))
        return jnp.real(jnp.sum(g[:, None] * _transforms(q, source, centres, radii, diffusion, flow) / s[:, None],
                                axis=0))

    cdf = jax.lax.map(edge, (points, gamma))  # (L+1, R)
    hits = jnp.diff(jnp.concatenate([jnp.zeros((1, cdf.shape[1])), cdf], axis=0), axis=0).T
    q0 = jnp.maximum(jnp.sqrt(shift / diffusion), 1e-12 / jnp.max(radii))
    eventual = jnp.real(_transforms(_cx(q0)[None], source, centres, radii, diffusion, flow))[0]
    return hits, eventual - cdf[-1]


@partial(jax.jit, static_argnames=("memory",))
def flow_shadowed_hits(emitters, centres, radii, diffusion, degradation, flow, symbol_interval, memory: int):
    """Slot hit probabilities of several absorbing spheres in a uniform flow that shadow each other.

    emitters (E, 3) m, centres (R, 3) m, radii (R,) m, diffusion m^2/s, degradation 1/s, flow (3,) m/s,
    symbol_interval s, memory L (static). Returns ``(hits (E, R, L+1), tail (E, R))``. With one sphere it is the
    lone flow model; with ``flow = 0`` the renewal model of :mod:`capacity.physics.shadowed` (same landing law).
    """
    emitters, centres, radii, flow = (jnp.asarray(v, dtype=jnp.float64) for v in (emitters, centres, radii, flow))
    diffusion, degradation, symbol_interval = (jnp.asarray(v, dtype=jnp.float64) for v in
                                               (diffusion, degradation, symbol_interval))
    one = partial(_one_emitter, diffusion=diffusion, degradation=degradation, flow=flow,
                  symbol_interval=symbol_interval, memory=memory)
    return jax.vmap(lambda e: one(e, centres, radii))(emitters)


def shadowed_flow_arrays(emitters, centres, radii, diffusion, degradation, flow, symbol_interval, memory: int):
    """NumPy wrapper of :func:`flow_shadowed_hits`."""
    hits, tail = flow_shadowed_hits(emitters, centres, radii, diffusion, degradation, np.asarray(flow, float),
                                    symbol_interval, int(memory))
    return np.asarray(hits, dtype=np.float64), np.asarray(tail, dtype=np.float64)
