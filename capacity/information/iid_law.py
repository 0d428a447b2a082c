"""An i.i.d. input law optimised for the channel WITH ISI, under a molecule budget.

The ISI-free optimum (Blahut–Arimoto on the release slot) ignores that a symbol's molecules keep arriving in later
slots, as signal for itself and as interference for the next symbols. Here the law is tuned on the windowed
decision-feedback lower bound I_win of :mod:`capacity.information.window` (a true lower bound on the i.i.d. rate
with ISI) by exponentiated-gradient (mirror) ascent on the simplex::

    p <- p exp(eta dI_win/dp - s c) / Z,   s >= 0 the smallest tilt with sum_x p_x c_x <= budget

(Kivinen & Warmuth, Inf. Comput. 132, 1997, for exponentiated gradients; the tilt by the cost is the same as in
cost-constrained Blahut–Arimoto, Blahut 1972), started from the best point of a scan along p exp(-t c / max c)
(large releases less often: what ISI asks for), which does not depend on the noisy gradient. Gradients are
likelihood-ratio estimates on common random numbers (one key throughout); the best law seen, by the same
estimate, is returned with its estimate.
"""

from __future__ import annotations

from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.information.window import auto_window, chunk_size, draw_shared, surrogate

LAW_FLOOR = 1e-9


class LawResult(NamedTuple):
    """law (S,), the search's estimate of I_win at it (bits/symbol; callers re-estimate it on their own draws),
    mean cost, iterations, history of estimates."""

    law: np.ndarray
    rate: float
    mean_cost: float
    iterations: int
    history: list


def tilt_to_budget(law: np.ndarray, cost: np.ndarray, budget: float | None) -> np.ndarray:
    """The law tilted by exp(-s c) with the smallest s >= 0 that meets ``sum p c <= budget`` (bisection)."""
    p = np.asarray(law, dtype=float)
    p = p / p.sum()
    if budget is None or p @ cost <= budget:
        return p
    if budget < cost.min() - 1e-12:
        raise InputError("budget", budget, f"is below the cheapest symbol ({cost.min():g} molecules)",
                         "raise the budget or add a silent symbol to the alphabet")
    scale = max(float(np.ptp(cost)), 1e-300)

    def tilted(s):
        w = np.log(np.maximum(p, 1e-300)) - s * (cost - cost.min()) / scale
        w = np.exp(w - w.max())
        return w / w.sum()

    lo, hi = 0.0, 1.0
    while tilted(hi) @ cost > budget and hi < 1e6:
        hi *= 2.0
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if tilted(mid) @ cost > budget else (lo, mid)
    return tilted(hi)


LAW_FUTURES = 64  # futures summed over during the search (the final comparison uses the full window)
#: tilts t of the initial scan p exp(-t c / max c)
TILTS = (0.5, 1.0, 1.5, 2.0, 3.0, 4.0)


def optimise_iid_law(hits, base, symbols, cost, budget, init_law, *, tail=None, window=None, n_samples=2048,
                     iterations=15, step=1.0, seed=0) -> LawResult:
    """Mirror ascent of I_win over i.i.d. laws with mean cost <= budget (module docstring).

    hits (E, R, L+1); base (R,) background counts per slot; symbols (S, E) molecules; cost (S,) molecules;
    budget molecules per symbol or None; init_law (S,) start (e.g. the ISI-free optimum). tail (E, R): mass
    beyond lag L, added as mean interference at the current law (None: none). step: eta in nats per bit of
    gradient, halved whenever the estimate falls.
    """
    h = jnp.asarray(hits, dtype=jnp.float64)
    b0 = np.asarray(base, dtype=float)
    sym = jnp.asarray(symbols, dtype=jnp.float64)
    cost = np.asarray(cost, dtype=float)
    S = sym.shape[0]
    L = h.shape[2] - 1
    J = auto_window(S, L, LAW_FUTURES) if window is None else int(window)
    chunk = chunk_size(S, J, h.shape[1])
    key = jax.random.PRNGKey(int(seed))
    tail_a = None if tail is None else np.asarray(tail, dtype=float)

    def base_at(p):
        extra = 0.0 if tail_a is None else (p @ np.asarray(symbols, dtype=float)) @ tail_a
        return jnp.asarray(b0 + extra)

    vg = jax.jit(jax.value_and_grad(lambda lw, bs, smp: surrogate(h, bs, sym, lw, *smp, J=J, chunk=chunk)))

    def evaluate(p):
        pj = jnp.asarray(p)
        bs = base_at(p)
        smp = draw_shared(key, h, bs, sym, pj, memory_past=L, J=J, n=int(n_samples))
        val, grad = vg(pj, bs, smp)
        return float(val), np.asarray(grad)

    p = tilt_to_budget(np.maximum(np.asarray(init_law, dtype=float), LAW_FLOOR), cost, budget)
    # first a scan along the family p exp(-t c / max c) (larger releases less often; t = 0 is the start), which
    # is robust to the noise of the gradient and holds the usual ISI optimum for few symbols; then the ascent
    value, grad = evaluate(p)
    history = [value]
    span = max(float(np.max(cost)), 1e-300)
    for t in TILTS:
        trial = p * np.exp(-t * cost / span)
        trial = np.maximum(trial / trial.sum(), LAW_FLOOR)
        v, gr = evaluate(trial)
        history.append(v)
        if v > value:
            p, value, grad = trial / trial.sum(), v, gr
    best_p, best_v = p, value
    eta = float(step)
    for _ in range(int(iterations)):
        g = grad - grad @ p  # the component along the simplex
        trial = p * np.exp(eta * g / max(np.max(np.abs(g)), 1e-12))
        trial = tilt_to_budget(np.maximum(trial / trial.sum(), LAW_FLOOR), cost, budget)
        v, gr = evaluate(trial)
        history.append(v)
        if v >= value:
            p, value, grad = trial, v, gr
            if v > best_v:
                best_p, best_v = trial, v
        else:
            eta *= 0.5
            if eta < 1e-3:
                break
    return LawResult(best_p, best_v, float(best_p @ cost), len(history) - 1, history)
