"""Capacity of a memoryless channel, with an optional mean-cost budget, certified by upper and lower bounds.

Public functions
----------------
blahut_arimoto(transition, cost=None, budget=None, tol=1e-9, max_iter=200_000, initial=None, slope=None)
    -> CapacityResult (bits)
capacity_cost_curve(transition, cost, budgets, tol=1e-9) -> list[CapacityResult]
mutual_information(input_distribution, log_transition) -> bits (JAX, differentiable)

Method: the Blahut–Arimoto iteration (S. Arimoto, IEEE Trans. IT 18(1), 1972; R. Blahut, IEEE Trans. IT
18(4), 1972) in the Lagrangian form for a cost b(x) with slope s >= 0: p_x <- p_x exp(D(W_x||pW) - s b_x).
Every iterate is certified: with d_x = D(W_x || pW) (nats) and P = sum_x p_x b_x,

    I(p; W) <= C(P) <= s P + max_x [d_x - s b_x]                                          (Blahut 1972)

and the run stops when the difference is below ``tol`` bits. The plain iteration is O(1/n) on inputs whose
optimal probability is 0; here each step also tries a Newton step on the KKT conditions (see
``_ba_kernel``) and keeps the better point, so the tail converges quadratically. The bounds hold for any
p, so the acceleration cannot spoil the certificate.

Large alphabets (more than ``ACTIVE_SET_ABOVE`` inputs) are solved on small working sets of inputs, with the
certificate checked over ALL inputs after every working-set solve and the worst violators added until it
holds (``_active_set``): the Newton step's S x S system stays small while most inputs keep probability 0.

Independent counts. A Transition that carries per-receiver ``factors`` (``poisson_transition`` with 2 or more
receivers: W(y|x) = prod_j A_j[x, y_j]) is solved on the factors: the output law, sum_y W ln q and the Newton
step's Gram matrix are einsums over them (``_ba_kernel.Product``), so the (S, Y) matrix is never read; sum_y W ln W
is sum_j h_j prod_{k != j} s_k (h_j = sum A_j ln A_j, s_k = sum A_k). No output columns are lumped on this route
(the count grid already stops where its tail is below the transition's tol); the truncated mass enters the gap as
below. Large alphabets (working sets) use the dense matrix.

Truncated rows (sum < 1, e.g. a Poisson law on a finite count grid) are completed with ONE overflow
output that carries the missing mass t_x. That lumped channel is a degraded version of the true one, so
its capacity is a valid lower bound; conversely lumping a set L of outputs loses at most
P(Y in L) * log2 S bits (I(X;Y) = I(X;Z) + P(L) I(X;Y | Y in L), and the last term is <= log2 S).
The reported ``gap`` therefore adds max_x t_x * log2 S to the iteration's gap, so
``[capacity, capacity + gap]`` brackets the capacity of the untruncated channel. Output columns that
carry less than 1e-3 * tol / log2 S of any row's mass in total are lumped into the same overflow output
(a speed-up; included in the same bound).

With a budget the slope s is found by a safeguarded Newton iteration on mean_cost(s) = budget: the
derivative d mean_cost / ds comes from the implicit function theorem on the KKT system, every inner solve
is warm-started from the nearest previous solution, and a bracket keeps the search safe. The final input
law is mixed between the two bracketing solutions (or with the cheapest symbol) so that its mean cost
equals the budget exactly, keeping the lower bound feasible (by concavity the mixture loses nothing to
first order).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import logsumexp
from scipy import special

from capacity import _jax  # noqa: F401  (float64)
from capacity._inputs import real_array, real_number, whole_number
from capacity.errors import InputError
from capacity.information import _active_set as active_set
from capacity.information import _ba_kernel as kernel
from capacity.information.result import CapacityResult

__all__ = ["blahut_arimoto", "capacity_cost_curve", "mutual_information"]

LN2 = math.log(2.0)
ACTIVE_SET_ABOVE = 64  # more inputs than this: working sets (``_active_set``) instead of one S x S Newton solve


class _Prepared(NamedTuple):
    kept: np.ndarray | None  # (S, Yk) kept output columns (a view of the input when nothing was lumped); None
    #                          when the channel is given by per-receiver factors
    overflow: np.ndarray | None  # (S,) mass of the one overflow output (truncated + lumped), None if none
    negent_np: np.ndarray  # (S,) sum_y W ln W over the kept outputs and the overflow output
    n_sym: int  # S
    tail_bits: float  # max_x (lumped mass) * log2 S
    n_outputs: int  # Y' kept (overflow included)
    n_given: int  # Y given
    cache: dict  # padded and device copies, built on first use
    factors: tuple | None = None  # R arrays (S, Y_j): W(y|x) = prod_j factors[j][x, y_j] on the grid

    @property
    def large(self) -> bool:  # served by working sets (``_active_set``)
        return self.n_sym > ACTIVE_SET_ABOVE

    @property
    def w_np(self) -> np.ndarray:
        """(S, Y'') rows summing to 1: kept outputs, the overflow output, zero columns up to a bucket size."""
        if "w_np" not in self.cache:
            kept = self.kept if self.factors is None else _kron_rows(self.factors)
            n_kept = kept.shape[1]
            full = np.zeros((self.n_sym, _bucket(self.n_outputs, 64)))
            full[:, :n_kept] = kept
            if self.overflow is not None:
                full[:, n_kept] = self.overflow
            self.cache["w_np"] = full
        return self.cache["w_np"]

    def _device(self, name):
        if self.large:
            return None
        if "w" not in self.cache:  # zero rows pad S to a bucket size: a few compiled kernels serve every shape
            s_pad = _bucket(self.n_sym, 8)
            if self.factors is None:
                w = np.zeros((s_pad, self.w_np.shape[1]))
                w[: self.n_sym] = self.w_np
                w = jnp.asarray(w)
            else:  # zero columns pad each receiver's counts to a bucket size as well
                w = kernel.Product(tuple(jnp.asarray(_zero_pad(f, s_pad, _bucket(f.shape[1], 8, fine_above=128)))
                                         for f in self.factors),
                                   jnp.asarray(_zero_pad(self.overflow, s_pad)))
            neg = np.zeros(s_pad)
            neg[: self.n_sym] = self.negent_np
            self.cache.update(w=w, negent=jnp.asarray(neg), valid=jnp.asarray(np.arange(s_pad) < self.n_sym))
        return self.cache[name]

    w = property(lambda self: self._device("w"))  # (S', Y'') padded or a kernel.Product, on the device (None
    #                                                 for large S)
    negent = property(lambda self: self._device("negent"))  # (S',)
    valid = property(lambda self: self._device("valid"))  # (S',) True for real symbols

    def evaluate(self, p: np.ndarray, b: np.ndarray, s: float) -> kernel.Evaluation:
        """The certificate at law p (nats): d_x, q, I, F = I - s P and the gap, over every input."""
        if self.factors is None:
            return active_set.evaluate(p, self.w_np, self.negent_np, b, s)
        ev = kernel.evaluate(_pad(p, self), self.w, self.negent, _pad(b, self), jnp.asarray(s, dtype=jnp.float64),
                             self.valid)
        return ev._replace(d=np.asarray(ev.d)[: self.n_sym])


def _zero_pad(a: np.ndarray, rows: int, cols: int | None = None) -> np.ndarray:
    out = np.zeros((rows,) if a.ndim == 1 else (rows, cols))
    out[tuple(slice(0, n) for n in a.shape)] = a
    return out


def _kron_rows(factors) -> np.ndarray:
    """(S, prod Y_j): row x is kron(factors[0][x], ..., factors[R-1][x]) (C order over receivers)."""
    rows = factors[0]
    for f in factors[1:]:
        rows = (rows[:, :, None] * f[:, None, :]).reshape(rows.shape[0], -1)
    return rows


def _matrix_of(transition) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """(W, truncated mass per row, the Transition's ln W when it has one of the same shape, else None)."""
    if hasattr(transition, "matrix") and hasattr(transition, "truncated_mass"):
        w = real_array(transition.matrix, "transition", "pass a Transition with a real matrix")
    else:
        w = real_array(transition, "transition", "pass a Transition or a 2-D array with one row per input symbol")
    if w.ndim != 2 or w.shape[0] < 1 or w.shape[1] < 1:
        raise InputError("transition", w.shape, "must be an (S, Y) matrix of probabilities W(y|x)",
                         "pass a Transition or a 2-D array with one row per input symbol")
    sums = w.sum(axis=1)  # NaN or +inf entries make a row sum non-finite, -inf makes the minimum negative
    if not (np.all(np.isfinite(sums)) and w.min() >= 0):
        raise InputError("transition", "matrix with negative or non-finite entries",
                         "probabilities must be finite and >= 0", "check how the matrix was built")
    if np.any(sums > 1 + 1e-9) or np.any(sums <= 0):
        raise InputError("transition", f"row sums in [{sums.min():.3g}, {sums.max():.3g}]",
                         "each row must sum to at most 1 (and be positive)",
                         "normalise the rows, or pass a Transition whose truncated mass is reported")
    if hasattr(transition, "truncated_mass"):
        tail = np.clip(real_array(transition.truncated_mass, "transition.truncated_mass",
                                  "pass the Transition's own truncated_mass"), 0.0, 1.0)
    else:
        tail = np.clip(1.0 - sums, 0.0, 1.0)
        tail = np.where(tail > 1e-13, tail, 0.0)  # row sums within rounding of 1 count as exact
    log_w = getattr(transition, "log_matrix", None)
    if log_w is not None:
        log_w = np.asarray(log_w)
        if log_w.shape != w.shape or log_w.dtype != np.float64:
            log_w = None
    return w, tail, log_w


def _factors_of(transition) -> list[np.ndarray] | None:
    """The per-receiver laws of a Transition with independent counts (2 or more receivers, at most
    ``ACTIVE_SET_ABOVE`` inputs), checked; None when the solver should use the dense matrix."""
    factors = getattr(transition, "factors", None)
    if factors is None or len(factors) < 2:
        return None
    arrays = [real_array(f, "transition.factors", "pass the Transition made by poisson_transition") for f in factors]
    n_sym = arrays[0].shape[0] if arrays[0].ndim == 2 else -1
    for j, a in enumerate(arrays):
        if a.ndim != 2 or a.shape[0] != n_sym or a.shape[1] < 1:
            raise InputError(f"transition.factors[{j}]", a.shape, f"must be an (S, Y_{j}) array with S = {n_sym}",
                             "pass the Transition made by poisson_transition, or set factors=None")
        sums = a.sum(axis=1)
        if not (np.all(np.isfinite(sums)) and a.min() >= 0 and sums.max() <= 1 + 1e-9 and sums.min() > 0):
            raise InputError(f"transition.factors[{j}]", f"row sums in [{sums.min():.3g}, {sums.max():.3g}]",
                             "must hold finite probabilities >= 0 whose rows sum to at most 1 (and are positive)",
                             "pass the Transition made by poisson_transition, or set factors=None")
    if n_sym > ACTIVE_SET_ABOVE:
        return None
    matrix = getattr(transition, "matrix", None)
    if matrix is not None and np.shape(matrix) != (n_sym, math.prod(a.shape[1] for a in arrays)):
        raise InputError("transition.factors", [a.shape for a in arrays],
                         f"do not match the matrix of shape {np.shape(matrix)}",
                         "pass the Transition made by poisson_transition, or set factors=None")
    return arrays


def _prepare_product(transition, factors: list[np.ndarray]) -> _Prepared:
    """Prepared channel for W(y|x) = prod_j A_j[x, y_j] on the grid plus one overflow output (no lumping: the
    grid of ``output_grid`` already stops where the tail is below its tol).

    sum_y W ln W = sum_j h_j prod_{k != j} s_k with h_j = sum_y A_j ln A_j and s_k = sum_y A_k (row-wise)."""
    n_sym = factors[0].shape[0]
    sums = [a.sum(axis=1) for a in factors]
    overflow = np.maximum(1.0 - np.prod(sums, axis=0), 0.0)
    negent = special.xlogy(overflow, overflow)
    for j, a in enumerate(factors):
        others = np.prod([sums[k] for k in range(len(factors)) if k != j], axis=0)
        negent = negent + special.xlogy(a, a).sum(axis=1) * others
    tail = getattr(transition, "truncated_mass", None)
    tail = overflow if tail is None else np.clip(real_array(
        tail, "transition.truncated_mass", "pass the Transition's own truncated_mass"), 0.0, 1.0)
    log_s = math.log2(n_sym) if n_sym > 1 else 0.0
    n_grid = math.prod(a.shape[1] for a in factors)
    return _Prepared(None, overflow, negent, n_sym, float(np.max(tail)) * log_s, n_grid + 1, n_grid, {},
                     tuple(factors))


def _prepare(transition, tol: float) -> _Prepared:
    factors = _factors_of(transition)
    if factors is not None:
        return _prepare_product(transition, factors)
    w, tail, log_w = _matrix_of(transition)
    n_sym, n_out = w.shape
    log_s = math.log2(n_sym) if n_sym > 1 else 0.0
    # lump the lightest output columns while every row loses at most `budget` of its mass
    budget = 1e-3 * tol / max(log_s, 1.0)
    col_max = w.max(axis=0)
    candidates = np.flatnonzero(col_max <= budget)
    n_lump = 0
    lumped = tail.copy()
    keep = None
    if candidates.size:
        order = candidates[np.argsort(col_max[candidates], kind="stable")]
        cum = np.cumsum(w[:, order], axis=1)
        n_lump = min(int(np.searchsorted(cum.max(axis=0), budget, side="right")), n_out - 1)
        if n_lump > 0:
            keep = np.ones(n_out, dtype=bool)
            keep[order[:n_lump]] = False
            lumped = lumped + cum[:, n_lump - 1]
    kept = w[:, keep] if keep is not None else w
    overflow = None
    if n_lump > 0 or tail.max() > 0:  # rows completed to 1 by the overflow output (tail + lumped columns)
        overflow = np.maximum(1.0 - kept.sum(axis=1), 0.0)
    if log_w is not None:  # sum W ln W from the given logarithms (ln 0 = -inf is floored: 0 * -1e300 = 0)
        negent = np.einsum("ij,ij->i", w, np.maximum(log_w, -1e300))
        if keep is not None:
            gone = order[:n_lump]
            negent -= np.einsum("ij,ij->i", w[:, gone], np.maximum(log_w[:, gone], -1e300))
    else:
        negent = special.xlogy(kept, kept).sum(axis=1)
    if overflow is not None:
        negent = negent + special.xlogy(overflow, overflow)
    n_cols = kept.shape[1] + int(overflow is not None)
    return _Prepared(kept, overflow, negent, n_sym, float(lumped.max()) * log_s, n_cols, n_out, {})


def _bucket(n: int, minimum: int, fine_above: int = 1024) -> int:
    """Next size >= n among powers of two (up to ``fine_above``), then quarter octaves (overhead <= 25%)."""
    size = max(minimum, 1 << max(0, (n - 1).bit_length()))
    if size <= fine_above:
        return size
    half = size // 2
    return min(half + k * half // 4 for k in range(1, 5) if half + k * half // 4 >= n)


def _check_cost(cost, n_sym: int) -> np.ndarray:
    b = real_array(cost, "cost", "give one cost (e.g. molecules) per input symbol")
    if b.shape != (n_sym,) or not np.all(np.isfinite(b)) or np.any(b < 0):
        raise InputError("cost", b if b.size < 20 else b.shape, f"must be {n_sym} finite non-negative costs",
                         "give one cost (e.g. molecules) per input symbol")
    return b


def _check_settings(tol, max_iter) -> tuple[float, int]:
    tol = real_number(tol, "tol", "use e.g. 1e-9")
    if not (0 < tol < 1):
        raise InputError("tol", tol, "must lie in (0, 1) bits", "use e.g. 1e-9")
    return tol, whole_number(max_iter, "max_iter", "give a positive whole number of iterations such as 200_000")


def _check_budget(budget) -> float:
    budget = real_number(budget, "budget", "give one mean cost per symbol (a number), e.g. 25")
    if not math.isfinite(budget):
        raise InputError("budget", budget, "must be a finite number", "give a mean cost per symbol, e.g. 25")
    return budget


def _start(initial, n_sym: int) -> np.ndarray:
    if initial is None:
        return np.full(n_sym, 1.0 / n_sym)
    p = real_array(initial, "initial", "pass a previous input_distribution or None")
    if p.shape != (n_sym,) or not np.all(np.isfinite(p)) or np.any(p < 0) or p.sum() <= 0:
        raise InputError("initial", p.shape, f"must be {n_sym} non-negative weights with a positive sum",
                         "pass a previous input_distribution or None")
    return p / p.sum()


class _Point(NamedTuple):
    s: float  # nats per cost unit
    p: np.ndarray
    sol: kernel.Solution
    cost: float


def _useless(prep: _Prepared) -> bool:
    """True when every input has the same output law up to round-off: I(p) ~ 0 for every p (capacity ~0 at any
    cost). The certificate is still evaluated on the given matrix, so the reported gap stays a valid bound."""
    if "useless" not in prep.cache:
        if prep.factors is None:
            spread = np.ptp(prep.kept, axis=0).max()
        else:  # identical rows of every factor <=> identical output laws
            spread = max(float(np.ptp(a, axis=0).max()) for a in prep.factors)
        if prep.overflow is not None:
            spread = max(spread, np.ptp(prep.overflow))
        prep.cache["useless"] = bool(spread <= 1e-15)
    return prep.cache["useless"]


def _run(prep: _Prepared, b: np.ndarray, s: float, p0: np.ndarray, tol: float, max_iter: int) -> _Point:
    if _useless(prep):  # the objective -s P is linear: the start law at s = 0, else the cheapest symbol (gap 0)
        p = p0 if s == 0 else (np.arange(prep.n_sym) == int(np.argmin(b))).astype(float)
        ev = prep.evaluate(p, b, float(s))
        sol = kernel.Solution(_pad(p, prep), ev, np.asarray(0), np.asarray(0), np.asarray(False), np.asarray(0.0))
        return _Point(float(s), p, sol, float(p @ b))
    if prep.large:  # large alphabet: working sets, certificate over all inputs
        sol = active_set.solve(prep.w_np, prep.negent_np, b, float(s), p0, tol * LN2, max_iter)
        return _Point(float(s), sol.p, sol, float(sol.p @ b))
    sol = kernel.solve(prep.w, prep.negent, _pad(b, prep), jnp.asarray(s, dtype=jnp.float64), prep.valid,
                       _pad(p0, prep), jnp.asarray(tol * LN2), jnp.asarray(max_iter))
    p = np.asarray(sol.p)[: prep.n_sym]
    return _Point(float(s), p, sol, float(p @ b))


def _pad(v: np.ndarray, prep: _Prepared) -> jax.Array:
    if prep.large:
        return v
    out = np.zeros(prep.valid.shape[0])
    out[: prep.n_sym] = v
    return jnp.asarray(out)


def _result(prep, point: _Point, b, tol, iterations, extra="", slope_bits=None) -> CapacityResult:
    sol = point.sol
    gap_bits = max(float(sol.ev.gap), 0.0) / LN2
    converged = gap_bits <= tol
    its = int(iterations)
    how = f"after {its} iterations ({int(sol.newton_steps)} Newton steps in the last solve)"
    if converged:
        msg = f"gap {gap_bits:.1e} bits {how}"
    elif bool(sol.stalled):
        msg = f"stalled at gap {gap_bits:.1e} bits {how} (rounding level; tol {tol:.1e} not reached)"
    else:
        msg = f"stopped at max_iter with gap {gap_bits:.1e} bits {how}"
    if prep.tail_bits > 0:
        msg += (f"; + {prep.tail_bits:.1e} bits for the truncated/lumped output mass "
                f"({prep.n_outputs - 1} of {prep.n_given} outputs kept, plus one overflow output)")
    msg += extra
    slope = point.s / LN2 if slope_bits is None else slope_bits
    # I >= 0 always: a round-off negative value (useless channels) is reported as 0, still a valid lower bound
    return CapacityResult(max(float(sol.ev.info) / LN2, 0.0), point.p, gap_bits + prep.tail_bits, point.cost, its,
                          converged, msg, float(slope))


def _mix(prep, b, a: _Point, other_p: np.ndarray, other_cost: float, budget: float, s: float, its=0) -> _Point:
    """Mix a (cost above budget) with a cheaper law so the mean cost equals the budget; re-evaluate."""
    theta = (budget - other_cost) / (a.cost - other_cost)
    theta = float(np.clip(theta, 0.0, 1.0))
    p = theta * a.p + (1.0 - theta) * other_p
    p = p / p.sum()
    ev = prep.evaluate(p, b, s)
    sol = a.sol._replace(p=_pad(p, prep), ev=ev)
    return _Point(s, p, sol, float(p @ b))


def _budget_search(prep, b, budget, tol, max_iter, lo: _Point, hi: _Point | None, iterations: int):
    """Safeguarded Newton on mean_cost(s) = budget; lo has cost > budget (s_lo >= 0), hi has cost < budget."""
    scale = max(abs(budget), 1e-300)
    s_floor = tol * LN2 / max(float(b.max() - b.min()), 1e-300)  # smaller slopes move the objective < tol
    ref = hi if hi is not None else lo
    deriv = float(ref.sol.cost_slope)
    s = ref.s - (ref.cost - budget) / deriv if deriv < 0 else ref.s + 1.0
    point = ref
    for _ in range(200):
        if hi is not None:
            width = hi.s - lo.s
            if not (lo.s < s < hi.s):
                s = 0.5 * (lo.s + hi.s)
            if width <= 1e-14 * max(hi.s, 1e-300):
                break
        elif not (np.isfinite(s) and s > lo.s and s >= 1.5 * lo.s):
            # no cheaper law yet and the Newton step crawls (where the optimal law is not unique the mean cost
            # jumps with s and its derivative is useless): grow the slope geometrically until it brackets
            s = max(4.0 * lo.s, s_floor)
        start = hi.p if hi is not None and abs(hi.s - s) < abs(lo.s - s) else lo.p
        point = _run(prep, b, s, start, tol, max_iter)
        iterations += int(point.sol.iterations)
        if abs(point.cost - budget) <= 1e-12 * scale:
            break
        if point.cost > budget:
            lo = point
        else:
            hi = point
        deriv = float(point.sol.cost_slope)
        s = point.s - (point.cost - budget) / deriv if deriv < 0 else np.nan
    if point.cost > budget:  # make the law feasible: mix with the cheaper side
        if hi is not None:
            point = _mix(prep, b, point, hi.p, hi.cost, budget, point.s, iterations)
        else:
            cheap = np.zeros_like(point.p)
            cheap[int(np.argmin(b))] = 1.0
            point = _mix(prep, b, point, cheap, float(b.min()), budget, point.s, iterations)
    elif point.cost < budget - 1e-12 * scale:  # feasible, but the certificate needs cost = budget
        point = _mix(prep, b, lo, point.p, point.cost, budget, point.s, iterations)
    return point, iterations, hi


def _budget_result(prep, b, budget, tol, max_iter, unconstrained: _Point, hi, iterations):
    b_min, b_max = float(b.min()), float(b.max())
    if budget < b_min - 1e-12 * max(b_min, 1.0):
        raise InputError("budget", budget, f"is below the cheapest symbol's cost {b_min:g}",
                         f"give a budget of at least {b_min:g}")
    if unconstrained.cost <= budget * (1 + 1e-12) or budget >= b_max:
        return _result(prep, unconstrained, b, tol, iterations, "; budget not binding (slope 0)"), None
    if budget <= b_min * (1 + 1e-12):
        cheapest = np.flatnonzero(b <= b_min * (1 + 1e-12))
        sub = blahut_arimoto(prep.w_np[cheapest], tol=tol, max_iter=max_iter)  # rows sum to 1
        p = np.zeros(len(b))
        p[cheapest] = sub.input_distribution
        return CapacityResult(sub.capacity, p, sub.gap + prep.tail_bits, float(p @ b), sub.iterations,
                              sub.converged, sub.message + "; budget = cheapest cost: only those symbols "
                              "are usable (slope infinite)", math.inf), None
    point, iterations, hi = _budget_search(prep, b, budget, tol, max_iter, unconstrained, hi, iterations)
    res = _result(prep, point, b, tol, iterations, f"; slope found for budget {budget:g}")
    ok = res.converged and abs(res.mean_cost - budget) <= 1e-9 * max(budget, 1.0)
    return res._replace(converged=ok), point


def blahut_arimoto(transition, cost=None, budget=None, tol: float = 1e-9, max_iter: int = 200_000,
                   initial=None, slope=None) -> CapacityResult:
    """Capacity (bits per channel use) of a memoryless channel, optionally under a mean-cost budget.

    transition : a :class:`~capacity.channel.transition.Transition` or an (S, Y) array W(y|x); rows may
        sum to less than 1 (the missing mass becomes one overflow output and enters the gap, see module).
    cost : (S,) cost per symbol (e.g. molecules), needed for ``budget`` or ``slope``.
    budget : mean cost allowed, sum_x p_x b_x <= budget. Below the cheapest symbol: InputError; at or above
        the unconstrained optimum's cost: the unconstrained answer (slope 0).
    tol : stop when the certified gap (upper minus lower bound) is below ``tol`` bits.
    max_iter : cap on iterations per inner solve.
    initial : (S,) starting input law (warm start); default uniform.
    slope : fixed Lagrange slope in bits per cost unit instead of a budget (a point of the C(P) curve at
        whatever mean cost it yields).

    Returns CapacityResult: capacity (= I(p;W), a certified lower bound), input_distribution, gap,
    mean_cost, iterations, converged, message, slope (bits per cost unit).
    """
    tol, max_iter = _check_settings(tol, max_iter)
    if budget is not None and slope is not None:
        raise InputError("slope", slope, "cannot be combined with budget", "give one of budget or slope")
    prep = _prepare(transition, tol)
    n_sym = prep.n_sym
    b = np.zeros(n_sym) if cost is None else _check_cost(cost, n_sym)
    if (budget is not None or slope is not None) and cost is None:
        raise InputError("cost", None, "is needed with a budget or a slope", "give one cost per symbol")
    p0 = _start(initial, n_sym)
    if n_sym == 1:
        return CapacityResult(0.0, np.ones(1), prep.tail_bits, float(b[0]), 0, True,
                              "one input symbol: capacity 0", 0.0)
    if budget is not None:
        budget = _check_budget(budget)
    if slope is not None:
        slope = real_number(slope, "slope", "bits per cost unit, e.g. 0.01")
        if not (np.isfinite(slope) and slope >= 0):
            raise InputError("slope", slope, "must be finite and >= 0", "bits per cost unit, e.g. 0.01")
        point = _run(prep, b, float(slope) * LN2, p0, tol, max_iter)
        return _result(prep, point, b, tol, point.sol.iterations, f"; fixed slope {float(slope):g} bits/unit")
    point = _run(prep, b, 0.0, p0, tol, max_iter)
    if budget is None:
        return _result(prep, point, b, tol, point.sol.iterations)
    budget = float(budget)
    return _budget_result(prep, b, budget, tol, max_iter, point, None, int(point.sol.iterations))[0]


def capacity_cost_curve(transition, cost, budgets, tol: float = 1e-9, max_iter: int = 200_000
                        ) -> list[CapacityResult]:
    """Capacity–cost curve C(P) at each budget (bits), warm-started along the curve.

    budgets : (K,) mean-cost budgets (any order; results come back in the given order). The unconstrained
    solve is done once; budgets are visited in increasing order, each search starting from the previous
    solution (which brackets the slope from above). Each point is certified as in :func:`blahut_arimoto`.
    """
    tol, max_iter = _check_settings(tol, max_iter)
    budgets = np.atleast_1d(real_array(budgets, "budgets", "e.g. [10, 50, 100]"))
    if budgets.ndim != 1 or not np.all(np.isfinite(budgets)):
        raise InputError("budgets", budgets, "must be a 1-D array of finite budgets", "e.g. [10, 50, 100]")
    prep = _prepare(transition, tol)
    n_sym = prep.n_sym
    b = _check_cost(cost, n_sym)
    unconstrained = _run(prep, b, 0.0, np.full(n_sym, 1.0 / n_sym), tol, max_iter)
    results: list[CapacityResult | None] = [None] * len(budgets)
    hi = None
    for k in np.argsort(budgets, kind="stable"):
        res, point = _budget_result(prep, b, float(budgets[k]), tol, max_iter, unconstrained, hi,
                                    int(unconstrained.sol.iterations))
        results[k] = res
        if point is not None and point.cost <= budgets[k] * (1 + 1e-12):
            hi = point
    return results


def mutual_information(input_distribution, log_transition):
    """I(X;Y) in bits for an input law (S,) and log W (S, Y) (JAX, differentiable in both).

    I = sum_x p_x sum_y W(y|x) [ln W(y|x) - ln q(y)], q = sum_x p_x W(y|x), in log domain (logsumexp),
    0 ln 0 = 0 with finite gradients. Rows that sum to less than 1 get the missing mass t_x as one
    overflow output, as in :func:`blahut_arimoto`, so at the optimal law this equals its ``capacity``.
    By the envelope theorem dC/dtheta = dI(p*, W(theta))/dtheta with p* held fixed.
    """
    p = jnp.asarray(input_distribution, dtype=jnp.float64)
    log_w = jnp.asarray(log_transition, dtype=jnp.float64)
    tail = -jnp.expm1(jnp.minimum(logsumexp(log_w, axis=1), 0.0))
    log_tail = jnp.log(jnp.maximum(tail, 1e-300))
    log_w = jnp.concatenate([log_w, jnp.where(tail > 0, log_tail, -jnp.inf)[:, None]], axis=1)
    finite = jnp.isfinite(log_w)
    safe = jnp.where(finite, log_w, 0.0)
    log_p = jnp.log(jnp.where(p > 0, p, 1.0))
    log_q = logsumexp(jnp.where(finite & (p[:, None] > 0), log_p[:, None] + safe, -jnp.inf), axis=0)
    log_q = jnp.where(jnp.isfinite(log_q), log_q, 0.0)
    w = jnp.where(finite, jnp.exp(safe), 0.0)
    terms = jnp.where(finite, w * (safe - log_q[None, :]), 0.0)
    return jnp.dot(p, jnp.sum(terms, axis=1)) / LN2
