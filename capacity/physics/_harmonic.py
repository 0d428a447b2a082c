"""Private helper of the shadowed model: landing-point quadrature on a sphere (harmonic measure).

Everything here is written for scalars/arrays in SI units and is jit- and grad-friendly.

* :func:`landing_nodes` - nodes and weights of the harmonic measure (where a molecule from ``x0`` first lands on
  a lone sphere, conditioned on landing). Its density on the surface is proportional to
  ``(|x0-c|^2 - a^2)/|xi - x0|^3`` (exterior Poisson kernel). With ``s = |xi - x0|`` the measure is uniform in
  ``v = 1/s`` over ``[1/(R0+a), 1/(R0-a)]`` (``R0 = |x0 - c|``) and uniform in the azimuth about the axis
  ``c -> x0``, so Gauss-Legendre in ``v`` times the trapezoid rule in azimuth integrates it with no weight
  function, however close the source is to the sphere.
"""

from __future__ import annotations

import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)


def _frame(axis):
    """Two unit vectors orthogonal to unit ``axis`` (and to each other).

    The helper vector is the coordinate axis least aligned with ``axis``; the integrals built on this frame are
    invariant under rotation about ``axis`` (up to the azimuthal rule's exponentially small error).
    """
    eye = jnp.eye(3, dtype=jnp.float64)
    helper = eye[jnp.argmin(jnp.abs(axis))]
    e1 = helper - jnp.dot(helper, axis) * axis
    e1 = e1 / jnp.linalg.norm(e1)
    e2 = jnp.cross(axis, e1)
    return e1, e2


def landing_nodes(source, centre, radius, n_polar: int, n_azimuth: int):
    """Quadrature for the harmonic measure on a sphere seen from ``source``.

    source, centre : (3,) m; radius : m (``|source - centre| > radius``).
    Returns ``points (n_polar*n_azimuth, 3)`` on the sphere and ``weights`` of the same length summing to 1.
    """
    offset = source - centre
    r0 = jnp.linalg.norm(offset)
    axis = offset / r0
    e1, e2 = _frame(axis)
    nodes, w = np.polynomial.legendre.leggauss(n_polar)
    v_lo = 1.0 / (r0 + radius)
    v_hi = 1.0 / (r0 - radius)
    v = v_lo + (v_hi - v_lo) * 0.5 * (jnp.asarray(nodes) + 1.0)
    s = 1.0 / v
    cos_t = (r0 * r0 + radius * radius - s * s) / (2.0 * radius * r0)
    cos_t = jnp.clip(cos_t, -1.0, 1.0)
    sin_t = jnp.sqrt(jnp.maximum(1.0 - cos_t * cos_t, 1e-300))
    phi = 2.0 * jnp.pi * (jnp.arange(n_azimuth, dtype=jnp.float64) + 0.5) / n_azimuth
    direction = (
        cos_t[:, None, None] * axis[None, None, :]
        + sin_t[:, None, None]
        * (jnp.cos(phi)[None, :, None] * e1[None, None, :] + jnp.sin(phi)[None, :, None] * e2[None, None, :])
    )
    points = centre[None, None, :] + radius * direction
    weights = (0.5 * jnp.asarray(w))[:, None] * jnp.full((n_azimuth,), 1.0 / n_azimuth)[None, :]
    return points.reshape(-1, 3), weights.reshape(-1)
