"""Jit-compiled inner solver of the Blahut–Arimoto family (nats; one Lagrange slope ``s`` held fixed).

Maximises F(p) = I(p; W) - s * sum_x p_x b_x over the input simplex. The channel ``w`` is either a dense (S, Y)
matrix whose rows sum to 1 (the public wrapper appends an overflow column for truncated mass), or a
:class:`Product`: independent counts at R receivers, W(y|x) = prod_j A_j[x, y_j] on a product grid of counts, plus
one overflow output. The solver touches W only through three contractions (output law, expected log output law,
the S x S Gram matrix of the Newton step); on a product they are einsums over the factors, so the (S, Y) matrix is
never formed (same arithmetic count, but matrix-matrix products on small factors instead of passes over a large
matrix).

Each iteration evaluates two candidates and keeps the one with the larger F (ties: the smaller gap), except in
the quadratic regime (the Newton step gained and at least halved the gap), where the Newton step is taken alone:

* the Blahut–Arimoto step p'_x ∝ p_x exp(d_x - s b_x), d_x = D(W_x || pW) (Arimoto 1972; Blahut 1972),
  which never decreases F;
* a Newton step on the KKT system of max F over the simplex (the active set is refined by dropping
  coordinates the step would make negative). Gradient dF/dp_x = d_x - 1 - s b_x, Hessian
  -sum_y W(y|x) W(y|x') / q(y). It converges quadratically once the support is found, which removes
  the O(1/n) tail of the plain iteration on inputs whose optimal probability is 0.

Stopping uses the certificate, valid for ANY p (Blahut 1972, Thm 2; cost form in references.md):
C(P) <= s P + max_x [d_x - s b_x] with P = sum p b, so gap = max_x (d_x - s b_x) - F(p) >= 0.
"""

from __future__ import annotations

from functools import partial
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax
from jax.scipy.special import logsumexp

from capacity import _jax  # noqa: F401  (float64)

TINY = 1e-300
_MAX_PASSES = 16  # active-set passes per Newton step (entries still negative after them are clipped)
_FLOOR = 1e-300  # Blahut–Arimoto step: p is floored here so an input dropped by Newton can come back


class Product(NamedTuple):
    """W(y|x) = prod_j factors[j][x, y_j] for y on the grid, and W(overflow|x) = overflow[x]; rows sum to 1.

    factors : R arrays (S, Y_j), per-receiver count laws on 0..Y_j-1 (each row may sum to less than 1: its
    missing mass is part of ``overflow``); overflow : (S,) = 1 - prod_j sum_y factors[j][x, y].
    """

    factors: tuple
    overflow: jax.Array


_AXES = "abcdefghijklmnopqrstuvw"


def _grid_spec(n_recv: int) -> tuple[str, str]:
    axes = _AXES[:n_recv]
    return ",".join("x" + a for a in axes), axes


def output_law(w, p):
    """q = p W: (Y,) for a dense matrix; (grid (Y_1, ..., Y_R), overflow scalar) for a :class:`Product`."""
    if isinstance(w, Product):
        if len(w.factors) == 2:  # one matrix product (cheaper than the general contraction)
            grid = (w.factors[0] * p[:, None]).T @ w.factors[1]
        else:
            rows, axes = _grid_spec(len(w.factors))
            grid = jnp.einsum(f"x,{rows}->{axes}", p, *w.factors, optimize="optimal")
        return grid, jnp.dot(p, w.overflow)
    return p @ w


def expected_log(w, q):
    """sum_y W(y|x) ln q(y) for every input x (q floored at TINY; W = 0 contributes 0)."""
    if isinstance(w, Product):
        grid, over = q
        log_grid = jnp.log(jnp.maximum(grid, TINY))
        if len(w.factors) == 2:
            inner = jnp.sum((w.factors[0] @ log_grid) * w.factors[1], axis=1)
        else:
            rows, axes = _grid_spec(len(w.factors))
            inner = jnp.einsum(f"{rows},{axes}->x", *w.factors, log_grid, optimize="optimal")
        return inner + w.overflow * jnp.log(jnp.maximum(over, TINY))
    return w @ jnp.log(jnp.maximum(q, TINY))


def gram(w, q):
    """G[x, x'] = sum_y W(y|x) W(y|x') / q(y) (q floored at TINY), the negative Hessian of I at q.

    On a :class:`Product` only the pairs x <= x' are contracted (G is symmetric): for each pair the factors'
    row products A_j[x] * A_j[x'] meet 1/q in one contraction, then the triangle is mirrored."""
    if isinstance(w, Product):
        grid, over = q
        n_sym = w.overflow.shape[0]
        upper, lower = (jnp.asarray(a) for a in _triangle(n_sym))
        pairs = [a[upper] * a[lower] for a in w.factors]  # (P, Y_j), P = S (S + 1) / 2
        inv = 1.0 / jnp.maximum(grid, TINY)
        axes = _AXES[: len(w.factors)]
        g = jnp.einsum(",".join("p" + a for a in axes) + f",{axes}->p", *pairs, inv, optimize="optimal")
        g = g + w.overflow[upper] * w.overflow[lower] / jnp.maximum(over, TINY)
        full = jnp.zeros((n_sym, n_sym), dtype=g.dtype).at[upper, lower].set(g)
        return full.at[lower, upper].set(g)
    wn = w / jnp.sqrt(jnp.maximum(q, TINY))[None, :]
    return wn @ wn.T


def _triangle(n: int):
    return np.triu_indices(n)


class Evaluation(NamedTuple):
    d: jax.Array  # (S,) D(W_x || q), nats
    q: jax.Array  # output law: (Y,), or (grid, overflow) for a Product
    info: jax.Array  # I(p; W), nats
    objective: jax.Array  # I - s * mean cost
    gap: jax.Array  # max_x (d_x - s b_x) - objective, nats


@jax.jit
def evaluate(p, w, negent, b, s, valid) -> Evaluation:
    """q = pW, d = sum_y W ln W - W ln q, I = p.d and the certified gap (nats); rows with ``valid`` False
    are padding (probability 0, excluded from the maximum)."""
    q = output_law(w, p)
    d = negent - expected_log(w, q)
    info = jnp.dot(p, d)
    objective = info - s * jnp.dot(p, b)
    gap = jnp.max(jnp.where(valid, d - s * b, -jnp.inf)) - objective
    return Evaluation(d, q, info, objective, gap)


def _ba_step(p, ev: Evaluation, b, s, valid):
    logits = jnp.where(valid, jnp.log(jnp.maximum(p, _FLOOR)) + (ev.d - s * b), -jnp.inf)
    return jnp.exp(logits - logsumexp(logits))


def _newton_step(p, ev: Evaluation, w, b, s, valid, mu):
    """Damped Newton step on the KKT system with a drop-the-negative active set; a point of the simplex.

    The damping mu * diag(1/p) (Levenberg–Marquardt in the metric of the Blahut–Arimoto step, whose first
    order form is dp = p (g - nu)) keeps steps bounded where the Hessian is singular (more inputs than
    outputs, nearly collinear rows); mu shrinks after successful steps, so the step becomes pure Newton.
    """
    g = ev.d - s * b
    hess = -gram(w, ev.q)
    start = ((p > 0) | (g > ev.objective)) & valid  # current support plus inputs that violate the KKT condition
    damp = 1e-12 * jnp.max(jnp.abs(jnp.diag(hess))) + mu / jnp.maximum(p, 1e-8)

    def solve(active):
        return _kkt_solve(hess, damp, active, -g + hess @ jnp.where(active, 0.0, p), -p, p)

    def cond(state):
        active, new, changed, passes = state
        return changed & (passes < _MAX_PASSES)

    def body(state):
        active, _, _, passes = state
        new = solve(active)
        drop = active & (new < 0)
        return active & ~drop, new, jnp.any(drop), passes + 1

    active, new, _, _ = lax.while_loop(cond, body, (start, p, jnp.array(True), 0))
    new = jnp.where(active, jnp.maximum(new, 0.0), 0.0)
    total = jnp.sum(new)
    ok = jnp.all(jnp.isfinite(new)) & (total > 0)
    return jnp.where(ok, new / jnp.where(ok, total, 1.0), p)


def _kkt_solve(hess, damp, active, rhs_active, fixed_inactive, p):
    """Solve H_AA dA - nu 1 = rhs_A, d_i = fixed_i off A, sum(d) = 0 with one Cholesky factor.

    N = -H_AA + diag(damp) (positive definite) on A, identity off A; d = N^-1 (c - nu a) with c = -rhs on A and
    the fixed values off A; nu from the sum constraint. Returns p + d.
    """
    a = active.astype(hess.dtype)
    n_mat = -(hess * a[:, None] * a[None, :]) + jnp.diag(damp * a + (1.0 - a))
    c = jnp.where(active, -rhs_active, fixed_inactive)
    factor = jax.scipy.linalg.cho_factor(n_mat, lower=True)
    sol = jax.scipy.linalg.cho_solve(factor, jnp.stack([c, a], axis=1))
    u_c, u_a = sol[:, 0], sol[:, 1]
    sigma = jnp.sum(jnp.where(active, 0.0, -fixed_inactive))  # mass moved off A must land on A
    nu = (jnp.dot(a, u_c) - sigma) / jnp.dot(a, u_a)
    return p + u_c - nu * u_a


class Solution(NamedTuple):
    p: jax.Array
    ev: Evaluation
    iterations: jax.Array
    newton_steps: jax.Array
    stalled: jax.Array
    cost_slope: jax.Array  # d(mean cost)/ds at the returned point (cost^2 per nat)


@partial(jax.jit, static_argnames=("newton",))
def solve(w, negent, b, s, valid, p0, tol, max_iter, newton: bool = True) -> Solution:
    """Iterate from p0 until gap <= tol (nats) or max_iter; returns the best (smallest-gap) point seen.

    Shapes: w (S, Y) or a Product with S rows, negent (S,), b (S,), valid (S,) bool (False marks padding rows), p0 (S,).
    """
    ev0 = evaluate(p0, w, negent, b, s, valid)
    eps = 1e-14

    def cond(st):
        p, ev, it, nsteps, best_p, best_ev, since, mu = st
        return (best_ev.gap > tol) & (it < max_iter) & (since < 2000)

    def body(st):
        p, ev, it, nsteps, best_p, best_ev, since, mu = st
        if newton:
            p_nt = _newton_step(p, ev, w, b, s, valid, mu)
            ev_nt = evaluate(p_nt, w, negent, b, s, valid)
            scale = eps * (1.0 + jnp.abs(ev.objective))
            gain = ev_nt.objective > ev.objective + scale  # the damped step improved on the current point
            # in the quadratic regime (the step gained and at least halved the gap) the Blahut–Arimoto
            # candidate is not evaluated: it could not compete and would cost one more pass over the channel
            quadratic = gain & jnp.isfinite(ev_nt.gap) & (ev_nt.gap <= 0.5 * ev.gap)

            def newton_only():
                return p_nt, ev_nt, jnp.array(True)

            def compare_with_ba():
                p_ba = _ba_step(p, ev, b, s, valid)
                ev_ba = evaluate(p_ba, w, negent, b, s, valid)
                scale_ba = eps * (1.0 + jnp.abs(ev_ba.objective))
                better = ev_nt.objective > ev_ba.objective + scale_ba
                tie = jnp.abs(ev_nt.objective - ev_ba.objective) <= scale_ba
                take = (better | (tie & (ev_nt.gap < ev_ba.gap))) & jnp.isfinite(ev_nt.gap)
                p_new = jnp.where(take, p_nt, p_ba)
                ev_new = jax.tree_util.tree_map(lambda a, c: jnp.where(take, a, c), ev_nt, ev_ba)
                return p_new, ev_new, take

            p_new, ev_new, take = lax.cond(quadratic, newton_only, compare_with_ba)
            nsteps = nsteps + take.astype(nsteps.dtype)
            mu = jnp.where(gain, jnp.maximum(mu * 0.1, 1e-14), jnp.minimum(mu * 10.0, 1e4))
        else:
            p_new = _ba_step(p, ev, b, s, valid)
            ev_new = evaluate(p_new, w, negent, b, s, valid)
        improved = ev_new.gap < best_ev.gap
        best_p = jnp.where(improved, p_new, best_p)
        best_ev = jax.tree_util.tree_map(lambda a, c: jnp.where(improved, a, c), ev_new, best_ev)
        since = jnp.where(improved, 0, since + 1)
        return p_new, ev_new, it + 1, nsteps, best_p, best_ev, since, mu

    zero = jnp.array(0)
    st = lax.while_loop(cond, body, (p0, ev0, zero, zero, p0, ev0, zero, jnp.asarray(1e-3, p0.dtype)))
    _, _, it, nsteps, best_p, best_ev, since, _ = st
    slope = lax.cond(jnp.any(b > 0), lambda: _cost_derivative(best_p, w, b), lambda: jnp.zeros((), p0.dtype))
    return Solution(best_p, best_ev, it, nsteps, since >= 2000, slope)


def _cost_derivative(p, w, b, support_threshold=1e-12):
    """d(mean cost)/ds at an optimum (implicit function theorem on the KKT system restricted to the support).

    [H  -1; 1^T 0] [dp; dnu] = [b; 0] on the support gives dP/ds = b . dp (<= 0), cost^2 per nat.
    """
    active = p > support_threshold * jnp.max(p)
    a = active.astype(p.dtype)
    hess = -(gram(w, output_law(w, p)) * a[:, None] * a[None, :])
    reg = 1e-12 * jnp.max(jnp.abs(jnp.diag(hess))) * jnp.ones_like(p)
    dp = _kkt_solve(hess, reg, active, b, jnp.zeros_like(p), jnp.zeros_like(p))
    return jnp.dot(b, dp)
