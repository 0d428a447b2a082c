"""Information rates of the Poisson channel with ISI memory, by simulation and a forward recursion.

Channel: symbol ``s`` in slot ``k`` releases ``symbols[s, i]`` molecules from emitter ``i``; receiver ``j`` counts
``y_j[k] ~ Poisson(b_j + c_j + sum_i sum_l x_i[k-l] p[i, j, l])`` independently (``b`` background, ``c`` an extra
constant mean interference such as the residual diffusion tail, ``p`` the hit tensor with lags ``l = 0..L``).
The trellis state before slot ``k`` is the last ``M`` symbols ``(x[k-1], ..., x[k-M])``, stored as the integer
``sigma = sum_l x[k-l] S^(l-1)`` (the newest symbol is the least significant digit), so the successor of
``(sigma, s)`` is ``s + S * (sigma mod S^(M-1))``.

Method (Arnold, Loeliger, Vontobel, Kavčić, Zeng, "Simulation-based computation of information rates for
channels with memory", IEEE Trans. IT 52(8), 2006): simulate ``x^n, y^n`` from the channel, run the normalised
forward recursion

    alpha_k(sigma') = (1/lambda_k) sum_{(sigma, s) -> sigma'} alpha_{k-1}(sigma) P(s | sigma) W(y_k | sigma, s)

so that ``-(1/n) sum_k ln lambda_k -> h(Y)`` and ``-(1/n) ln W(y^n | x^n) -> h(Y | X)``; ``I = h(Y) - h(Y|X)``.
When the state space is too large the recursion runs on an auxiliary channel ``q`` that keeps the first ``L'``
lags and replaces the others by their mean; ``E_p[ln q(Y|X) - ln q(Y)] / n`` with outputs drawn from the TRUE
channel is then a lower bound on the true rate (same paper, auxiliary-channel bounds).
"""

from __future__ import annotations

from functools import partial
from typing import Callable

import jax
import jax.numpy as jnp
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from jax import lax
from jax.scipy.special import logsumexp, xlogy

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.information.result import RateResult

LN2 = float(np.log(2.0))


# ----------------------------------------------------------------------------------------------- validation
def check_channel(hits, background, symbols, interference=None):
    """Validate and convert the channel description to float64 NumPy arrays.

    Returns ``(hits (E,R,L+1), base (R,), symbols (S,E))`` where ``base = background + interference``.
    ``symbols`` may also be an object with a ``.symbols`` attribute (an Alphabet).
    """
    symbols = getattr(symbols, "symbols", symbols)
    h = np.asarray(hits, dtype=float)
    if h.ndim == 2:
        h = h[:, :, None]
    if h.ndim != 3 or h.size == 0:
        raise InputError("hits", np.shape(hits), "must have shape (E, R, L+1)", "pass ChannelResponse.hits")
    if not np.all(np.isfinite(h)) or np.any(h < 0):
        raise InputError("hits", "array", "must be finite and non-negative", "check the channel response")
    E, R, _ = h.shape
    x = np.asarray(symbols, dtype=float)
    if x.ndim == 1 and E == 1:
        x = x[:, None]
    if x.ndim != 2 or x.shape[1] != E or x.shape[0] < 1:
        raise InputError("symbols", np.shape(symbols), f"must have shape (S, E) with E = {E} emitters",
                         "give one release vector (molecules per emitter) per symbol")
    if not np.all(np.isfinite(x)) or np.any(x < 0):
        raise InputError("symbols", "array", "releases must be finite and non-negative", "fix the alphabet")
    b = np.broadcast_to(np.asarray(background, dtype=float), (R,)).copy() if np.ndim(background) == 0 \
        else np.asarray(background, dtype=float)
    if b.shape != (R,) or not np.all(np.isfinite(b)) or np.any(b < 0):
        raise InputError("background", background, f"must be {R} finite non-negative mean counts",
                         "give one background mean per receiver")
    if interference is not None:
        c = np.asarray(interference, dtype=float)
        if c.shape != (R,) or not np.all(np.isfinite(c)) or np.any(c < 0):
            raise InputError("interference", interference, f"must be {R} finite non-negative mean counts",
                             "give one mean interference count per receiver, or None")
        b = b + c
    return h, b, x


def check_law(input_law, S: int, field: str = "input_law"):
    """Validate an i.i.d. law (S,) or a Markov law (S^m, S); returns (law, m) with m = 0 for i.i.d."""
    p = np.asarray(input_law, dtype=float)
    if p.ndim == 1:
        p = p[None, :]
    if p.ndim != 2 or p.shape[1] != S:
        raise InputError(field, np.shape(input_law), f"must have shape ({S},) or (S^m, {S})",
                         "give one probability per symbol (or a row per source state)")
    m = int(round(np.log(p.shape[0]) / np.log(S))) if S > 1 else 0
    if S ** m != p.shape[0]:
        raise InputError(field, np.shape(input_law), f"row count must be a power of S = {S}",
                         "index rows by the last m symbols")
    if not np.all(np.isfinite(p)) or np.any(p < 0) or not np.allclose(p.sum(axis=1), 1.0, atol=1e-9):
        raise InputError(field, input_law, "rows must be probability vectors", "normalise each row to sum 1")
    return p / p.sum(axis=1, keepdims=True), m


# ----------------------------------------------------------------------------------------------- state space
def state_digits(S: int, M: int) -> np.ndarray:
    """(S^M, M) integer array: ``digits[sigma, l-1]`` = the symbol sent ``l`` slots before (newest first)."""
    sig = np.arange(S**M)
    return np.stack([(sig // S**l) % S for l in range(M)], axis=1).astype(int) if M else np.zeros((1, 0), int)


def branch_means(hits, base, symbols, M: int) -> np.ndarray:
    """Mean counts of every branch, shape (S^M, S, R): ``base + sum_{l=0..min(M,L)} x_{digit_l} . p[:, :, l]``.

    hits (E,R,L+1) molecules -> counts; base (R,) counts; symbols (S,E) molecules. Lags beyond ``M`` are ignored
    (the caller folds them into ``base``); lags ``> L`` when ``M > L`` contribute nothing.
    """
    S = symbols.shape[0]
    L = hits.shape[2] - 1
    per_lag = np.einsum("se,erl->lsr", symbols, hits)  # (L+1, S, R): contribution of symbol s at lag l
    digits = state_digits(S, M)
    mu = np.broadcast_to(base, (S**M, S, base.shape[0])) + per_lag[0][None, :, :]
    for lag in range(1, min(M, L) + 1):
        mu = mu + per_lag[lag][digits[:, lag - 1]][:, None, :]
    return np.asarray(mu)


def expand_law(law: np.ndarray, m: int, M: int) -> np.ndarray:
    """Markov law on the last ``m`` symbols (S^m, S) as a law on the last ``M >= m`` symbols (S^M, S)."""
    S = law.shape[1]
    return law[np.arange(S**M) % (S**m)]


def stationary(trans: np.ndarray) -> np.ndarray:
    """Stationary law of the shift-register chain with transition law ``trans`` (S^M, S) over its S^M states."""
    N, S = trans.shape
    if N == 1:
        return np.ones(1)
    rows = np.repeat(np.arange(N), S)
    cols = (np.arange(S)[None, :] + S * (np.arange(N) % (N // S))[:, None]).ravel()
    P = sp.csr_matrix((trans.ravel(), (rows, cols)), shape=(N, N))
    A = (P.T - sp.identity(N)).tolil()
    A[0, :] = np.ones(N)
    rhs = np.zeros(N)
    rhs[0] = 1.0
    pi = spla.spsolve(A.tocsc(), rhs)
    pi = np.clip(pi, 0.0, None)
    return pi / pi.sum()


# ----------------------------------------------------------------------------------------------- generic core
def forward_log_normalisers(log_branch: Callable, log_trans, log_prior, outputs, n_inputs: int,
                            log_domain: bool = False):
    """Normalised forward recursion over a shift-register trellis; returns the (n,) array of ``ln lambda_k``.

    log_branch : function ``y_k -> (N, S)`` array of ln W(y_k | state, input) (any channel).
    log_trans : (N, S) ln P(input | state).  log_prior : (N,) ln law of the state before the first output.
    outputs : (n, ...) array scanned over its first axis. ``sum_k ln lambda_k = ln P(y^n)``.

    The forward vector is kept normalised (sum 1) in the linear domain, and each step's branch weights are
    scaled by ``exp(-m_k)`` with ``m_k`` the largest branch log-weight of that step, so
    ``ln lambda_k = m_k + ln(sum of scaled weights)`` (Arnold et al. 2006). The weights of blocks of up to 256
    steps are computed at once outside the sequential loop. If the forward vector's dynamic range ever exceeds
    float64 a normaliser becomes ``-inf``/``nan`` (never a silent wrong value): ``log_domain=True`` runs the same
    recursion with log-sum-exp throughout (slower; exact for any dynamic range). Jit- and vmap-friendly.
    """
    N = log_prior.shape[0]
    S = n_inputs

    def merge(w, add):
        if N == 1:
            return add(w).reshape(1)
        return add(w.reshape(S, N // S, S), axis=0).reshape(N)

    def step_log(log_alpha, y):
        new = merge(log_alpha[:, None] + log_trans + log_branch(y), logsumexp)
        log_lam = logsumexp(new)
        return new - log_lam, log_lam

    def block_lin(alpha, ys):
        # branch weights of a whole block at once (vectorised, outside the sequential part), then the scaled
        # linear update step by step: new = merge(alpha * w_k), ln lambda_k = m_k + ln sum(new)
        lw = log_trans[None] + jax.vmap(log_branch)(ys)  # (B, N, S)
        m = jnp.max(lw, axis=(1, 2))
        w = jnp.exp(lw - m[:, None, None])

        def step(a, wk):
            new = merge(a[:, None] * wk, jnp.sum)
            z = jnp.sum(new)
            return new / z, jnp.log(z)

        a, log_z = lax.scan(step, alpha, w)
        return a, m + log_z

    if log_domain:
        _, log_lams = lax.scan(step_log, log_prior, outputs)
        return log_lams
    n = outputs.shape[0]
    B = int(min(256, max(1, (1 << 18) // (N * S)), n))
    nb = n // B
    alpha, head = lax.scan(block_lin, jnp.exp(log_prior), outputs[: nb * B].reshape((nb, B) + outputs.shape[1:]))
    if nb * B == n:
        return head.reshape(-1)
    _, tail = block_lin(alpha, outputs[nb * B:])
    return jnp.concatenate([head.reshape(-1), tail])


TINY_MEAN = 1e-300  # a zero branch mean is floored here inside the recursion: y ln(mu) = -690 y for y > 0


def poisson_log_branch(mu_flat, mu_sum, N: int, S: int):
    """Branch log-likelihood function for Poisson counts (constant -ln y! dropped: it cancels in I).

    mu_flat (N*S, R) branch means, mu_sum (N*S,) their sums over receivers; ``y -> (N, S)`` array
    ``sum_j y_j ln mu_j - mu_j`` computed as one matrix-vector product.
    """
    log_mu = jnp.log(jnp.maximum(mu_flat, TINY_MEAN))

    def log_branch(y):
        return (log_mu @ y - mu_sum).reshape(N, S)
    return log_branch


# ----------------------------------------------------------------------------------------------- simulation
@jax.jit
def _poisson_flat(key, lam):
    return jax.random.poisson(key, lam, shape=lam.shape).astype(jnp.float64)


POISSON_BLOCK = 1 << 15


def poisson_counts(key, mean) -> jnp.ndarray:
    """Independent Poisson counts with the given means (any shape), drawn with ``jax.random.poisson``.

    The means are flattened and drawn in fixed blocks of ``POISSON_BLOCK`` (block ``i`` with key
    ``fold_in(key, i)``), so the sampler, slow to compile, is compiled once per process rather than per shape.
    """
    mean = jnp.asarray(mean, dtype=jnp.float64)
    size = mean.size
    blocks = max(1, -(-size // POISSON_BLOCK))
    lam = jnp.zeros(blocks * POISSON_BLOCK).at[:size].set(mean.reshape(-1))
    draws = [_poisson_flat(jax.random.fold_in(key, i), lam[i * POISSON_BLOCK:(i + 1) * POISSON_BLOCK])
             for i in range(blocks)]
    return jnp.concatenate(draws)[:size].reshape(mean.shape)


@partial(jax.jit, static_argnames=("n", "H", "m"))
def _symbols_and_means(keys, log_src, log_src_prior, sym_c, hits_c, base, *, n: int, H: int, m: int):
    """Per run (leading axis of ``keys``): H + n symbols (stationary source) and the full channel's means."""
    S = log_src.shape[1]
    L = hits_c.shape[2] - 1

    cdf = jnp.cumsum(jnp.exp(log_src), axis=1)  # inverse-CDF draws: cheap to compile, exact
    cdf0 = jnp.cumsum(jnp.exp(log_src_prior))

    def pick(c, u):
        return jnp.minimum(jnp.sum(u > c[..., :-1], axis=-1), c.shape[-1] - 1)

    def one(key):
        k_init, k_src = jax.random.split(key)
        u = jax.random.uniform(k_src, (H + n,))
        if m == 0:
            x = pick(cdf[0][None, :], u[:, None])
        else:
            s0 = pick(cdf0, jax.random.uniform(k_init))
            init = (s0 // (S ** jnp.arange(m))) % S  # newest first

            def draw(state, uk):
                s = pick(cdf[state], uk)
                return s + S * (state % (S ** (m - 1))), s

            _, rest = lax.scan(draw, s0, u[: H + n - m])
            x = jnp.concatenate([init[::-1], rest])
        X = sym_c[x]  # (H+n, E)
        idx = H + jnp.arange(n)[:, None] - jnp.arange(L + 1)[None, :]
        return x, base[None, :] + jnp.einsum("nle,erl->nr", X[idx], hits_c)

    return jax.vmap(one)(keys)


def simulate(key, log_src, log_src_prior, sym, hits, base, *, n: int, H: int, m: int, runs: int):
    """Draw ``runs`` independent stretches of ``H`` history symbols plus ``n`` symbols, and their counts.

    log_src (S^m, S) ln source law (m = 0: i.i.d.); log_src_prior (S^m,) its stationary state law; sym (S, E);
    hits (E, R, L+1) with L <= H; base (R,). Returns x (runs, H+n) ints, y (runs, n, R) counts as floats and
    mean (runs, n, R). The same key gives the same draws whatever the receiver model used afterwards.
    """
    k_sym, k_y = jax.random.split(key)
    x, mean = _symbols_and_means(jax.random.split(k_sym, runs), jnp.asarray(log_src), jnp.asarray(log_src_prior),
                                 jnp.asarray(sym), jnp.asarray(hits), jnp.asarray(base), n=n, H=H, m=m)
    return x, poisson_counts(k_y, mean), mean


def path_states(x, H: int, n: int, M: int, S: int):
    """Trellis state before each of the n slots (last M symbols), from the symbol sequence x (H+n,)."""
    if M == 0:
        return jnp.zeros(n, dtype=x.dtype)
    idx = H + jnp.arange(n)[:, None] - jnp.arange(1, M + 1)[None, :]
    return (x[idx] * (S ** jnp.arange(M))[None, :]).sum(axis=1)


@partial(jax.jit, static_argnames=("H", "M", "log_domain"))
def _run_sums(x, y, mean, mu_aux, log_trans, log_prior, *, H, M, log_domain=False):
    """Per run: (ln q(y|x) - ln q(y), ln W(y|x) - ln q(y)) in nats; x (runs, H+n), y and mean (runs, n, R)."""
    N, S = log_trans.shape
    n = y.shape[1]
    mu_flat = mu_aux.reshape(N * S, -1)
    branch = poisson_log_branch(mu_flat, mu_flat.sum(axis=1), N, S)

    def one(xr, yr, mr):
        log_lams = forward_log_normalisers(branch, log_trans, log_prior, yr, S, log_domain)
        mu_path = mu_aux[path_states(xr, H, n, M, S), xr[H:]]
        log_q_path = (xlogy(yr, mu_path) - mu_path).sum()
        log_w_path = (xlogy(yr, mr) - mr).sum()
        return log_q_path - log_lams.sum(), log_w_path - log_lams.sum()

    return jax.vmap(one)(x, y, mean)


def trellis_rates(hits, background, symbols, input_law, *, interference=None, n_symbols=20_000, n_runs=8,
                  seed=0, max_states=4096, kept_lags=None):
    """Per-run estimates behind :func:`information_rate`.

    Returns a dict with ``lower`` (n_runs,) bits/symbol (E_p[ln q(Y|X)/q(Y)]/n; the rate itself when the state
    is exact), ``upper`` (n_runs,) bits/symbol (-E_p ln q(Y)/n - h(Y|X), an auxiliary upper bound), ``kept``
    (L'), ``memory`` (L), ``states`` (S^M), ``exact`` (bool).
    """
    h, base, sym = check_channel(hits, background, symbols, interference)
    S = sym.shape[0]
    law, m = check_law(input_law, S)
    L = h.shape[2] - 1
    if int(n_symbols) < 1 or int(n_runs) < 2:
        raise InputError("n_symbols/n_runs", (n_symbols, n_runs), "need n_symbols >= 1 and n_runs >= 2",
                         "use e.g. n_symbols=20000, n_runs=8 (the spread across runs gives the error)")
    if S ** m > max_states:
        raise InputError("input_law", law.shape, f"Markov source has {S**m} states > max_states={max_states}",
                         "use a lower-order source or raise max_states")
    if kept_lags is None:
        kept = 0
        while kept < L and S ** (kept + 1) <= max_states:
            kept += 1
    else:
        kept = int(kept_lags)
        if not 0 <= kept <= L:
            raise InputError("kept_lags", kept_lags, f"must lie in 0..{L}", "give a number of exact lags")
    M = max(kept, m)
    if S**M > max_states and kept_lags is not None:
        raise InputError("kept_lags", kept_lags, f"S^{M} = {S**M} states exceed max_states={max_states}",
                         "keep fewer lags or raise max_states")
    src_prior = stationary(law)
    trans = expand_law(law, m, M)
    prior = stationary(trans)
    marg = (src_prior[:, None] * law).sum(axis=0)  # stationary symbol law (S,)
    tail = np.einsum("e,erl->r", marg @ sym, h[:, :, kept + 1:]) if kept < L else np.zeros(h.shape[1])
    mu_aux = branch_means(h[:, :, : kept + 1], base + tail, sym, M)
    H = max(L, M)
    with np.errstate(divide="ignore"):
        x, y, mean = simulate(jax.random.PRNGKey(int(seed)), np.log(law), np.log(src_prior), sym, h, base,
                              n=int(n_symbols), H=H, m=m, runs=int(n_runs))
        args = (x, y, mean, jnp.asarray(mu_aux), jnp.asarray(np.log(trans)), jnp.asarray(np.log(prior)))
        lo, up = _run_sums(*args, H=H, M=M)
        if not (np.all(np.isfinite(lo)) and np.all(np.isfinite(up))):  # dynamic range beyond float64: redo
            lo, up = _run_sums(*args, H=H, M=M, log_domain=True)
    scale = 1.0 / (int(n_symbols) * LN2)
    return {"lower": np.asarray(lo) * scale, "upper": np.asarray(up) * scale, "kept": kept, "memory": L,
            "states": S**M, "exact": kept == L}


def information_rate(hits, background, symbols, input_law, *, interference=None, n_symbols=20_000, n_runs=8,
                     seed=0, max_states=4096, kept_lags=None) -> RateResult:
    """Information rate (bits/symbol) of the Poisson ISI channel for an i.i.d. or Markov input.

    Parameters
    ----------
    hits : (E, R, L+1) hit probabilities per molecule, emitter i -> receiver j at lag l.
    background : (R,) mean background counts per slot.
    symbols : (S, E) molecules released per emitter for each symbol (or an Alphabet).
    input_law : (S,) i.i.d. symbol law, or (S^m, S) Markov law indexed by the last m symbols (newest digit
        least significant).
    interference : optional (R,) extra constant mean counts (e.g. the residual tail beyond lag L).
    n_symbols, n_runs : symbols per independent run and number of runs; the standard error is the spread of
        the per-run estimates / sqrt(n_runs).
    max_states : largest trellis size S^L' used; beyond it the reduced-state auxiliary channel keeps the
        largest L' with S^L' <= max_states exactly (or ``kept_lags``) and the rest as mean interference,
        giving a rigorous lower bound (Arnold et al., IEEE Trans. IT 52(8), 2006).
    seed : seed of the jax.random keys (outputs are the same for every ``kept_lags``: common random numbers).
    """
    r = trellis_rates(hits, background, symbols, input_law, interference=interference, n_symbols=n_symbols,
                      n_runs=n_runs, seed=seed, max_states=max_states, kept_lags=kept_lags)
    return rate_result(r, n_symbols, seed)


def rate_result(r: dict, n_symbols: int, seed: int) -> RateResult:
    """The :class:`RateResult` of :func:`trellis_rates`' per-run estimates ``r``: the forward recursion when the
    state is exact, else its reduced-state lower bound (the auxiliary upper bound quoted in the message)."""
    lo, up = r["lower"], r["upper"]
    k = lo.size
    se = float(lo.std(ddof=1) / np.sqrt(k))
    if r["exact"]:
        method = "forward recursion (exact state)"
        msg = (f"{r['states']} trellis states, memory L={r['memory']}; standard error from the spread of "
               f"{k} independent runs of {n_symbols} symbols")
    else:
        method = f"reduced-state trellis lower bound (keeps {r['kept']} of {r['memory']} lags)"
        msg = (f"auxiliary channel keeps {r['kept']} of {r['memory']} lags exactly ({r['states']} states), "
               f"the rest as mean interference; outputs simulated from the full channel, so the rate is a "
               f"lower bound; auxiliary upper bound {up.mean():.6g} ± {up.std(ddof=1) / np.sqrt(k):.2g} bits; "
               f"standard error from the spread of {k} independent runs of {n_symbols} symbols")
    return RateResult(float(lo.mean()), se, method, int(n_symbols) * k, int(seed), msg)
