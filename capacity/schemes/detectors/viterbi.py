"""Maximum a posteriori (maximum likelihood) sequence detection over the ISI trellis: the Viterbi algorithm.

The channel is a finite-state machine whose state before slot k is the last L symbols (s_{k−L}, …, s_{k−1}),
S^L states. A branch (state, s_k) has the mean counts μ = c + Σ_{l=0..L} Σ_i x_{s_{k−l}}[i] hits[i, :, l] and the
metric ln π_{s_k} + Σ_j (y_kj ln μ_j − μ_j) (the Poisson log-likelihood without the ln y! term, which is the same
for every path). The Viterbi recursion (Viterbi, IEEE Trans. IT 13(2), 1967; Forney, Proc. IEEE 61(3), 1973)

    m_{k+1}(ns) = max_{p -> ns} [ m_k(p) + metric(p, s(ns), y_k) ],

followed by a traceback, returns the sequence ŝ_0..ŝ_{n−1} that maximises Σ_k metric over all S^n sequences, given
the known preamble (the start state) and leaving the final state free (the block is not terminated). With
``prior=False`` the ln π term is 0 (maximum likelihood sequence detection); for equiprobable symbols the two agree.

State encoding: state = Σ_{m=1..L} s_{k−m} S^(m−1) (the latest symbol is the least significant digit), so the
successor of p under symbol s is (p·S + s) mod S^L and the predecessors of ns are ns // S + a·S^(L−1), a = 0..S−1.
The forward pass and the traceback are ``jax.lax.scan`` loops (jit-compiled, static shapes). Memory: n·S^L
survivor digits (int16); time grows as n·S^(L+1)·R.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.schemes.detectors.problem import DetectionProblem, check_counts, lag_means
from capacity.schemes.detectors.symbol_map import symbol_map

MAX_STATES = 4096
"""Largest trellis (S^L states) the detector accepts."""

MAX_BRANCHES = 65536
"""Largest number of branches per slot (S^(L+1)); at that size 20 000 slots take ~15 s on one CPU core."""


def trellis(problem: DetectionProblem) -> tuple[np.ndarray, int]:
    """Branch means of the trellis (L >= 1).

    Returns (means, start): means (N, S, R) with N = S^L, means[ns, a] = mean counts of the branch that enters
    state ns from its predecessor p = ns // S + a·S^(L−1) (a = the oldest symbol, which leaves the memory) with the
    symbol ns mod S; start = state index of the known preamble.
    """
    n_s, big_l = problem.size, problem.memory
    n_states = n_s ** big_l
    if n_states > MAX_STATES or n_states * n_s > MAX_BRANCHES:
        raise InputError("detector", "viterbi",
                         f"the trellis would have S^L = {n_s}^{big_l} = {n_states} states and {n_states * n_s} "
                         f"branches per slot (limits {MAX_STATES} and {MAX_BRANCHES})",
                         "use decision_feedback, or shorten the memory (fewer lags) or the alphabet")
    lm = lag_means(problem)  # (L+1, S, R)
    states = np.arange(n_states, dtype=np.int64)
    digits = np.stack([(states // n_s ** (m - 1)) % n_s for m in range(1, big_l + 1)], axis=1)  # (N, L)
    past = problem.offset[None, :] + sum(lm[m][digits[:, m - 1]] for m in range(1, big_l + 1))  # (N, R)
    branch = past[:, None, :] + lm[0][None, :, :]  # (p, s, R)
    pred = (states // n_s)[:, None] + np.arange(n_s, dtype=np.int64)[None, :] * n_s ** (big_l - 1)  # (N, S)
    means = branch[pred, (states % n_s)[:, None], :]  # (ns, a, R)
    start = int(sum(int(problem.preamble[big_l - m]) * n_s ** (m - 1) for m in range(1, big_l + 1)))
    return means, start


@jax.jit
def _viterbi_core(y, start_metric, means, log_prior):
    """Forward scan + traceback. y (n, R); start_metric (N,); means (N, S, R) as from :func:`trellis`;
    log_prior (S,). Returns decisions (n,) int64.

    With Q = S^(L−1), state ns = q·S + s and its predecessors p = a·Q + q, so the candidate metrics are the
    broadcast metric.reshape(S, Q).T[q, None, a] + branch[q, s, a] (no gather), maximised over a.
    """
    n_states, n_s, n_r = means.shape
    q = n_states // n_s
    cost = (means.sum(-1) - jnp.tile(log_prior, q)[:, None]).reshape(q, n_s, n_s)  # μ summed − ln π_s
    # ln μ with μ = 0 replaced by -1e300: then y·ln μ is 0 for y = 0 (0·ln 0 = 0) and hugely negative for y > 0
    # (an impossible branch), without the NaN that 0·(−inf) would give inside the contraction.
    log_means = jnp.where(means > 0, jnp.log(jnp.where(means > 0, means, 1.0)), -1e300)
    log_means = jnp.moveaxis(log_means, -1, 0).reshape(n_r, q, n_s, n_s)  # (R, q, s, a)

    def forward(metric, yk):
        branch = jnp.tensordot(yk, log_means, 1) - cost  # (q, s, a): Σ_j y_j ln μ_j − μ_j + ln π_s
        cand = metric.reshape(n_s, q).T[:, None, :] + branch
        best = jnp.max(cand, axis=-1).reshape(n_states)
        top = jnp.max(best)
        best = best - jnp.where(jnp.isfinite(top), top, 0.0)
        return best, jnp.argmax(cand, axis=-1).reshape(n_states).astype(jnp.int16)

    final, back = jax.lax.scan(forward, start_metric, y)

    def traceback(state, back_k):
        prev = state // n_s + back_k[state].astype(jnp.int64) * q
        return prev, state % n_s

    _, decisions = jax.lax.scan(traceback, jnp.argmax(final).astype(jnp.int64), back, reverse=True)
    return decisions


def reduced_problem(problem: DetectionProblem, kept: int) -> DetectionProblem:
    """The same link seen through a trellis that keeps only the first ``kept`` lags; the later lags' contribution
    is replaced by its mean under the input law and added to ``offset`` (a mismatched, reduced-state receiver in
    the sense of the auxiliary channels of Arnold et al., IEEE Trans. IT 52(8), 2006)."""
    lm = lag_means(problem)  # (L+1, S, R)
    late = np.einsum("s,lsr->r", problem.input_law, lm[kept + 1:])
    return problem._replace(hits=problem.hits[:, :, : kept + 1], offset=problem.offset + late,
                            preamble=problem.preamble[problem.memory - kept:])


def kept_lags(problem: DetectionProblem) -> int:
    """Largest number of lags whose trellis fits within MAX_STATES states and MAX_BRANCHES branches."""
    n_s, kept = problem.size, 0
    while kept < problem.memory and n_s ** (kept + 1) <= MAX_STATES and n_s ** (kept + 2) <= MAX_BRANCHES:
        kept += 1
    return kept


def viterbi(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Sequence decisions: counts (n, R) -> symbol indices (n,) maximising the joint posterior (or likelihood).

    With no ISI (L = 0) the sequence detector is the symbol-by-symbol one (:func:`symbol_map`), used directly.
    When the full trellis is larger than MAX_STATES / MAX_BRANCHES, the detector runs on a reduced trellis that
    keeps the first lags exactly and the rest as mean interference (:func:`reduced_problem`); it is then no longer
    the exact sequence detector, and ``detector_performance`` says so in its message.
    """
    y = check_counts(counts, problem)
    kept = kept_lags(problem)
    if kept < problem.memory:
        problem = reduced_problem(problem, kept)
    if problem.memory == 0:
        return symbol_map(y, problem)
    means, start = trellis(problem)
    start_metric = np.full(means.shape[0], -np.inf)
    start_metric[start] = 0.0
    out = _viterbi_core(jnp.asarray(y), jnp.asarray(start_metric), jnp.asarray(means),
                        jnp.asarray(problem.log_prior))
    return np.asarray(out, dtype=np.int64)
