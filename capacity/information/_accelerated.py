"""Squared-extrapolation Blahut–Arimoto in NumPy: the quick first attempt for small alphabets.

Most channels of the tool have few inputs (S <= 64) and many outputs; there the Blahut–Arimoto map converges
linearly in a few dozen steps and each step is two S x Y matrix-vector products and Y logarithms. This
module accelerates that map by squared extrapolation (SQUAREM: Varadhan & Roland, "Simple and globally
convergent methods for accelerating the convergence of any EM algorithm", Scand. J. Stat. 35(2), 2008),
applied to theta = ln p; the Blahut–Arimoto step itself is a natural-gradient ascent step of I(p) with unit
step length (Matz & Duhamel, "Information geometric formulation and interpretation of accelerated
Blahut–Arimoto-type algorithms", ITW 2004), and extrapolation lengthens it along the recent path.

One cycle: theta1 = F(theta0), theta2 = F(theta1), r = theta1 - theta0, v = theta2 - 2 theta1 + theta0,
alpha = -|r| / |v| (clipped to [-1e3, -1]), theta' = theta0 - 2 alpha r + alpha^2 v, then one more F from theta'. The
extrapolated point is kept only if its objective F(p) = I - s P is at least that of theta2 (monotone,
so never worse than plain Blahut–Arimoto); otherwise the cycle continues from theta2.

Every evaluation yields the certificate gap = max_x (d_x - s b_x) - F(p) (Blahut 1972), so the answer is
certified exactly as in the compiled solver. On channels whose optimal law puts probability 0 on some
inputs the map (and its extrapolation) has a slow O(1/n) tail; after ``max_evals`` evaluations the caller
falls back to the compiled solver with its Newton step, warm-started from the best law found here.
No JAX is involved: nothing to compile, and the per-step cost is that of plain NumPy.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

TINY = 1e-300
LOG_FLOOR = -700.0  # ln p never below this (p ~ 1e-304): an input can come back
MAX_STEP = 1e3  # cap on |alpha| (the extrapolation length; beyond it the floor on ln p decides anyway)


class Attempt(NamedTuple):
    p: np.ndarray  # (S,) best law seen (smallest gap)
    d: np.ndarray  # (S,) D(W_x || q) at p, nats
    q: np.ndarray  # (Y,) output law at p
    info: float  # I(p; W), nats
    objective: float  # I - s * mean cost
    gap: float  # certificate, nats
    evaluations: int
    converged: bool


def _evaluate(theta, w, negent, b, s, overflow):
    p = np.exp(theta)
    q = p @ w
    d = negent - w @ np.log(np.maximum(q, TINY))
    if overflow is not None:  # one more output column, kept apart to spare a copy of w
        q_o = float(p @ overflow)
        d = d - overflow * np.log(max(q_o, TINY))
        q = np.append(q, q_o)
    info = float(p @ d)
    g = d - s * b
    objective = info - s * float(p @ b)
    return p, q, d, g, info, objective, float(g.max()) - objective


def _step(theta, g):
    t = theta + g
    t = t - t.max()
    return np.maximum(t - np.log(np.exp(t).sum()), LOG_FLOOR)


def _normalise(theta):
    theta = np.minimum(theta, 0.0)
    t = theta - theta.max()
    return np.maximum(t - np.log(np.exp(t).sum()), LOG_FLOOR)


def solve(w: np.ndarray, negent: np.ndarray, b: np.ndarray, s: float, p0: np.ndarray, tol: float,
          max_evals: int = 60, overflow: np.ndarray | None = None) -> Attempt:
    """Maximise I(p; W) - s p.b by extrapolated Blahut–Arimoto steps until gap <= tol (nats) or max_evals.

    w : (S, Y) rows summing to 1 (with ``overflow``: (S,) the mass of one more output column, kept apart);
    negent : (S,) sum_y W ln W over all columns; b : (S,) costs; p0 : (S,) start (zeros are floored at e^-700).
    """
    theta = _normalise(np.log(np.maximum(p0 / p0.sum(), TINY)))
    best = None
    evals = 0

    def look(th):
        nonlocal best, evals
        p, q, d, g, info, objective, gap = _evaluate(th, w, negent, b, s, overflow)
        evals += 1
        if best is None or gap < best.gap:
            best = Attempt(p, d, q, info, objective, gap, evals, gap <= tol)
        return g, objective, gap

    g0, f0, gap0 = look(theta)
    while gap0 > tol and evals + 3 <= max_evals:
        th1 = _step(theta, g0)
        g1, f1, gap1 = look(th1)
        if gap1 <= tol:
            break
        th2 = _step(th1, g1)
        g2, f2, gap2 = look(th2)
        if gap2 <= tol:
            break
        r, v = th1 - theta, th2 - 2.0 * th1 + theta
        alpha = float(np.clip(-np.sqrt(r @ r) / max(np.sqrt(v @ v), TINY), -MAX_STEP, -1.0))
        th_x = _normalise(theta - 2.0 * alpha * r + alpha * alpha * v)
        g_x, f_x, gap_x = look(th_x)
        if f_x >= f2:  # extrapolation at least as good as two plain steps: continue from it
            theta, g0, gap0 = th_x, g_x, gap_x
        else:
            theta, g0, gap0 = th2, g2, gap2
    return best._replace(evaluations=evals)
