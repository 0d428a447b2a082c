"""Decision-feedback detection: remove the ISI of the symbols already decided, then decide the current one.

For slot k the detector assumes the past symbols equal its own decisions ŝ_{k−1}, …, ŝ_{k−L} (the known preamble
before slot 0) and picks

    ŝ_k = argmax_s [ ln π_s + Σ_j (y_kj ln μ_sj − μ_sj) ],
    μ_sj = c_j + Σ_i x_s[i] hits[i, j, 0] + Σ_{l=1..L} Σ_i x_{ŝ_{k−l}}[i] hits[i, j, l],

i.e. the symbol-by-symbol MAP detector with the ISI mean of the decided past subtracted instead of its average
(decision-feedback equalisation, Austin, MIT RLE Tech. Rep. 461, 1967 [memory]; Belfiore & Park, Proc. IEEE 67(8),
1979 [memory]). One wrong decision corrupts the next means (error propagation), which the simulated error rate
includes. With a genie-known past it would be the detector behind the I_dfe bound. The recursion is a
``jax.lax.scan`` over slots carrying the last L decisions.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.schemes.detectors.problem import DetectionProblem, check_counts, lag_means
from capacity.schemes.detectors.symbol_map import symbol_map


@jax.jit
def _dfe_core(y, recent0, direct, isi_lags, offset, log_prior):
    """y (n, R); recent0 (L,) last decisions (recent0[m-1] = m slots ago); direct (S, R); isi_lags (L, S, R);
    offset (R,); log_prior (S,). Returns decisions (n,) int64."""
    lags = jnp.arange(isi_lags.shape[0])

    def step(recent, yk):
        isi = offset + isi_lags[lags, recent].sum(0)  # (R,)
        means = direct + isi[None, :]  # (S, R)
        score = jax.scipy.special.xlogy(yk[None, :], means).sum(-1) - means.sum(-1) + log_prior
        d = jnp.argmax(score).astype(recent.dtype)
        return jnp.concatenate([d[None], recent[:-1]]), d

    _, decisions = jax.lax.scan(step, recent0, y)
    return decisions


def decision_feedback(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Decision-feedback decisions: counts (n, R) -> symbol indices (n,). L = 0 is plain :func:`symbol_map`."""
    y = check_counts(counts, problem)
    if problem.memory == 0:
        return symbol_map(y, problem)
    lm = lag_means(problem)
    out = _dfe_core(jnp.asarray(y), jnp.asarray(problem.preamble[::-1].copy()), jnp.asarray(lm[0]),
                    jnp.asarray(lm[1:]), jnp.asarray(problem.offset), jnp.asarray(problem.log_prior))
    return np.asarray(out, dtype=np.int64)
