"""Private: the shadowed renewal model solved in the Laplace domain, inverted by the fixed Talbot contour.

Transforms (``q = sqrt((p + k)/D)``, principal branch; a lone sphere of radius ``a``, centre distance ``R0``):

* lone first-passage density: ``g~(p) = a/R0 * exp(-(R0 - a) q)`` (Laplace transform in references.md);
* lone joint law of (time, landing point) per unit solid angle at polar angle ``theta`` about the axis
  centre -> source: ``f~(p, theta) = 1/(4 pi) sum_n (2n+1) P_n(cos theta) k_n(R0 q)/k_n(a q)`` with ``k_n`` the
  modified spherical Bessel functions of the second kind (separation of variables for the exterior Dirichlet
  problem of ``(p + k - D Laplacian) u = 0``; Carslaw & Jaeger, Conduction of Heat in Solids, 1959, sphere
  problems [memory]). At ``p = k = 0`` it is the exterior Poisson kernel ``a (R0^2 - a^2)/(4 pi R0 s^3)``.
  We use the landing law normalised by ``g~``: ``h~(p, theta) = 1/(4 pi) sum_n (2n+1) P_n(cos theta) rho_n``,
  ``rho_n = prod_{i<=n} u_i(R0 q)/u_i(a q)``, ``u_i = k_i/k_(i-1)`` from the stable upward recurrence
  ``u_1 = 1 + 1/x``, ``u_(i+1) = 1/u_i + (2i+1)/x``.

Renewal equations per frequency (all receivers absorbing), unknown true transforms ``P~_j``::

    g~_j(p; x0) = P~_j(p) + sum_{m != j} P~_m(p) K~_mj(p),   K~_mj(p) = integral h~_m(p, xi) g~_j(p; xi) dOmega

i.e. the landing law on ``m`` is that of the lone sphere ``m`` *at the same frequency* (early arrivals land near
the point facing the source, late ones spread out), which is exact to first order in the shadowing. The
surface integral uses the harmonic-measure nodes of :func:`landing_nodes` with weights ``h~/H`` (``H`` the
normalised Poisson kernel). CDFs at the slot edges: fixed Talbot inversion of ``P~(p)/p`` (Abate & Valko,
"Multi-precision Laplace transform inversion", Int. J. Numer. Meth. Eng. 60, 2004):
``F(t) = r/M Re[1/2 F^(r) e^(rt) + sum_{k=1}^{M-1} e^(t S_k) F^(S_k) (1 + i sigma_k)]``, ``r = 2M/(5t)``,
``S_k = r th_k (cot th_k + i)``, ``sigma_k = th_k + (th_k cot th_k - 1) cot th_k``, ``th_k = k pi/M``.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics._harmonic import landing_nodes


def _cx(a):
    """Explicit cast to complex128 (tests run with strict dtype promotion)."""
    return jnp.asarray(a).astype(jnp.complex128)


def talbot_nodes(times, n_terms: int):
    """Contour points ``S (T, M)`` complex and factors ``gamma (T, M)`` so that ``F(t) = Re sum gamma F^(S)``."""
    theta = np.pi * np.arange(n_terms) / n_terms
    r = 2.0 * n_terms / (5.0 * times)  # (T,)
    th = jnp.asarray(theta[1:])
    cot = 1.0 / jnp.tan(th)
    s_rest = _cx(r[:, None] * th[None, :]) * (_cx(cot)[None, :] + 1j)
    sigma = th + (th * cot - 1.0) * cot
    s_all = jnp.concatenate([_cx(r[:, None]), s_rest], axis=1)
    gamma_rest = jnp.exp(_cx(times)[:, None] * s_rest) * (1.0 + 1j * _cx(sigma)[None, :])
    gamma0 = _cx(0.5 * jnp.exp(r * times)[:, None])
    gamma = jnp.concatenate([gamma0, gamma_rest], axis=1) * _cx(r / n_terms)[:, None]
    return s_all, gamma


def _legendre(x, n_max: int):
    """``P_n(x)`` for n = 0..n_max, shape (n_max+1, len(x))."""

    def step(carry, n):
        p_prev, p_cur = carry
        p_next = ((2.0 * n + 1.0) * x * p_cur - n * p_prev) / (n + 1.0)
        return (p_cur, p_next), p_next

    p0 = jnp.ones_like(x)
    _, rest = jax.lax.scan(step, (p0, x), jnp.arange(1, n_max, dtype=jnp.float64))
    return jnp.concatenate([p0[None], x[None], rest], axis=0)


def _bessel_ratios(x_out, x_in, n_max: int):
    """``rho_n = k_n(x_out) k_0(x_in) / (k_0(x_out) k_n(x_in))`` for n = 0..n_max; shape (n_max+1, ...)."""

    def step(carry, i):
        u_out, u_in, rho = carry
        rho = rho * u_out / u_in
        order = _cx(2.0 * i + 1.0)
        nxt = (1.0 / u_out + order / x_out, 1.0 / u_in + order / x_in, rho)
        return nxt, rho

    init = (1.0 + 1.0 / x_out, 1.0 + 1.0 / x_in, jnp.ones_like(x_out))
    _, rho = jax.lax.scan(step, init, jnp.arange(1, n_max + 1, dtype=jnp.float64))
    return jnp.concatenate([jnp.ones_like(x_out)[None], rho], axis=0)


def coupling_kernels(q, source, centres, radii, quad):
    """``K~[p, m, j]`` for complex ``q (P,)`` (Re q > 0); diagonal zero. ``quad = (n_polar, n_azimuth, n_max)``."""
    n_polar, n_azimuth, n_max = quad
    num = centres.shape[0]

    def from_sphere(centre_m, radius_m):
        points, weights = landing_nodes(source, centre_m, radius_m, n_polar, n_azimuth)
        r0 = jnp.linalg.norm(source - centre_m)
        cos_t = jnp.dot(points[::n_azimuth] - centre_m, (source - centre_m) / r0) / radius_m  # (n_polar,)
        s = jnp.sqrt(r0 * r0 + radius_m * radius_m - 2.0 * r0 * radius_m * cos_t)
        poisson = r0 * (r0 * r0 - radius_m * radius_m) / (4.0 * jnp.pi * s**3)  # harmonic density per steradian
        rho = _bessel_ratios(_cx(r0) * q, _cx(radius_m) * q, n_max)  # (n_max+1, P)
        legendre = _legendre(cos_t, n_max)  # (n_max+1, n_polar)
        order = (2.0 * jnp.arange(n_max + 1, dtype=jnp.float64) + 1.0) / (4.0 * jnp.pi)
        landing = jnp.einsum("np,ni,n->pi", rho, _cx(legendre), _cx(order))
        ratio = landing / _cx(poisson)[None, :]  # (P, n_polar)
        dist = jnp.linalg.norm(points[:, None, :] - centres[None, :, :], axis=-1)  # (Q, R)
        dist = jnp.maximum(dist, radii[None, :])
        lone = _cx(radii / dist)[None] * jnp.exp(-_cx(dist - radii)[None] * q[:, None, None])  # (P, Q, R)
        lone = lone.reshape(q.shape[0], n_polar, n_azimuth, num)
        return jnp.einsum("pi,piaj,ia->pj", ratio, lone, _cx(weights.reshape(n_polar, n_azimuth)))

    kernels = jax.vmap(from_sphere)(centres, radii)  # (R, P, R)
    off = 1.0 - jnp.eye(num, dtype=jnp.float64)
    return jnp.transpose(kernels, (1, 0, 2)) * _cx(off)[None]


def solve_transforms(q, source, centres, radii, quad):
    """True transforms ``P~ (P, R)`` of the first-passage densities at the given ``q (P,)``."""
    num = centres.shape[0]
    r0 = jnp.linalg.norm(source[None, :] - centres, axis=-1)
    lone = _cx(radii / r0)[None, :] * jnp.exp(-_cx(r0 - radii)[None, :] * q[:, None])  # (P, R)
    kernels = coupling_kernels(q, source, centres, radii, quad)
    matrix = _cx(jnp.eye(num))[None] + jnp.transpose(kernels, (0, 2, 1))
    return jnp.linalg.solve(matrix, lone[..., None])[..., 0]


def eventual_capture(source, centres, radii, diffusion, degradation, quad):
    """(R,) eventual capture of one emitter's molecules by each sphere: the renewal equations at p = 0
    (q = sqrt(k/D); a tiny floor stands in for k = 0)."""
    floor = 1e-12 / jnp.max(radii)
    k_pos = degradation > 0.0
    q0 = jnp.where(k_pos, jnp.sqrt(jnp.where(k_pos, degradation, 1.0) / diffusion), floor)
    return jnp.real(solve_transforms(q0[None].astype(jnp.complex128), source, centres, radii, quad))[0]
