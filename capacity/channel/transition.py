"""Memoryless (ISI-free) transition laws: Poisson counts, and the exact binomial/multinomial law.

A symbol ``x`` (molecules released by each emitter at the start of a slot) produces a count vector
``y`` (one count per receiver) in the same slot. Two counting laws:

* ``poisson`` — receiver ``j`` counts ``Poisson(b_j + sum_i x_i p[i, j, 0])``, independently across
  receivers. Exact when each emitter releases a Poisson number of molecules (thinning), the usual
  approximation otherwise (Jamali et al., Proc. IEEE 2019, "Channel modeling for diffusive molecular
  communication").
* ``binomial`` — each of the ``x_i`` released molecules of emitter ``i`` is counted by receiver ``j``
  with probability ``probs[i, j]`` or by none (a multinomial over R+1 outcomes), independently across
  molecules and emitters, plus an independent Poisson background per receiver. Counts at different
  receivers from one release are then negatively correlated (covariance ``-N p_a p_b``).

Both produce a :class:`Transition` on a finite product grid of counts; the probability outside the grid
is reported per symbol as ``truncated_mass`` (never dropped silently). Shapes: ``S`` symbols, ``E``
emitters, ``R`` receivers, ``Y`` grid outputs.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import jax.numpy as jnp
import numpy as np
from jax.scipy.special import gammaln
from scipy import special, stats

from capacity import _jax  # noqa: F401  (float64)
from capacity._inputs import real_array, real_number, whole_number
from capacity.errors import InputError

__all__ = [
    "Transition",
    "symbol_means",
    "output_grid",
    "poisson_log_transition",
    "poisson_transition",
    "binomial_transition",
    "law_distance",
]


class Transition(NamedTuple):
    """A memoryless channel on a finite output grid.

    matrix : (S, Y) probabilities W(y|x); row sums equal ``1 - truncated_mass``.
    log_matrix : (S, Y) natural log of ``matrix`` (``-inf`` where the probability is exactly 0).
    outputs : (Y, R) integer count vectors, one row per output (C order over receivers).
    truncated_mass : (S,) probability of counts outside the grid, per symbol.
    law : ``"poisson"`` or ``"binomial"``.
    factors : for counts that are independent across receivers given the symbol (the Poisson law), the R
        per-receiver laws, arrays (S, Y_j) on counts 0..Y_j-1, with ``matrix[x] = kron(factors[0][x], ...,
        factors[R-1][x])`` (C order, as ``outputs``); ``None`` when the counts are dependent (binomial law) or
        unknown. Blahut–Arimoto uses them to work on the factors instead of the (S, Y) matrix.
    """

    matrix: np.ndarray
    log_matrix: np.ndarray
    outputs: np.ndarray
    truncated_mass: np.ndarray
    law: str
    factors: tuple | None = None


def symbol_means(hits, background, symbols, *, interference=None):
    """Mean count per receiver for each symbol of the memoryless channel (JAX, differentiable).

    means[s, j] = b_j + sum_i symbols[s, i] * hits[i, j, 0] (+ interference[j]).

    hits : (E, R, L+1) hit probabilities per molecule (only lag 0 is used here).
    background : (R,) mean background counts per slot.
    symbols : (S, E) molecules released per emitter (or an :class:`~capacity.schemes.alphabet.Alphabet`).
    interference : optional (R,) fixed mean interference counts per slot (e.g. the residual ISI mean).
    Returns (S, R) mean counts.
    """
    if hasattr(symbols, "symbols") and hasattr(symbols, "scheme"):
        symbols = symbols.symbols
    hits = jnp.asarray(hits, dtype=jnp.float64)
    background = jnp.asarray(background, dtype=jnp.float64)
    symbols = jnp.asarray(symbols, dtype=jnp.float64)
    if hits.ndim != 3:
        raise InputError("hits", hits.shape, "must have shape (E, R, L+1)", "pass ChannelResponse.hits")
    n_emit, n_recv = hits.shape[0], hits.shape[1]
    if symbols.ndim != 2 or symbols.shape[1] != n_emit:
        raise InputError("symbols", symbols.shape, f"must have shape (S, {n_emit}) for {n_emit} emitters",
                         "give one release count per emitter for each symbol")
    if background.shape != (n_recv,):
        raise InputError("background", background.shape, f"must have shape ({n_recv},)",
                         "give one mean background count per receiver")
    means = background[None, :] + symbols @ hits[:, :, 0]
    if interference is not None:
        interference = jnp.asarray(interference, dtype=jnp.float64)
        if interference.shape != (n_recv,):
            raise InputError("interference", interference.shape, f"must have shape ({n_recv},)",
                             "give one mean interference count per receiver")
        means = means + interference[None, :]
    return means


def _check_means(means) -> np.ndarray:
    m = real_array(means, "means", "pass an (S, R) array of mean counts, e.g. symbol_means(...)")
    if m.ndim != 2 or m.shape[0] < 1 or m.shape[1] < 1:
        raise InputError("means", m.shape, "must have shape (S, R)", "pass symbol_means(...)")
    if not np.all(np.isfinite(m)) or np.any(m < 0):
        raise InputError("means", m, "must be finite and non-negative", "check hits, background and symbols")
    return m


def _check_max_outputs(max_outputs) -> int:
    return whole_number(max_outputs, "max_outputs", "give a positive whole number such as 2_000_000")


def _check_tol(tol) -> float:
    tol = real_number(tol, "tol", "use e.g. 1e-10")
    if not 0 < tol < 1:
        raise InputError("tol", tol, "must lie in (0, 1)", "use e.g. 1e-10")
    return tol


def _product_grid(maxima, max_outputs: int, what: str) -> np.ndarray:
    max_outputs = _check_max_outputs(max_outputs)
    with np.errstate(over="ignore"):  # an overflow to inf is caught below
        total_f = float(np.prod(np.asarray(maxima, dtype=float) + 1.0))
    if not total_f <= max_outputs:  # also catches an infinite grid before any int() of it
        shown = " x ".join(str(int(v) + 1) if v < 1e15 else f"{v + 1:.3g}" for v in maxima)
        total = int(total_f) if total_f < 1e15 else f"{total_f:.3g}"
        raise InputError(
            "outputs", f"{shown} = {total} count vectors",
            f"the {what} output grid is larger than max_outputs = {max_outputs}",
            "use fewer receivers, smaller releases (lower mean counts), a larger tol, or the Monte Carlo "
            "estimator (capacity.information.montecarlo) instead of an exact transition matrix")
    sizes = [int(v) + 1 for v in maxima]
    axes = np.meshgrid(*[np.arange(n) for n in sizes], indexing="ij")
    return np.stack([a.ravel() for a in axes], axis=-1).astype(np.int64)


def output_grid(means, tol: float = 1e-10, max_outputs: int = 2_000_000) -> np.ndarray:
    """Product grid of count vectors that holds all but ``tol`` of every symbol's probability.

    Receiver j gets counts 0..y_max_j, y_max_j the smallest count with P(Y_j > y_max_j) <= tol / R for
    every symbol (``scipy.stats.poisson.isf``); by the union bound each symbol then loses at most ``tol``.

    means : (S, R) Poisson means. Returns outputs (Y, R) int64, Y = prod_j (y_max_j + 1), C order.
    Raises InputError if Y > max_outputs.
    """
    m = _check_means(means)
    n_recv = m.shape[1]
    tol = _check_tol(tol)
    ymax = _poisson_upper(tol / n_recv, m).max(axis=0)
    return _product_grid(np.maximum(ymax, 0), max_outputs, "Poisson")


def _poisson_upper(q: float, m: np.ndarray) -> np.ndarray:
    """Smallest y with P(Y > y) <= q for Y ~ Poisson(m), elementwise.

    ``scipy.stats.poisson.isf``, except where it returns NaN (q below ~1e-16, or means beyond ~1e10): there a
    bisection on ``poisson.sf`` between 0 and the Bernstein bound m + 2L/3 + sqrt(2 m L), L = ln(1/q), which
    already has P(Y > bound) <= q (returned as it is when it exceeds 2**52, where counts stop being exact floats).
    """
    y = np.asarray(stats.poisson.isf(q, m), dtype=float)
    bad = ~np.isfinite(y)
    if np.any(bad):
        mu = m[bad]
        big_l = -math.log(q)
        lo = np.full(mu.shape, -1.0)  # P(Y > lo) > q (always true at -1)
        hi = np.ceil(mu + 2.0 * big_l / 3.0 + np.sqrt(mu) * math.sqrt(2.0 * big_l)) + 1.0  # P(Y > hi) <= q
        # beyond 2**52 consecutive counts are no longer distinct floats (the bisection would never end); such a
        # grid is far past any max_outputs, so the bound itself is returned and the grid check refuses it
        lo = np.where(hi > 2.0**52, hi - 1.0, lo)
        while np.any(hi - lo > 1.0):
            mid = np.floor(lo + 0.5 * (hi - lo))  # (lo + hi) / 2 would overflow for bounds near 1e308
            ok = stats.poisson.sf(mid, mu) <= q
            hi = np.where(ok, mid, hi)
            lo = np.where(ok, lo, mid)
        y[bad] = hi
    return y


def poisson_log_transition(means, outputs):
    """log W(y|x) for independent Poisson counts (pure JAX, differentiable in ``means``).

    log W = sum_j [y_j ln mu_j - mu_j - ln y_j!]; a zero mean gives log W = 0 at y_j = 0 and -inf
    otherwise. Gradients stay finite: at mu_j = 0 the derivative is the one-sided -1 for y_j = 0 and 0
    where W = 0.

    means : (S, R) mean counts; outputs : (Y, R) integer counts. Returns (S, Y).
    """
    mu = jnp.asarray(means, dtype=jnp.float64)[:, None, :]
    y = jnp.asarray(outputs).astype(jnp.float64)[None, :, :]
    positive = mu > 0
    safe_mu = jnp.where(positive, mu, 1.0)
    terms = y * jnp.log(safe_mu) - mu - gammaln(y + 1.0)
    terms = jnp.where(positive | (y == 0), terms, -jnp.inf)
    return jnp.sum(terms, axis=-1)


def poisson_transition(means, tol: float = 1e-10, max_outputs: int = 2_000_000) -> Transition:
    """Poisson transition matrix on the grid of :func:`output_grid`.

    means : (S, R) mean counts. The truncated mass per symbol, 1 - prod_j P(Y_j <= y_max_j), comes from
    ``scipy.stats.poisson.logcdf`` (not from 1 - row sum, which would lose digits). ``factors`` holds the
    per-receiver pmfs (``scipy.stats.poisson.pmf``; a zero mean puts all mass on count 0).
    """
    m = _check_means(means)
    outputs = output_grid(m, tol=tol, max_outputs=max_outputs)
    log_w = np.asarray(poisson_log_transition(m, outputs))
    ymax = outputs.max(axis=0)
    log_in = stats.poisson.logcdf(ymax[None, :], m).sum(axis=1)
    truncated = -np.expm1(log_in)
    factors = tuple(stats.poisson.pmf(np.arange(int(ymax[j]) + 1)[None, :], m[:, j:j + 1])
                    for j in range(m.shape[1]))
    return Transition(np.exp(log_w), log_w, outputs, np.maximum(truncated, 0.0), "poisson", factors)


# ----------------------------------------------------------------------------- exact binomial law
_TINY = 1e-300


def _marginal_pmf(counts, probs_j, bg_j, tol_tail):
    """Exact pmf of sum_i Binomial(counts[i], probs_j[i]) + Poisson(bg_j) (1-D convolutions)."""
    pmf = np.ones(1)
    for n, p in zip(counts, probs_j, strict=True):
        if n > 0 and p > 0:
            pmf = np.convolve(pmf, stats.binom.pmf(np.arange(n + 1), n, p))
    if bg_j > 0:
        top = int(math.ceil(bg_j + 12.0 * math.sqrt(bg_j) + 40.0))  # tail beyond is < 1e-25
        pmf = np.convolve(pmf, stats.poisson.pmf(np.arange(top + 1), bg_j))
    return pmf


def _multinomial_box(n: int, p: np.ndarray, sizes) -> np.ndarray:
    """pmf of the R counted components of Multinomial(n; p_1..p_R, 1 - sum p) on the box ``sizes``."""
    axes = np.meshgrid(*[np.arange(min(s, n + 1)) for s in sizes], indexing="ij")
    m = np.stack(axes, axis=-1).astype(float)
    rest = n - m.sum(axis=-1)
    p0 = max(0.0, 1.0 - float(p.sum()))
    ok = rest >= 0
    rest_safe = np.where(ok, rest, 0.0)
    log = (special.gammaln(n + 1.0) - special.gammaln(m + 1.0).sum(axis=-1) - special.gammaln(rest_safe + 1.0)
           + special.xlogy(m, p).sum(axis=-1) + special.xlogy(rest_safe, p0))
    out = np.where(ok, np.exp(log), 0.0)
    # trim negligible corners (each dropped cell < 1e-40; the loss shows up in truncated_mass)
    keep = out > 1e-40
    if not keep.any():
        return out
    hi = [int(np.nonzero(keep.any(axis=tuple(a for a in range(out.ndim) if a != k)))[0].max()) + 1
          for k in range(out.ndim)]
    return out[tuple(slice(0, h) for h in hi)]


def _convolve_box(a: np.ndarray, b: np.ndarray, sizes) -> np.ndarray:
    from scipy.signal import convolve

    out = convolve(a, b, method="direct")
    return out[tuple(slice(0, s) for s in sizes)]


def binomial_transition(symbols, probs, background, tol: float = 1e-10, max_outputs: int = 2_000_000,
                        max_work: float = 2e9) -> Transition:
    """Exact transition law for fixed release counts: multinomial per emitter + Poisson background.

    symbols : (S, E) non-negative integer molecule counts per emitter.
    probs : (E, R) lag-0 probability that one molecule of emitter i is counted by receiver j
        (row sums <= 1; the rest is "counted by none").
    background : (R,) mean Poisson background counts.
    tol : per-symbol mass allowed outside the grid (split over receivers via each receiver's exact
        marginal, a sum of binomials and a Poisson, computed by 1-D convolution).

    The joint pmf on the grid is the convolution over emitters of multinomial pmfs (direct summation,
    no FFT, so small probabilities keep their relative accuracy), then a per-receiver convolution with
    the Poisson background. Raises InputError when the grid exceeds ``max_outputs`` or the convolution
    work exceeds ``max_work`` multiply-adds (fix: Poisson law, fewer receivers, smaller releases).
    """
    x = real_array(symbols, "symbols", "give an (S, E) array of whole molecule counts")
    pr = real_array(probs, "probs", "pass hits[:, :, 0]")
    bg = real_array(background, "background", "give one mean background count per receiver")
    if x.ndim != 2 or not np.all(np.isfinite(x)) or np.any(x < 0) or np.any(np.round(x) != x):
        raise InputError("symbols", x, "must be an (S, E) array of non-negative whole molecule counts",
                         "round the release counts, or use poisson_transition for mean releases")
    x = np.round(x).astype(np.int64)
    if pr.ndim != 2 or pr.shape[0] != x.shape[1]:
        raise InputError("probs", pr.shape, f"must have shape ({x.shape[1]}, R)", "pass hits[:, :, 0]")
    if np.any(pr < 0) or np.any(pr.sum(axis=1) > 1 + 1e-12):
        raise InputError("probs", pr, "must be non-negative with row sums <= 1",
                         "each molecule is counted by at most one receiver")
    n_recv = pr.shape[1]
    if bg.shape != (n_recv,) or np.any(bg < 0) or not np.all(np.isfinite(bg)):
        raise InputError("background", bg, f"must be {n_recv} non-negative means", "one per receiver")
    if n_recv > 3:
        raise InputError("probs", pr.shape, "the exact law is implemented for 1 to 3 receivers",
                         "use poisson_transition (and law_distance on a smaller case to size the error)")
    tol = _check_tol(tol)

    ymax = np.zeros(n_recv, dtype=np.int64)
    for s in range(x.shape[0]):
        for j in range(n_recv):
            pmf = _marginal_pmf(x[s], pr[:, j], bg[j], tol)
            sf = np.cumsum(pmf[::-1])[::-1]  # sf[k] = P(Y >= k), summed from the small end
            above = np.nonzero(sf[1:] > tol / n_recv)[0]
            ymax[j] = max(ymax[j], (above.max() + 1) if above.size else 0)
    outputs = _product_grid(ymax, max_outputs, "binomial")
    sizes = tuple(int(v) + 1 for v in ymax)
    work = float(x.shape[0]) * float(np.prod(sizes)) * float(np.prod([min(s, int(x.max()) + 1) for s in sizes]))
    if work * max(0, int((x > 0).sum(axis=1).max()) - 1) > max_work:
        raise InputError("symbols", f"{x.shape[0]} symbols on a {sizes} grid",
                         "the exact multinomial convolution would take too long",
                         "use poisson_transition, fewer emitters firing together, or smaller releases")

    rows = np.empty((x.shape[0], len(outputs)))
    for s in range(x.shape[0]):
        joint = np.zeros(sizes)
        joint[(0,) * n_recv] = 1.0
        for i in range(x.shape[1]):
            if x[s, i] > 0:
                joint = _convolve_box(joint, _multinomial_box(int(x[s, i]), pr[i], sizes), sizes)
        for j in range(n_recv):
            if bg[j] > 0:
                k = np.arange(sizes[j])
                toeplitz = np.where(k[:, None] >= k[None, :],
                                    stats.poisson.pmf(np.maximum(k[:, None] - k[None, :], 0), bg[j]), 0.0)
                joint = np.moveaxis(np.tensordot(toeplitz, np.moveaxis(joint, j, 0), axes=(1, 0)), 0, j)
        full = np.zeros(sizes)
        full[tuple(slice(0, n) for n in joint.shape)] = joint
        rows[s] = full.ravel()
    rows = np.maximum(rows, 0.0)
    truncated = np.array([max(0.0, 1.0 - np.sort(r).sum()) for r in rows])
    with np.errstate(divide="ignore"):
        log_w = np.log(rows)
    return Transition(rows, log_w, outputs, truncated, "binomial")


def law_distance(a: Transition, b: Transition, tol: float = 1e-9) -> dict:
    """How far two laws of the same symbols are apart: total variation per symbol and capacity difference.

    tv_per_symbol[s] = 1/2 sum_y |W_a(y|s) - W_b(y|s)| over the union of both grids; the mass outside the
    grids adds at most ``tv_uncertainty`` = (max truncated_a + max truncated_b) / 2. Capacities come from
    :func:`capacity.information.blahut_arimoto.blahut_arimoto` (bits, each with its certified gap).
    Returns a dict: max_tv, tv_per_symbol, tv_uncertainty, capacity_a, capacity_b,
    capacity_difference_bits (a - b), capacity_uncertainty_bits (sum of both gaps).
    """
    from capacity.information.blahut_arimoto import blahut_arimoto  # lazy: information builds on channel

    wa, wb = np.asarray(a.matrix), np.asarray(b.matrix)
    if wa.shape[0] != wb.shape[0] or np.shape(a.outputs)[1] != np.shape(b.outputs)[1]:
        raise InputError("b", wb.shape, "must describe the same symbols and receivers as a",
                         "build both laws from the same alphabet")
    oa, ob = np.asarray(a.outputs), np.asarray(b.outputs)
    union, inverse = np.unique(np.concatenate([oa, ob]), axis=0, return_inverse=True)
    inverse = inverse.ravel()
    full_a = np.zeros((wa.shape[0], len(union)))
    full_b = np.zeros_like(full_a)
    full_a[:, inverse[: len(oa)]] = wa
    full_b[:, inverse[len(oa):]] = wb
    tv = 0.5 * np.abs(full_a - full_b).sum(axis=1)
    ca, cb = blahut_arimoto(a, tol=tol), blahut_arimoto(b, tol=tol)
    return {
        "max_tv": float(tv.max()),
        "tv_per_symbol": tv,
        "tv_uncertainty": 0.5 * float(np.max(a.truncated_mass) + np.max(b.truncated_mass)),
        "capacity_a": ca.capacity,
        "capacity_b": cb.capacity,
        "capacity_difference_bits": ca.capacity - cb.capacity,
        "capacity_uncertainty_bits": ca.gap + cb.gap,
    }
