"""Several absorbing spheres that take molecules from each other: first-passage renewal ("negative sources").

Model
-----
A molecule released at ``x0`` that would reach sphere ``j`` if ``j`` were alone either reaches ``j`` before any
other sphere, or first reaches another sphere ``m`` (at time ``s``, at point ``xi``) and from there would reach
``j``. In densities, for every receiver ``j``::

    g_j(t; x0) = f_j(t) + sum_{m != j} integral dxi integral_0^t f_m(s, xi) g_j(t - s; xi) ds

with ``g`` the lone first-passage densities (closed form) and ``f`` the true ones (unknown). This is exact. We
approximate the joint landing law ``f_m(s, xi)`` by ``f_m(s) * h_m(xi)`` where ``h_m`` is the harmonic measure of
the lone sphere ``m`` seen from ``x0`` (exterior Poisson kernel, density ``~ (|x0-c_m|^2 - a_m^2)/|xi-x0|^3``),
so the coupling kernel from ``m`` to ``j`` is the CDF ``K_mj(tau) = integral h_m(xi) F_j(tau; xi) dxi`` of lone
first-passage times from the landing point to ``j``. The idea of renewal for several absorbing receivers and the
finding that the landing point on the shadowing sphere matters: Ferrari, Vakilipoor, Regonesi, Rapisarda,
Magarini (arXiv 2111.12181); Vakilipoor et al., IEEE TMBMC 10(3), 2024; Sabu, Gupta, Varshney, Jindal
(arXiv 2205.10519). The quadrature and discretisation are our own.

Discretisation
--------------
Fine grid ``h = Ts/substeps``, ``N = (L+1)*substeps`` steps. Unknowns ``P[n, j]`` = probability of absorption by
``j`` in step ``n``. The lone increments ``G[n, j] = F_j((n+1)h) - F_j(nh)`` are exact CDF differences. The
arrivals at ``m`` are taken uniform inside each step, so the mass that sphere ``m``'s step-``k`` arrivals would
send to ``j`` in step ``k+q`` is ``W[q]_mj = (1/h) int_0^h [K_mj((q+1)h - u) - K_mj(qh - u)] du`` (``K(<0) = 0``),
integrated by Gauss-Legendre in ``u``; ``sum_q W[q] = K_mj(inf)`` exactly, so no mass is lost. Forward
substitution ``P[n] = (I + W[0]^T)^(-1) (G[n] - sum_{k<n} W[n-k]^T P[k])`` runs in a ``lax.scan``.

Tail (eventual capture)
-----------------------
The eventual split solves the steady-state form of the same renewal equations,
``G_j(inf) = P_j(inf) + sum_m K_mj(inf) P_m(inf)`` (``G(inf) = a/rho e^(-gap sqrt(k/D))``), and
``tail = P(inf) - sum_l hits``. This avoids extrapolating the slow ``t^(-1/2)`` approach when ``k = 0`` and is
consistent with the time-domain solution (the discrete kernels conserve mass).

Measured accuracy
-----------------
See :data:`VALIDATED` and ``results/validation/`` (written by ``studies/validate_responses.py``).
"""

from __future__ import annotations

from functools import partial

import jax
import jax.numpy as jnp
import numpy as np

from capacity.errors import InputError
from capacity.physics._harmonic import landing_nodes, lone_cdf, lone_limit

DEFAULT_SUBSTEPS = 40
N_POLAR = 12
N_AZIMUTH = 12
N_SOURCE_TIME = 4

# Range over which the accuracy was measured (filled from the validation study; see validity_notes).
VALIDATED = {
    "min_gap_over_radius": 0.2,  # smallest sphere-to-sphere surface gap / smaller radius
    "max_radius_ratio": 2.0,  # largest / smallest radius
    "min_source_gap_over_radius": 0.5,  # emitter-to-surface gap / that sphere's radius
    "min_decay_length_over_radius": 1.0,  # sqrt(D/k) / smallest radius
}


def _pair_kernel_cdf(times, source, centres, radii, diffusion, degradation, n_polar, n_azimuth):
    """``K[t, m, j]``: CDF at ``times`` (T,) of the lone time from m's landing law (seen from source) to j.

    Also returns the eventual values ``Kinf[m, j]``. Diagonal entries are zeroed.
    """
    num = centres.shape[0]

    def from_sphere(centre_m, radius_m):
        points, weights = landing_nodes(source, centre_m, radius_m, n_polar, n_azimuth)  # (Q,3), (Q,)
        rho = jnp.linalg.norm(points[:, None, :] - centres[None, :, :], axis=-1)  # (Q, R)
        rho = jnp.maximum(rho, radii[None, :])  # the diagonal (m == j) is masked below
        cdf = lone_cdf(times[:, None, None], radii[None, None, :], rho[None], diffusion, degradation)
        limit = lone_limit(radii[None, :], rho, diffusion, degradation)
        return jnp.einsum("tqj,q->tj", cdf, weights), weights @ limit

    kcdf, kinf = jax.lax.map(lambda args: from_sphere(*args), (centres, radii))  # (R, T, R), (R, R)
    off = 1.0 - jnp.eye(num, dtype=jnp.float64)
    return jnp.transpose(kcdf, (1, 0, 2)) * off[None], kinf * off


def _one_emitter(source, centres, radii, diffusion, degradation, symbol_interval, memory, substeps, quad):
    n_polar, n_azimuth, n_gl = quad
    num = centres.shape[0]
    steps = (memory + 1) * substeps
    h = symbol_interval / substeps
    grid = h * jnp.arange(steps + 1, dtype=jnp.float64)

    rho0 = jnp.linalg.norm(source[None, :] - centres, axis=-1)  # (R,)
    lone = lone_cdf(grid[:, None], radii[None, :], rho0[None, :], diffusion, degradation)  # (N+1, R)
    increments = jnp.diff(lone, axis=0)  # (N, R)
    lone_inf = lone_limit(radii, rho0, diffusion, degradation)

    # Source-time quadrature inside one step: u_g in (0, h), weights summing to 1.
    x_gl, w_gl = np.polynomial.legendre.leggauss(n_gl)
    u = 0.5 * h * (jnp.asarray(x_gl) + 1.0)
    w = 0.5 * jnp.asarray(w_gl)
    times = (grid[:, None] - u[None, :]).reshape(-1)  # (N+1)*n_gl, negative ones give 0
    kcdf, kinf = _pair_kernel_cdf(times, source, centres, radii, diffusion, degradation, n_polar, n_azimuth)
    kcdf = jnp.einsum("ngmj,g->nmj", kcdf.reshape(steps + 1, n_gl, num, num), w)  # (N+1, R, R)
    kernel = jnp.diff(kcdf, axis=0)  # W[q], q = 0..N-1, shape (N, R, R)

    coupling = jnp.eye(num, dtype=jnp.float64) + kernel[0].T
    inverse = jnp.linalg.inv(coupling)
    # Lagged kernels W[q] for q >= 1 laid out so that one dynamic slice gives W[n - k] for k = 0..N-1.
    lagged = jnp.concatenate([jnp.zeros((steps, num, num)), kernel[1:]], axis=0)  # index q + N - 1
    reversed_ = lagged[::-1]

    def step(history, n):
        window = jax.lax.dynamic_slice(reversed_, (steps - 1 - n, 0, 0), (steps, num, num))
        driven = jnp.einsum("kmj,km->j", window, history)
        current = inverse @ (increments[n] - driven)
        return history.at[n].set(current), None

    history, _ = jax.lax.scan(step, jnp.zeros((steps, num)), jnp.arange(steps))
    hits = history.reshape(memory + 1, substeps, num).sum(axis=1).T  # (R, L+1)
    eventual = jnp.linalg.solve(jnp.eye(num, dtype=jnp.float64) + kinf.T, lone_inf)
    return hits, eventual - hits.sum(axis=1)


@partial(jax.jit, static_argnames=("memory", "substeps", "quad"))
def _shadowed_core(emitters, centres, radii, diffusion, degradation, symbol_interval, memory, substeps, quad):
    fn = partial(_one_emitter, memory=memory, substeps=substeps, quad=quad)
    return jax.vmap(lambda e: fn(e, centres, radii, diffusion, degradation, symbol_interval))(emitters)


def _is_concrete(*values) -> bool:
    return not any(isinstance(v, jax.core.Tracer) for v in values)


def _check_inputs(emitters, centres, radii, diffusion, degradation, symbol_interval, memory, substeps):
    if emitters.ndim != 2 or emitters.shape[1] != 3:
        raise InputError("emitters", emitters.shape, "must have shape (E, 3) in metres", "pass an (E, 3) array")
    if centres.ndim != 2 or centres.shape[1] != 3:
        raise InputError("centres", centres.shape, "must have shape (R, 3) in metres", "pass an (R, 3) array")
    if radii.shape != (centres.shape[0],):
        raise InputError("radii", radii.shape, f"must have shape ({centres.shape[0]},)", "one radius per centre")
    if not isinstance(memory, (int, np.integer)) or memory < 0:
        raise InputError("memory", memory, "must be a non-negative int", "give the number of lags kept, e.g. 10")
    if not isinstance(substeps, (int, np.integer)) or substeps < 1:
        raise InputError("substeps", substeps, "must be a positive int", f"use e.g. {DEFAULT_SUBSTEPS}")
    if not _is_concrete(emitters, centres, radii, diffusion, degradation, symbol_interval):
        return  # values are traced: checked by the caller's concrete call, if any
    e, c, r = np.asarray(emitters), np.asarray(centres), np.asarray(radii)
    for name, arr in (("emitters", e), ("centres", c), ("radii", r)):
        if not np.all(np.isfinite(arr)):
            raise InputError(name, arr.tolist(), "must be finite", "remove NaN/inf entries")
    if np.any(r <= 0):
        raise InputError("radii", r.tolist(), "must be positive (metres)", "give radii such as 5e-6")
    for name, val, lo in (("diffusion", diffusion, 0.0), ("symbol_interval", symbol_interval, 0.0)):
        if not np.isfinite(float(val)) or float(val) <= lo:
            raise InputError(name, float(val), "must be positive and finite", "use SI units, e.g. 1e-10 m^2/s")
    if not np.isfinite(float(degradation)) or float(degradation) < 0:
        raise InputError("degradation", float(degradation), "must be >= 0 (1/s)", "use 0 for a stable molecule")
    dist = np.linalg.norm(e[:, None, :] - c[None, :, :], axis=-1)
    inside = np.argwhere(dist <= r[None, :])
    if inside.size:
        i, j = inside[0]
        raise InputError(f"emitters[{i}]", e[i].tolist(), f"is inside or on receiver {j}", "move it outside")
    pair = np.linalg.norm(c[:, None, :] - c[None, :, :], axis=-1)
    touching = np.argwhere(np.triu(pair <= r[:, None] + r[None, :], 1))
    if touching.size:
        i, j = touching[0]
        raise InputError(f"centres[{j}]", c[j].tolist(), f"receivers {i} and {j} overlap or touch",
                         "keep a positive gap between receiver surfaces")


def shadowed_hits(emitters, centres, radii, diffusion, degradation, symbol_interval, memory: int, *,
                  substeps: int = DEFAULT_SUBSTEPS):
    """Slot hit probabilities of several absorbing spheres that shadow each other (renewal model).

    Parameters
    ----------
    emitters : (E, 3) m, point sources (outside every sphere).
    centres : (R, 3) m, sphere centres; radii : (R,) m. Spheres must not touch.
    diffusion : m^2/s; degradation : 1/s (>= 0); symbol_interval : s (slot length Ts).
    memory : int (static), number of lags L kept.
    substeps : int (static), fine time steps per slot (default 40).

    Returns
    -------
    hits : (E, R, L+1), ``hits[i, j, l]`` = probability that a molecule released by emitter ``i`` at t = 0 is
        absorbed by receiver ``j`` during ``[l Ts, (l+1) Ts)``.
    tail : (E, R), probability of absorption by ``j`` after ``(L+1) Ts`` (eventual capture from the steady-state
        renewal equations minus the kept sum).

    Differentiable (forward and reverse) in emitters, centres, radii, diffusion, degradation (for k > 0) and
    symbol_interval; jit-compatible (memory and substeps static). See the module docstring for the renewal
    equations, the discretisation and the measured accuracy.
    """
    emitters = jnp.asarray(emitters, dtype=jnp.float64)
    centres = jnp.asarray(centres, dtype=jnp.float64)
    radii = jnp.asarray(radii, dtype=jnp.float64)
    _check_inputs(emitters, centres, radii, diffusion, degradation, symbol_interval, memory, substeps)
    args = [jnp.asarray(v, dtype=jnp.float64) for v in (diffusion, degradation, symbol_interval)]
    return _shadowed_core(emitters, centres, radii, *args, memory=int(memory), substeps=int(substeps),
                          quad=(N_POLAR, N_AZIMUTH, N_SOURCE_TIME))


def validity_notes(emitters, centres, radii, diffusion, degradation) -> list[str]:
    """Warnings for layouts outside the range where the accuracy of :func:`shadowed_hits` was measured.

    emitters (E, 3) m, centres (R, 3) m, radii (R,) m, diffusion m^2/s, degradation 1/s. Returns an empty list
    inside the validated range (see :data:`VALIDATED`: surface gap between receivers relative to the smaller
    radius, largest/smallest radius, emitter-to-surface gap relative to the radius, degradation length
    ``sqrt(D/k)`` relative to the radii).
    """
    e = np.asarray(emitters, dtype=float).reshape(-1, 3)
    c = np.asarray(centres, dtype=float).reshape(-1, 3)
    r = np.asarray(radii, dtype=float).reshape(-1)
    notes: list[str] = []
    v = VALIDATED
    for i in range(len(r)):
        for j in range(i + 1, len(r)):
            gap = np.linalg.norm(c[i] - c[j]) - r[i] - r[j]
            ratio = gap / min(r[i], r[j])
            if ratio < v["min_gap_over_radius"]:
                notes.append(
                    f"receivers {i} and {j}: surface gap / smaller radius = {ratio:.3g} is below the validated "
                    f"{v['min_gap_over_radius']}; the renewal model's error was not measured this close"
                )
    if len(r) > 1 and r.max() / r.min() > v["max_radius_ratio"]:
        notes.append(
            f"largest/smallest radius = {r.max() / r.min():.3g} exceeds the validated {v['max_radius_ratio']}"
        )
    for i, x in enumerate(e):
        for j in range(len(r)):
            ratio = (np.linalg.norm(x - c[j]) - r[j]) / r[j]
            if ratio < v["min_source_gap_over_radius"]:
                notes.append(
                    f"emitter {i} to receiver {j}: gap / radius = {ratio:.3g} is below the validated "
                    f"{v['min_source_gap_over_radius']}"
                )
    k = float(degradation)
    if k > 0 and len(r) > 1:
        length = np.sqrt(float(diffusion) / k)
        if length < v["min_decay_length_over_radius"] * r.min():
            notes.append(
                f"degradation length sqrt(D/k) = {length:.3g} m is below {v['min_decay_length_over_radius']} x the "
                "smallest radius, shorter than in any validated layout"
            )
    return notes
