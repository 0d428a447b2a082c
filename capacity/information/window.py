"""Windowed decision-feedback lower bound on the i.i.d. rate with ISI, and its gradient.

For i.i.d. inputs the chain rule gives, exactly, ``I(X^n; Y^n) = sum_k I(X_k; Y^n | X^(k-1))``; given the past
symbols the outputs before slot ``k`` say nothing more about ``X_k``, and dropping every output after slot
``k + J`` can only lose information, so

    I_win(J) = I(X_k; Y_k, ..., Y_(k+J) | X_(k-1), ..., X_(k-L))  <=  I_iid          (bits per symbol)

with the J future symbols ``X_(k+1..k+J)`` treated as noise (summed over exactly: S^J terms) and the molecules of
``X_k`` that arrive in slots ``k+1 .. k+J`` counted as signal. J = 0 is the decision-feedback bound I_dfe of
:mod:`capacity.information.bounds`; I_win grows with J towards I_iid. The chain-rule argument is that of Shamai,
Ozarow, Wyner, IEEE Trans. IT 37(6), 1991 (Gaussian ISI channel); the window with the future as noise is the
usual decision-feedback receiver with look-ahead.

Estimate: Monte Carlo over the past (L symbols drawn from the law), stratified over the current symbol (every
symbol s gets its own draw of the future and of the window outputs), exact sums over the hypothesised current
symbol and futures::

    G_n = sum_s P(s) [ln p(y_ns | s, past_n) - ln sum_s' P(s') p(y_ns | s', past_n)]      I_win ~ mean_n G_n / ln 2

The G_n are independent, so the standard error is their spread / sqrt(N). Gradient (any parameter theta of the
hit probabilities, releases or law): the likelihood-ratio (score-function) identity
``d E_theta[g_theta] = E[d g_theta] + E[(g_theta - b) d ln p_theta(sample)]`` with the baseline ``b`` the mean of
``g`` (a control variate; Williams 1992, Glynn 1990), written as a surrogate whose value is the estimate and whose
JAX gradient is that identity. With a fixed key the draws are common random numbers across designs.
"""

from __future__ import annotations

from functools import partial

import jax
import jax.numpy as jnp
import numpy as np
from jax.scipy.special import logsumexp, xlogy

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.information.result import RateResult
from capacity.information.trellis import check_channel, check_law, poisson_counts

LN2 = float(np.log(2.0))
#: largest number of enumerated futures S^J when the window is chosen automatically
MAX_FUTURES = 256
#: samples per vectorised chunk (bounds the memory of the (chunk, S, S, S^J, J+1, R) means)
CHUNK_ENTRIES = 1 << 22


def future_digits(S: int, J: int) -> np.ndarray:
    """(S^J, J) symbols X_(k+1), ..., X_(k+J) of every future (first column = the next symbol)."""
    if J == 0:
        return np.zeros((1, 0), dtype=int)
    f = np.arange(S**J)
    return np.stack([(f // S**i) % S for i in range(J)], axis=1).astype(int)


def auto_window(n_symbols: int, memory: int, max_futures: int = MAX_FUTURES) -> int:
    """Largest J <= L with S^J <= max_futures."""
    J = 0
    while J < memory and n_symbols ** (J + 1) <= max_futures:
        J += 1
    return J


def _per_lag(hits, sym, J):
    """(L+1+J+1, S, R) contribution of symbol s at lag l (zero beyond L)."""
    per_lag = jnp.einsum("se,erl->lsr", sym, hits)
    return jnp.concatenate([per_lag, jnp.zeros((J + 1,) + per_lag.shape[1:])], axis=0)


def _known_means(per_lag, base, past, J):
    """Means of the window slots from the background and the known past: (N, J+1, R).

    past (N, L) with past[:, m] the symbol m+1 slots before the current one; it reaches slot j at lag j + m + 1.
    """
    L = past.shape[1]
    lags = jnp.arange(1, L + 1)
    slots = [base + jnp.sum(per_lag[j + lags[None, :], past], axis=1) for j in range(J + 1)] if L else \
        [jnp.broadcast_to(base, (past.shape[0], base.shape[0])) for _ in range(J + 1)]
    return jnp.stack(slots, axis=1)


def _current_means(per_lag, J):
    """(S, J+1, R): what the current symbol s adds to each window slot."""
    return jnp.stack([per_lag[j] for j in range(J + 1)], axis=1)


def _future_means(per_lag, futures, J):
    """(..., J+1, R): what the future symbols ``futures`` (..., J) add to each window slot (nothing to slot 0)."""
    R = per_lag.shape[2]
    parts = [jnp.zeros(futures.shape[:-1] + (R,))]
    for j in range(1, J + 1):
        parts.append(sum(per_lag[j - i][futures[..., i - 1]] for i in range(1, j + 1)))
    return jnp.stack(parts, axis=-2)


def _log_window(y, known, now, fut, log_law, log_fut):
    """ln p(y | s', past) for every hypothesised s' (constant -ln y! dropped): y (C, S, J+1, R) -> (C, S, S)."""
    mu = known[:, None, None] + now[None, :, None] + fut[None, None, :]  # (C, S', F, J+1, R)
    log_mu = jnp.log(jnp.maximum(mu, 1e-300))
    ll = jnp.einsum("ctjr,csfjr->ctsf", y, log_mu) - jnp.sum(mu, axis=(3, 4))[:, None]
    return logsumexp(ll + log_fut[None, None, None, :], axis=-1)


@partial(jax.jit, static_argnames=("memory_past", "J", "n"))
def draw(key, hits, base, sym, law, *, memory_past: int, J: int, n: int):
    """Common random numbers for the estimator: past (n, L) symbols, future (n, S, J) symbols, and the window
    counts y (n, S, J+1, R) drawn from the true channel for each current symbol s.

    The Poisson sampler is compiled inside, once per shape (the design objective draws one shape per problem);
    :func:`draw_shared` gives the same law with a sampler compiled once per process."""
    h, b, x = (jnp.asarray(v, dtype=jnp.float64) for v in (hits, base, sym))
    S = x.shape[0]
    k_past, k_fut, k_y = jax.random.split(key, 3)
    logits = jnp.log(jnp.asarray(law, dtype=jnp.float64))
    past = jax.random.categorical(k_past, logits, shape=(n, memory_past))
    fut = jax.random.categorical(k_fut, logits, shape=(n, S, J))
    mean = true_means(h, b, x, past, fut, J)
    y = jax.random.poisson(k_y, mean, shape=mean.shape).astype(jnp.float64)
    return past, fut, y


def draw_shared(key, hits, base, sym, law, *, memory_past: int, J: int, n: int):
    """As :func:`draw` (same law, another random stream), with the counts from
    :func:`capacity.information.trellis.poisson_counts`, whose sampler is compiled once for a fixed block size: a
    Poisson sampler compiled per shape cost 2-15 s for every new (n, J, L) on the 2-core build machine."""
    k_sym, k_y = jax.random.split(key)
    past, fut, mean = _draw_symbols(k_sym, hits, base, sym, law, memory_past=memory_past, J=J, n=n)
    return past, fut, poisson_counts(k_y, mean)


@partial(jax.jit, static_argnames=("memory_past", "J", "n"))
def _draw_symbols(key, hits, base, sym, law, *, memory_past: int, J: int, n: int):
    """Past (n, L) and future (n, S, J) symbols i.i.d. from ``law``, and the window means (n, S, J+1, R)."""
    h, b, x = (jnp.asarray(v, dtype=jnp.float64) for v in (hits, base, sym))
    S = x.shape[0]
    k_past, k_fut = jax.random.split(key)
    logits = jnp.log(jnp.asarray(law, dtype=jnp.float64))
    past = jax.random.categorical(k_past, logits, shape=(n, memory_past))
    fut = jax.random.categorical(k_fut, logits, shape=(n, S, J))
    return past, fut, true_means(h, b, x, past, fut, J)


def true_means(hits, base, sym, past, fut, J):
    """Means (n, S, J+1, R) of the window outputs for each current symbol and the drawn past and future."""
    per_lag = _per_lag(hits, sym, J)
    known = _known_means(per_lag, base, past, J)
    return known[:, None] + _current_means(per_lag, J)[None] + _future_means(per_lag, fut, J)


@partial(jax.jit, static_argnames=("J", "chunk"))
def window_terms(hits, base, sym, law, past, fut, y, *, J: int, chunk: int):
    """Per-sample terms of the estimator and of its gradient surrogate.

    Returns ``(g, score)``: g (n, S) nats, ``ln p(y_ns | s, past) - ln p(y_ns | past)``; score (n, S), the
    log-probability of each sample (past, future, counts; -ln y! dropped) as a function of the arguments.
    """
    S = sym.shape[0]
    per_lag = _per_lag(hits, sym, J)
    futures = jnp.asarray(future_digits(S, J))
    log_law = jnp.log(law)
    log_fut = jnp.sum(log_law[futures], axis=1) if J else jnp.zeros(1)
    now, futm = _current_means(per_lag, J), _future_means(per_lag, futures, J)
    n = y.shape[0]
    pad = (-n) % chunk

    def one(args):
        pc, yc = args
        known = _known_means(per_lag, base, pc, J)
        lw = _log_window(yc, known, now, futm, log_law, log_fut)  # (C, S_true, S')
        lpy = logsumexp(lw + log_law[None, None, :], axis=-1)
        return jnp.diagonal(lw, axis1=1, axis2=2) - lpy

    # memoryless (L = 0): one dummy past symbol, at lag j + 1 > L where the padded hits are zero
    pk = past if past.shape[1] else jnp.zeros((n, 1), past.dtype)
    pp = jnp.concatenate([pk, jnp.zeros((pad,) + pk.shape[1:], pk.dtype)]).reshape((-1, chunk) + pk.shape[1:])
    yy = jnp.concatenate([y, jnp.zeros((pad,) + y.shape[1:])]).reshape((-1, chunk) + y.shape[1:])
    g = jax.lax.map(one, (pp, yy)).reshape(-1, S)[:n]
    mean = true_means(hits, base, sym, past, fut, J)
    score = (jnp.sum(xlogy(y, mean) - mean, axis=(2, 3)) + jnp.sum(log_law[past], axis=1)[:, None]
             + (jnp.sum(log_law[fut], axis=2) if J else 0.0))
    return g, score


def surrogate(hits, base, sym, law, past, fut, y, *, J: int, chunk: int):
    """Differentiable surrogate (bits): its value is the estimate of I_win, its gradient the likelihood-ratio
    estimate of d I_win (module docstring). The samples are data (draw them at the current arguments)."""
    g, score = window_terms(hits, base, sym, law, past, fut, y, J=J, chunk=chunk)
    box = jnp.exp(score - jax.lax.stop_gradient(score))
    centred = jax.lax.stop_gradient(g - jnp.mean(g, axis=0))
    per = g + (box - 1.0) * centred
    return jnp.mean(per @ law) / LN2


def chunk_size(S: int, J: int, R: int) -> int:
    """Samples per vectorised chunk so that the (chunk, S, S, S^J, J+1, R) work stays near CHUNK_ENTRIES."""
    return int(max(8, min(4096, CHUNK_ENTRIES // (S * S * S**J * (J + 1) * R))))


def window_bound(hits, background, symbols, input_law, *, interference=None, window: int | None = None,
                 n_samples: int = 4096, seed: int = 0, max_futures: int = MAX_FUTURES) -> RateResult:
    """Windowed decision-feedback lower bound I_win(J) on the i.i.d. rate with ISI (bits/symbol), with its SE.

    hits (E, R, L+1), background (R,) counts/slot, symbols (S, E) molecules, input_law (S,) i.i.d. law,
    interference (R,) extra mean counts (the residual tail). window: J (default: the largest J <= L with
    S^J <= max_futures). n_samples: Monte Carlo samples of the past (each with S stratified draws).
    """
    h, base, sym = check_channel(hits, background, symbols, interference)
    S = sym.shape[0]
    law, m = check_law(input_law, S)
    law = law[0]
    if m != 0:
        raise InputError("input_law", np.shape(input_law), "the windowed bound needs an i.i.d. law (S,)",
                         "pass the stationary symbol law")
    L = h.shape[2] - 1
    for name, value in (("window", window), ("n_samples", n_samples)):
        if value is not None and (isinstance(value, bool) or not isinstance(value, (int, np.integer))):
            raise InputError(name, value, "must be a whole number", "use e.g. window=2, n_samples=4096")
    J = auto_window(S, L, max_futures) if window is None else int(window)
    if not 0 <= J:
        raise InputError("window", window, "must be a non-negative number of look-ahead slots", "use e.g. 2")
    if S**J > 1 << 16:
        raise InputError("window", window, f"S^J = {S**J} futures is too many to sum over",
                         f"use window <= {auto_window(S, 10**6, 1 << 16)}")
    n = int(n_samples)
    if n < 16:
        raise InputError("n_samples", n_samples, "must be at least 16", "use e.g. 4096")
    R = h.shape[1]
    chunk = chunk_size(S, J, R)
    args = [jnp.asarray(v) for v in (h, base, sym, law)]
    past, fut, y = draw_shared(jax.random.PRNGKey(int(seed)), *args, memory_past=L, J=J, n=n)
    g, _ = window_terms(*args, past, fut, y, J=J, chunk=chunk)
    G = np.asarray(g) @ law / LN2
    se = float(G.std(ddof=1) / np.sqrt(n))
    return RateResult(float(G.mean()), se, f"windowed decision-feedback lower bound (J={J})", n, int(seed),
                      f"past of {L} lags known, current symbol seen over {J + 1} slots, {S**J} futures summed "
                      f"as noise; {n} Monte Carlo pasts x {S} stratified symbols")
