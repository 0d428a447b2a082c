"""Capacity per unit cost (bits per molecule) of a memoryless channel with a free input.

S. Verdú, "On channel capacity per unit cost", IEEE Trans. IT 36(5), 1990, Theorem 2: if input 0 costs
nothing and every other input x costs b(x) > 0, then

    C_cost = sup_P C(P) / P = lim_{P->0} C(P) / P = sup_x D(W(.|x) || W(.|0)) / b(x).

Infinite values (an input whose outputs the free input never produces, e.g. a Poisson count with no
background) are not returned silently: both functions raise ``InputError`` explaining why the value is
unbounded and what bounds it (background counts, a peak release).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from capacity.errors import InputError

__all__ = ["capacity_per_unit_cost", "poisson_unit_cost"]


def _rows(transition):
    """(S, Y) matrix, its log (exact log_matrix of a Transition when given) and the truncated tail (S,)."""
    if hasattr(transition, "matrix") and hasattr(transition, "truncated_mass"):
        w = np.asarray(transition.matrix, dtype=float)
        log_w = np.asarray(transition.log_matrix, dtype=float)
        tail = np.clip(np.asarray(transition.truncated_mass, dtype=float), 0.0, 1.0)
    else:
        w = np.asarray(transition, dtype=float)
        if w.ndim != 2:
            raise InputError("transition", w.shape, "must be an (S, Y) matrix", "pass a Transition or 2-D array")
        with np.errstate(divide="ignore"):
            log_w = np.log(w)
        tail = np.clip(1.0 - w.sum(axis=1), 0.0, 1.0)
        tail = np.where(tail > 1e-13, tail, 0.0)
    if w.ndim != 2 or not np.all(np.isfinite(w)) or np.any(w < 0):
        raise InputError("transition", w.shape, "must be an (S, Y) matrix of probabilities",
                         "pass a Transition or a 2-D array of W(y|x)")
    return w, log_w, tail


def capacity_per_unit_cost(transition, cost) -> tuple[float, int]:
    """sup_x D(W_x || W_0) / b(x) in bits per cost unit, and the maximising symbol's index.

    transition : Transition or (S, Y) array W(y|x). A truncated tail enters as one lumped output (data
        processing: D can only shrink); if the free symbol's own tail is 0 it is left out (its part of D
        is then of the order of the truncated mass). Uses ``log_matrix`` when given, so tiny
        probabilities keep their digits.
    cost : (S,) non-negative costs; exactly one free symbol (cost 0), or several with identical rows.
    Raises InputError when there is no free symbol, when distinct free symbols exist (information at no
    cost: unbounded), or when some D is infinite.
    """
    w, log_w, tail = _rows(transition)
    b = np.asarray(cost, dtype=float)
    if b.shape != (w.shape[0],) or not np.all(np.isfinite(b)) or np.any(b < 0):
        raise InputError("cost", b.shape, f"must be {w.shape[0]} finite non-negative costs", "one per symbol")
    free = np.flatnonzero(b == 0)
    if free.size == 0:
        raise InputError("cost", b.min(), "no symbol costs 0, so the capacity per unit cost of Verdú (1990) "
                         "is not defined this way", "include a zero-release symbol (cost 0)")
    zero = w[free[0]]
    if free.size > 1 and np.max(np.abs(w[free] - zero[None, :])) > 1e-12:
        raise InputError("cost", f"{free.size} free symbols", "free symbols with different output laws carry "
                         "information at no cost: the capacity per unit cost is unbounded",
                         "give all but one of them a positive cost")
    paid = np.flatnonzero(b > 0)
    if paid.size == 0:
        raise InputError("cost", b, "every symbol is free", "give the signalling symbols their cost")
    log_zero = log_w[free[0]]
    with np.errstate(divide="ignore", invalid="ignore"):
        outside = (w[paid] > 0) & ~np.isfinite(log_zero)[None, :]
        if np.any(outside):
            bad = int(paid[np.flatnonzero(outside.any(axis=1))[0]])
            raise InputError("transition", f"symbol {bad}", "produces outputs the free symbol never produces, "
                             "so D(W_x || W_0) and the capacity per unit cost are infinite",
                             "model background/dark counts so the free symbol can produce every output")
        terms = np.where(w[paid] > 0, w[paid] * (log_w[paid] - log_zero[None, :]), 0.0)
        d = terms.sum(axis=1)
        if tail[free[0]] > 0:  # the truncated tail as one lumped output: D can only shrink (data processing)
            d = d + special.xlogy(tail[paid], tail[paid]) - special.xlogy(tail[paid], tail[free[0]])
    ratio = d / b[paid] / math.log(2.0)
    k = int(np.argmax(ratio))
    return float(ratio[k]), int(paid[k])


def poisson_unit_cost(hit_prob: float, background: float, peak: float) -> float:
    """Capacity per unit cost, bits per molecule, of a Poisson count with background and a peak release.

    Releasing N molecules gives Poisson(lambda0 + pN) against Poisson(lambda0) for N = 0, so
    D(N) = (lambda0 + pN) ln(1 + pN / lambda0) - pN (nats) and D(N)/N increases with N: the supremum over
    0 < N <= peak is at N = peak (Verdú 1990; references.md). ``hit_prob`` p in (0, 1], ``background``
    lambda0 > 0 counts per slot, ``peak`` N_max > 0 molecules. lambda0 = 0 makes the value infinite: an
    InputError says so (there is no finite answer to return).
    """
    p, lam0, n = float(hit_prob), float(background), float(peak)
    if not (0 < p <= 1):
        raise InputError("hit_prob", hit_prob, "must lie in (0, 1]", "the lag-0 hit probability of one molecule")
    if not (np.isfinite(n) and n > 0):
        raise InputError("peak", peak, "must be a positive finite number of molecules",
                         "without a peak D(N)/N grows without bound")
    if not np.isfinite(lam0) or lam0 < 0:
        raise InputError("background", background, "must be finite and >= 0", "mean background counts")
    if lam0 == 0:
        raise InputError("background", background, "with no background a single count reveals the release, "
                         "so the capacity per unit cost is infinite", "give the background (dark) count rate")
    x = p * n
    d = (lam0 + x) * math.log1p(x / lam0) - x
    return d / n / math.log(2.0)
