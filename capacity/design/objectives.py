"""Differentiable design objectives: bits per symbol, per second and per molecule as JAX functions of the design.

Chain (all JAX, differentiable in every tunable of :mod:`capacity.design.params`)::

    u --constrain--> design values --layout--> (Ts, emitters, centres, radii, symbols)
      --lone_hits / shadowed_hits--> hits (E,R,L+1), tail (E,R)
      --Poisson counting--> log W(y|x) on a fixed output grid --> mutual information (bits)

Rates (name them with ``rate=``; every result says which was used):

``"isi-window"`` (default whenever the memory L > 0)
    The windowed decision-feedback lower bound on the i.i.d. rate with ISI,
    I(X_k; Y_k..Y_(k+J) | X_(k-1..k-L)) (:mod:`capacity.information.window`): the molecules of a symbol that
    arrive in the J slots after its own count as signal, the J future symbols are summed over as noise, the past
    is known (it is in the chain rule for i.i.d. inputs, so this is a true lower bound, not a genie). J is the
    largest window with S^J <= :data:`WINDOW_FUTURES` futures (J <= L). Estimated by Monte Carlo with common
    random numbers (the same key at every design; :data:`WINDOW_SAMPLES` pasts, each with every symbol drawn),
    differentiated by the
    likelihood-ratio identity with a mean baseline. Input law: the Blahut–Arimoto optimum of the mean-isi
    channel below at the same design (held fixed in the gradient). This is the rate the tool reports as its
    lower bound where the trellis cannot keep every lag, so the optimiser and ``capacity rate`` aim at the same
    number.
``"mean-isi"`` (alias ``"envelope"``; fast)
    Memoryless channel: slot-0 hits carry the symbol; the ISI residual (lags 1..L, plus the tail beyond L when
    ``channel.residual = "interference"``) enters as MEAN interference at the current input law,
    ``b_j + sum_i E[x_i] (sum_{l>=1} p_ijl + tail_ij)``. The capacity C(theta) is the Blahut–Arimoto optimum
    (re-solved outside the gradient at every evaluation; the interference and the law are iterated to a fixed
    point, :data:`FIXED_POINT_PASSES` passes). Its gradient uses the envelope theorem: at the optimal law p* with
    cost multiplier s* (bits per molecule), dC/dtheta = d/dtheta [I(p*, W_theta) - s* (sum_x p*_x b_x(theta) - B)]
    with p*, s* held fixed (Arimoto 1972 / Blahut 1972 for the solver; the envelope rule is standard
    constrained-optimisation sensitivity, e.g. Boyd & Vandenberghe §5.6). The law is also held fixed inside the
    mean interference, so the gradient is exact for the channel with that interference frozen.
``"isi-as-noise"``
    The symbol-by-symbol lower bound I(X_k; Y_k) for a FIXED i.i.d. input law (uniform over the alphabet; any
    budget is ignored and the mean molecules reported): the count is a mixture over the past symbols of the first
    ``lags`` lags (enumerated, S^lags terms), later lags and the tail as mean interference. No inner optimisation,
    so the gradient is the plain derivative.

Objectives: ``bits-per-symbol`` = rate; ``bits-per-second`` = rate / Ts; ``bits-per-molecule`` = rate / M with M
the mean molecules per symbol of the law (the budget when it binds). Caution: with a budget, bits per molecule
over the release levels is multimodal — at a binding budget it is C(B)/B, whose gradient favours large, sparsely
used levels, while levels too small to reach the budget can give a higher C/M — so use several starts, or tune
without a budget (or check with a grid) when levels and a budget meet.

Output grid: counts ``lo_r .. lo_r + n_r - 1`` per receiver (product grid over receivers), chosen outside the
gradient from the current means with a margin of 8 standard deviations plus 8 counts, ``n_r`` rounded up to a
short ladder of sizes so that shapes stay static and recompilation rare. The Poisson mass outside the grid is
reported (``truncated``), never silently dropped from the record.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import gammaln, logsumexp, xlogy
from scipy import stats

from capacity import _jax  # noqa: F401  (float64)
from capacity.design.params import DesignSpace, Layout, constrain, feasible, layout
from capacity.errors import InputError
from capacity.information.blahut_arimoto import mutual_information

OBJECTIVES = ("bits-per-symbol", "bits-per-second", "bits-per-molecule")
RATES = ("isi-window", "mean-isi", "isi-as-noise")
#: earlier names still accepted
RATE_ALIASES = {"envelope": "mean-isi", "window": "isi-window"}
WINDOW_SAMPLES = 1024
#: largest number of futures S^J summed over by the isi-window objective (the reported bound allows 256)
WINDOW_FUTURES = 128
FIXED_POINT_PASSES = 3
MAX_OUTPUTS = 200_000  # product-grid outputs per evaluation
MAX_MIXTURE = 4_000_000  # S * P * Y entries of the isi-as-noise mixture
LN2 = math.log(2.0)


def canonical_rate(rate: str) -> str:
    """The rate's current name (earlier names accepted); InputError for an unknown one."""
    rate = RATE_ALIASES.get(rate, rate)
    if rate not in RATES:
        raise InputError("rate", rate, "unknown rate", f"use one of {', '.join(RATES)}")
    return rate


class Problem(NamedTuple):
    """A design problem: the space, the fixed physics and channel settings, and what to maximise.

    space : DesignSpace.  base_symbols : (S, E) molecules of the given alphabet.
    background : (R,) mean stray counts per slot.  diffusion m^2/s; degradation 1/s.
    model : "lone" or "shadowed" (differentiable response models).  memory : L lags (static).
    residual : "interference" (tail added as mean interference) or "drop".
    objective : one of :data:`OBJECTIVES`.  rate : one of :data:`RATES`.
    budget : mean molecules per symbol or None.  lags : lags enumerated by "isi-as-noise", or the look-ahead J
    of "isi-window" (static).  walls : :class:`capacity.physics.images.WallGeometry` or None; image_depth : image
    cells kept in a channel (static); pulses : (E,) release durations in s, or None for impulses.
    transport : :class:`capacity.physics.transport.Transport` (surface reaction rates and uniform flow) or None
    for absorbing / passive receivers in a still fluid.
    """

    space: DesignSpace
    base_symbols: np.ndarray
    background: np.ndarray
    diffusion: float
    degradation: float
    model: str
    memory: int
    residual: str
    objective: str
    rate: str
    budget: float | None
    lags: int
    transport: object = None
    walls: object = None
    image_depth: int = 0
    pulses: object = None


class Fixed(NamedTuple):
    """What one evaluation holds fixed: input law (S,), cost multiplier (bits/molecule), grid starts (R,)."""

    law: np.ndarray
    slope: float
    lo: np.ndarray


class Evaluation(NamedTuple):
    """One evaluated design.

    value : objective (bits/symbol, bits/s or bits/molecule).  bits : rate in bits per symbol.
    molecules : mean molecules per symbol.  law : (S,) input law used.  slope : cost multiplier, bits/molecule.
    gap : Blahut–Arimoto certified gap, bits (0 for isi-as-noise).  truncated : largest Poisson mass outside the
    output grid.  grad : dict of gradients w.r.t. the unconstrained parameters (None if not asked).
    """

    value: float
    bits: float
    molecules: float
    law: np.ndarray
    slope: float
    gap: float
    truncated: float
    grad: dict | None = None


def response(problem: Problem, lay: Layout):
    """hits (E,R,L+1), tail (E,R) of a layout from the problem's differentiable response model."""
    if problem.transport is not None:  # flow or reactive receivers: the lone closed forms / flow series
        from capacity.physics.transport import design_hits

        offsets = jnp.asarray(problem.space.sample_fraction) * lay.symbol_interval
        return design_hits(problem.transport, lay.emitters, lay.centres, lay.radii, problem.space.passive, offsets,
                           problem.diffusion, problem.degradation, lay.symbol_interval, problem.memory,
                           walls=problem.walls, depth=problem.image_depth)
    if problem.walls is not None or problem.pulses is not None:  # reflecting walls (images), release pulses
        from capacity.physics.walled import design_hits as walled_hits

        offsets = jnp.asarray(problem.space.sample_fraction) * lay.symbol_interval
        return walled_hits(problem.model, problem.walls, problem.image_depth, problem.pulses, lay.emitters,
                           lay.centres, lay.radii, np.asarray(problem.space.passive), offsets, problem.diffusion,
                           problem.degradation, lay.symbol_interval, problem.memory)
    if problem.model == "shadowed":
        from capacity.physics.shadowed import shadowed_hits

        return shadowed_hits(lay.emitters, lay.centres, lay.radii, problem.diffusion, problem.degradation,
                             lay.symbol_interval, problem.memory)
    from capacity.physics.lone import lone_hits

    offsets = jnp.asarray(problem.space.sample_fraction) * lay.symbol_interval
    return lone_hits(lay.emitters, lay.centres, lay.radii, jnp.asarray(problem.space.passive), offsets,
                     problem.diffusion, problem.degradation, lay.symbol_interval, problem.memory)


def design_arrays(problem: Problem, u: dict):
    """Unconstrained ``u`` -> (hits (E,R,L+1), tail (E,R), symbols (S,E) molecules, Ts seconds)."""
    lay = layout(problem.space, constrain(problem.space, u), problem.base_symbols)
    hits, tail = response(problem, lay)
    return hits, tail, lay.symbols, lay.symbol_interval


def channel_means(problem: Problem, hits, tail, sym, law):
    """Mean counts for hits (E,R,L+1), tail (E,R), symbols (S,E) at input law ``law`` (S,).

    Returns (means, log_weights): envelope: means (S, 1, R), log_weights (1,) = 0; isi-as-noise: means (S, P, R)
    over the P = S^lags enumerated pasts, with their log probabilities log_weights (P,).
    """
    n_sym = sym.shape[0]
    keep = 1 + problem.lags if problem.rate == "isi-as-noise" else 1
    resid = jnp.sum(hits[:, :, keep:], axis=-1)
    if problem.residual == "interference":
        resid = resid + tail
    mean_release = law @ sym  # (E,)
    base = jnp.asarray(problem.background) + mean_release @ resid  # (R,)
    now = sym @ hits[:, :, 0]  # (S, R)
    if keep == 1:
        return (base[None, :] + now)[:, None, :], jnp.zeros(1)
    pasts = np.array(np.unravel_index(np.arange(n_sym ** problem.lags), (n_sym,) * problem.lags)).T  # (P, lags)
    isi = sum(sym[pasts[:, l]] @ hits[:, :, l + 1] for l in range(problem.lags))  # (P, R)
    means = base[None, None, :] + now[:, None, :] + isi[None, :, :]
    return means, jnp.sum(jnp.log(law)[pasts], axis=1)


def log_poisson_grid(means, lo, sizes: tuple):
    """log P(Y = y | means) on the product grid, shape means.shape[:-1] + (prod(sizes),).

    means : (..., R) Poisson means (> 0).  lo : (R,) first count of each receiver's window.  sizes : static
    window lengths.  log pmf = y ln m - m - ln y!  (xlogy so that m = 0 gives log 1 at y = 0).
    """
    total = 0.0
    n_r = len(sizes)
    for r, n in enumerate(sizes):
        y = lo[r] + jnp.arange(n, dtype=jnp.float64)
        m = means[..., r:r + 1]
        lp = xlogy(y, m) - m - gammaln(y + 1.0)  # (..., n)
        shape = lp.shape[:-1] + (1,) * r + (n,) + (1,) * (n_r - r - 1)
        total = total + lp.reshape(shape)
    return total.reshape(means.shape[:-1] + (-1,))


_log_poisson_grid_jit = jax.jit(log_poisson_grid, static_argnums=2)


def objective_value(objective: str, bits: float, molecules: float, symbol_interval: float) -> float:
    """bits per symbol -> the named objective (bits/symbol, bits/s = bits/Ts, bits/molecule = bits/M)."""
    if objective == "bits-per-second":
        return bits / symbol_interval
    if objective == "bits-per-molecule":
        return bits / molecules if molecules > 0 else float("nan")
    return bits


def _ladder(n: int) -> int:
    size = 8
    while size < n:
        size = int(math.ceil(size * 1.25 / 8.0)) * 8
    return size


def choose_grid(means: np.ndarray):
    """Output windows for means (..., R): (lo (R,) float, sizes tuple of int, truncated mass).

    Window: from max(0, min - 8 sd - 8) to max + 8 sd + 8 counts, length rounded up by :func:`_ladder`.
    """
    m = np.asarray(means, dtype=float).reshape(-1, np.shape(means)[-1])
    lo, sizes = [], []
    for r in range(m.shape[1]):
        mn, mx = m[:, r].min(), m[:, r].max()
        a = max(0.0, math.floor(mn - 8.0 * math.sqrt(mn) - 8.0))
        b = math.ceil(mx + 8.0 * math.sqrt(mx) + 8.0)
        lo.append(a)
        sizes.append(_ladder(int(b - a + 1)))
    lo = np.asarray(lo, dtype=float)
    return lo, tuple(sizes), truncated_mass(means, lo, tuple(sizes))


def truncated_mass(means, lo, sizes) -> float:
    """Largest Poisson probability outside the window ``lo .. lo + size - 1`` of any receiver and mean
    (scipy.stats.poisson)."""
    m = np.asarray(means, dtype=float).reshape(-1, np.shape(means)[-1])
    out = 0.0
    for r, n in enumerate(sizes):
        inside = stats.poisson.cdf(lo[r] + n - 1, m[:, r]) - stats.poisson.cdf(lo[r] - 1, m[:, r])
        out = max(out, float(np.max(1.0 - inside)))
    return out


def _surrogate(problem: Problem, sizes: tuple, arrays, fixed: Fixed):
    """(objective surrogate, (bits, molecules, Ts)) from design arrays (hits, tail, symbols, Ts).

    Its value equals the objective at the fixed law; its gradient is the envelope gradient (see module).
    """
    hits, tail, sym, ts = arrays
    law = jnp.asarray(fixed.law)
    means, logw = channel_means(problem, hits, tail, sym, law)
    logp = log_poisson_grid(means, jnp.asarray(fixed.lo), sizes)  # (S, P, Y)
    log_w = logsumexp(logp + logw[None, :, None], axis=1)  # (S, Y)
    bits = mutual_information(law, log_w)  # truncated mass as one overflow output, as in blahut_arimoto
    molecules = law @ jnp.sum(sym, axis=1)
    budget = problem.budget
    lagr = bits if budget is None or problem.rate != "mean-isi" else bits - fixed.slope * (molecules - budget)
    if problem.objective == "bits-per-second":
        value = lagr / ts
    elif problem.objective == "bits-per-molecule":
        if budget is not None and problem.rate == "mean-isi":
            value = lagr / jnp.where(fixed.slope > 0, budget, molecules)
        else:
            value = lagr / molecules
    else:
        value = lagr
    return value, (bits, molecules, ts)


_CACHE: dict = {}
_CACHE_SIZE = 8


def _key(problem: Problem):
    """Hashable fingerprint of a problem (array contents included)."""
    def freeze(v):
        if isinstance(v, np.ndarray):
            return (v.dtype.str, v.shape, v.tobytes())
        if isinstance(v, dict):
            return tuple(sorted((k, freeze(x)) for k, x in v.items()))
        if isinstance(v, (tuple, list)):
            return tuple(freeze(x) for x in v)
        return v

    return freeze(tuple(problem.space)) + freeze(tuple(problem)[1:])


def _compiled(problem: Problem):
    """Compiled pieces of a problem, shared by every Objective of an equal problem (a small LRU table)."""
    key = _key(problem)
    if key not in _CACHE:
        if len(_CACHE) >= _CACHE_SIZE:
            _CACHE.pop(next(iter(_CACHE)))
        arrays = lambda u: design_arrays(problem, u)  # noqa: E731
        _CACHE[key] = (jax.jit(arrays), jax.jit(lambda u, ct: jax.vjp(arrays, u)[1](ct)[0]),
                       jax.jit(lambda arr, law: channel_means(problem, arr[0], arr[1], arr[2], law)[0]), {})
    return _CACHE[key]


class Objective:
    """A compiled design objective: :meth:`evaluate` (value, and gradient when asked) at unconstrained ``u``.

    The response model runs once per evaluation (``jax.vjp``, compiled once); the channel part is compiled per
    output-grid size. Every call counts one evaluation in ``self.evaluations``. The law from the previous call
    warm-starts the fixed point of the envelope rate.
    """

    def __init__(self, problem: Problem):
        if problem.objective not in OBJECTIVES:
            raise InputError("objective", problem.objective, "unknown objective", f"use one of {OBJECTIVES}")
        problem = problem._replace(rate=canonical_rate(problem.rate))
        self.problem = problem
        self.evaluations = 0
        n_sym = np.shape(problem.base_symbols)[0]
        self._law = np.full(n_sym, 1.0 / n_sym)
        self._forward, self._pull, self._means, self._vg = _compiled(problem)
        self._sizes = None

    def _channel(self, sizes):
        """Compiled channel part on the design arrays (value, and value with d/d arrays), per grid size."""
        if sizes not in self._vg:
            problem = self.problem
            fn = lambda arr, fixed: _surrogate(problem, sizes, arr, fixed)  # noqa: E731
            self._vg[sizes] = (jax.jit(jax.value_and_grad(fn, has_aux=True)), jax.jit(fn))
        return self._vg[sizes]

    def _grow(self, sizes):
        """Grid sizes never shrink within one objective, so the compiled functions are reused."""
        if self._sizes is not None:
            sizes = tuple(max(a, b) for a, b in zip(sizes, self._sizes, strict=True))
        self._sizes = sizes
        return sizes

    def _solve(self, arrays):
        """Law, cost multiplier and certified gap: fixed point of (law -> interference -> Blahut–Arimoto)."""
        from capacity.information.blahut_arimoto import blahut_arimoto

        problem = self.problem
        if problem.rate == "isi-as-noise":
            n_sym = np.shape(problem.base_symbols)[0]
            return np.full(n_sym, 1.0 / n_sym), 0.0, 0.0
        law = self._law
        cost = np.asarray(arrays[2]).sum(axis=1)
        passes = FIXED_POINT_PASSES if problem.residual == "interference" else 1
        for _ in range(passes):
            means = np.asarray(self._means(arrays, jnp.asarray(law)))[:, 0, :]
            lo, sizes, _ = choose_grid(means)
            log_w = np.asarray(_log_poisson_grid_jit(jnp.asarray(means), jnp.asarray(lo), sizes))
            w = np.exp(log_w)  # rows sum to 1 - truncated mass; the solver accounts for the missing mass
            budget = problem.budget
            res = blahut_arimoto(w, cost=cost if budget is not None else None, budget=budget, tol=1e-10)
            law = np.asarray(res.input_distribution, dtype=float)
        law = np.maximum(law, 0.0)
        return law / law.sum(), float(res.slope), float(res.gap)

    def _guard(self, u, arrays) -> None:
        """The response invariants of :func:`capacity.physics.response.broken_invariants` at this design: a
        response model outside its range (an emitter very close to a bead) never steers the optimiser."""
        from capacity.physics.response import ROUND_OFF, broken_invariants

        hits, tail = np.asarray(arrays[0]), np.asarray(arrays[1])
        problems = broken_invariants(hits, tail, np.asarray(self.problem.space.passive),
                                     shared=self.problem.model == "shadowed")
        if problems:
            raise InputError("design", {k: np.asarray(v).tolist() for k, v in u.items()},
                             f"the {self.problem.model} response model gives {'; '.join(problems)} here (beyond "
                             f"round-off {ROUND_OFF:g})",
                             "bound the geometric tunables (bounds=...) so emitters stay further from the beads")

    def evaluate(self, u: dict, *, grad: bool = False) -> Evaluation:
        """Objective at unconstrained parameters ``u`` (dict of arrays); with ``grad``, d objective / d u too."""
        self.evaluations += 1
        u = {k: jnp.asarray(v, dtype=jnp.float64) for k, v in u.items()}
        if not feasible(self.problem.space, constrain(self.problem.space, u)):
            raise InputError("design", {k: np.asarray(v).tolist() for k, v in u.items()},
                             "puts an emitter inside a receiver or two receivers closer than the minimum gap",
                             "bound the geometric tunables (bounds=...) or move the starting layout")
        arrays = self._forward(u)
        self._guard(u, arrays)
        law, slope, gap = self._solve(arrays)
        self._law = law
        if self.problem.rate == "isi-window":
            return self._evaluate_window(u, arrays, law, slope, gap, grad)
        means = np.asarray(self._means(arrays, jnp.asarray(law)))
        lo, sizes, _ = choose_grid(means)
        sizes = self._grow(sizes)
        trunc = truncated_mass(means, lo, sizes)
        n_out = int(np.prod(sizes))
        n_mix = int(np.prod(np.shape(means)[:2])) * n_out
        if n_out > MAX_OUTPUTS or n_mix > MAX_MIXTURE:
            raise InputError("design", {k: np.asarray(v).tolist() for k, v in u.items()},
                             f"the count grid is too large ({n_out} outputs, {n_mix} mixture terms)",
                             "use fewer receivers, smaller releases, or rate='envelope'")
        fixed = Fixed(jnp.asarray(law), jnp.asarray(slope), jnp.asarray(lo))
        vg, val = self._channel(sizes)
        if grad:  # chain rule in two compiled pieces: d value / d arrays, then the response model's pullback
            (_, (bits, molecules, ts)), ct = vg(arrays, fixed)
            g = {k: np.asarray(v) for k, v in self._pull(u, ct).items()}
        else:
            _, (bits, molecules, ts) = val(arrays, fixed)
            g = None
        value = objective_value(self.problem.objective, float(bits), float(molecules), float(ts))
        if not math.isfinite(value):
            raise InputError("design", {k: np.asarray(v).tolist() for k, v in u.items()},
                             "the objective is not finite here", "narrow the bounds of the tuned parameters")
        return Evaluation(value, float(bits), float(molecules), law, slope, gap, trunc, g)

    def _evaluate_window(self, u, arrays, law, slope, gap, grad) -> Evaluation:
        """The isi-window rate: draws at the current design (fixed key), then the surrogate and its gradient."""
        from capacity.information.window import chunk_size, draw

        problem = self.problem
        hits, tail, sym, _ = arrays
        n_sym, n_rec = np.shape(sym)[0], np.shape(hits)[1]
        J = problem.lags
        chunk = chunk_size(n_sym, J, n_rec)
        lawj = jnp.asarray(law)
        base = _window_base(problem, tail, sym, lawj)
        samples = draw(jax.random.PRNGKey(WINDOW_SEED), hits, base, sym, lawj, memory_past=problem.memory, J=J,
                       n=WINDOW_SAMPLES)
        if "window" not in self._vg:
            fn = lambda arr, lw, smp: _window_value(problem, J, chunk, arr, lw, smp)  # noqa: E731
            self._vg["window"] = (jax.jit(jax.value_and_grad(fn, has_aux=True)), jax.jit(fn))
        vg, val = self._vg["window"]
        if grad:
            (_, (bits, molecules, ts)), ct = vg(arrays, lawj, samples)
            g = {k: np.asarray(v) for k, v in self._pull(u, ct).items()}
        else:
            _, (bits, molecules, ts) = val(arrays, lawj, samples)
            g = None
        value = objective_value(problem.objective, float(bits), float(molecules), float(ts))
        if not math.isfinite(value):
            raise InputError("design", {k: np.asarray(v).tolist() for k, v in u.items()},
                             "the objective is not finite here", "narrow the bounds of the tuned parameters")
        return Evaluation(value, float(bits), float(molecules), law, slope, gap, 0.0, g)


WINDOW_SEED = 20261202


def _window_base(problem: Problem, tail, sym, law):
    """Background plus the residual tail as mean interference (when ``residual = "interference"``), (R,)."""
    base = jnp.asarray(problem.background)
    if problem.residual == "interference":
        base = base + (law @ sym) @ tail
    return base


def _window_value(problem: Problem, J: int, chunk: int, arrays, law, samples):
    """(objective, (bits, molecules, Ts)) of the isi-window rate; value = estimate, gradient = likelihood ratio."""
    from capacity.information.window import surrogate

    hits, tail, sym, ts = arrays
    base = _window_base(problem, tail, sym, law)
    bits = surrogate(hits, base, sym, law, *samples, J=J, chunk=chunk)
    molecules = law @ jnp.sum(sym, axis=1)
    if problem.objective == "bits-per-second":
        value = bits / ts
    elif problem.objective == "bits-per-molecule":
        value = bits / molecules
    else:
        value = bits
    return value, (bits, molecules, ts)
