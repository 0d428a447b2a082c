"""Active-set outer loop for Blahut–Arimoto on large input alphabets (many symbols, few of them used).

At the optimum of max_p I(p; W) - s * sum_x p_x b_x most inputs of a large alphabet get probability 0: by
Carathéodory's theorem an optimal law needs at most Y (outputs) mass points, and on Poisson counting channels
only a handful are used (Shamai, IEE Proc. I 137(6), 1990). The inner solver (``_ba_kernel.solve``, whose
Newton step builds an S x S Hessian) is therefore run on a small working set A of inputs, and the full
alphabet is consulted only through the optimality (KKT) conditions, which cost one S x Y pass:

1. A = the inputs with the largest g_x = D(W_x || q) - s b_x at the starting law (plus its heaviest inputs);
2. solve the channel restricted to A to the requested gap;
3. evaluate g_x on ALL inputs at the law found (zero outside A). The certificate of the full problem,
   gap = max_x g_x - F(p) (Blahut, IEEE Trans. IT 18(4), 1972, Thm 2, cost form), is checked over every
   input; if it exceeds ``tol``, inputs outside A with g_x > F(p) + tol exist: the worst few join A (in
   place of unused inputs of A with the smallest g_x, so the kernel keeps its compiled size) and the loop
   repeats from the current law. Inputs carrying mass are never dropped; the rounds are capped and the
   best certified point is returned.

This is column generation (a cutting-plane / "working set" method) applied to the concave program of the
capacity; the bound holds for any p, so the reported gap is as valid as for the full solve.
"""

from __future__ import annotations

import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.information import _ba_kernel as kernel

START_SIZE = 32  # first working set (a power of two: one compiled kernel shape for most problems)
MAX_ROUNDS = 200
WARM_STEPS = 8  # plain steps on all inputs before the first working set is chosen
MIX = 0.1  # weight of the uniform law in each warm start
GROW = 8  # violators added per round (the worst first)


def evaluate(p: np.ndarray, w: np.ndarray, negent: np.ndarray, b: np.ndarray, s: float) -> kernel.Evaluation:
    """The certificate over all inputs (NumPy, one S x Y pass): d_x, q, I, F = I - s P, gap (nats)."""
    q = p @ w
    d = negent - w @ np.log(np.maximum(q, kernel.TINY))
    info = float(p @ d)
    objective = info - s * float(p @ b)
    return kernel.Evaluation(d, q, info, objective, float(np.max(d - s * b)) - objective)


def _bucket(n: int) -> int:
    return max(START_SIZE, 1 << max(0, (n - 1).bit_length()))


def solve(w: np.ndarray, negent: np.ndarray, b: np.ndarray, s: float, p0: np.ndarray, tol: float,
          max_iter: int) -> kernel.Solution:
    """Maximise I(p; W) - s * p.b over all S inputs by working sets (nats; ``tol`` on the full gap).

    w : (S, Y) rows summing to 1 (zero-padded columns allowed); negent : (S,) sum_y W ln W; b : (S,) costs;
    p0 : (S,) starting law. Returns a ``_ba_kernel.Solution`` whose p (S,) and Evaluation cover every input;
    ``iterations`` and ``newton_steps`` are summed over the inner solves.
    """
    n_sym = w.shape[0]
    p = p0 / p0.sum()
    for _ in range(WARM_STEPS):  # plain Blahut–Arimoto steps on all inputs move mass towards the support
        ev = evaluate(p, w, negent, b, s)
        g = ev.d - s * b
        p = p * np.exp(g - g.max())
        p = p / p.sum()
    ev = evaluate(p, w, negent, b, s)
    g = ev.d - s * b
    # heaviest inputs after those steps, and the inputs that gain most from mass (largest g)
    n0 = min(START_SIZE, n_sym)
    chosen = np.zeros(n_sym, dtype=bool)
    chosen[np.argsort(-p, kind="stable")[: n0 - n0 // 4]] = True
    chosen[np.argsort(-g, kind="stable")[: n0 // 4]] = True
    active = np.flatnonzero(chosen)
    its = newton = 0
    best = None
    stalled = False
    for _ in range(MAX_ROUNDS):
        size = _bucket(active.size)
        pad = size - active.size
        w_a = np.concatenate([w[active], np.zeros((pad, w.shape[1]))]) if pad else w[active]
        # warm start, mixed with the uniform law: an input entering with no mass would otherwise recover it
        # only at the (slow) rate of the Blahut–Arimoto step near the optimum
        p_a = p[active]
        uniform = np.full(active.size, 1.0 / active.size)
        p_a = (1.0 - MIX) * p_a / p_a.sum() + MIX * uniform if p_a.sum() > 0 else uniform
        sol = kernel.solve(jnp.asarray(w_a), jnp.asarray(np.concatenate([negent[active], np.zeros(pad)])),
                           jnp.asarray(np.concatenate([b[active], np.zeros(pad)])), jnp.asarray(s),
                           jnp.asarray(np.arange(size) < active.size),
                           jnp.asarray(np.concatenate([p_a, np.zeros(pad)])), jnp.asarray(tol), jnp.asarray(max_iter))
        its += int(sol.iterations)
        newton += int(sol.newton_steps)
        p = np.zeros(n_sym)
        p[active] = np.asarray(sol.p)[: active.size]
        ev = evaluate(p, w, negent, b, s)
        if best is None or ev.gap < best[1].gap:
            best = (p, ev, sol)
        if ev.gap <= tol:
            break
        g = ev.d - s * b
        outside = np.ones(n_sym, dtype=bool)
        outside[active] = False
        violators = np.flatnonzero(outside & (g > ev.objective + tol))
        if violators.size == 0:  # the gap sits inside the working set: the inner solve did not converge
            stalled = bool(sol.stalled)
            break
        worst = violators[np.argsort(-g[violators], kind="stable")[:GROW]]
        # make room within the current kernel size by dropping unused inputs that gain least from mass
        room = size - active.size
        unused = active[p[active] <= 0.0]
        n_drop = min(max(worst.size - room, 0), unused.size)
        dropped = unused[np.argsort(g[unused], kind="stable")[:n_drop]]
        active = np.sort(np.concatenate([np.setdiff1d(active, dropped), worst]))
    p, ev, sol = best
    return kernel.Solution(p, ev, np.asarray(its), np.asarray(newton), np.asarray(stalled), sol.cost_slope)
