"""The counting channel every detector works on, and its simulation.

Model (Poisson counting with inter-symbol interference): symbol indices s_k (k = 0..n−1) select release vectors
x[k] = symbols[s_k] (molecules per emitter); receiver j counts, in slot k,

    y[k, j] ~ Poisson( c_j + Σ_i Σ_{l=0..L} x_i[k−l] · hits[i, j, l] ),      c_j = background_j + interference_j,

independently over k and j (exact for Poisson-distributed releases by thinning; see the design notes). The L
symbols sent before slot 0 form a *preamble*: drawn from the input law and known to the receiver (like a training
header), so every detector starts from the same known past and every scored slot sees stationary ISI.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.special import xlogy

from capacity.errors import InputError
from capacity.schemes.alphabet import Alphabet


class DetectionProblem(NamedTuple):
    """Everything a detector knows about the link (all arrays float64 unless stated).

    hits : (E, R, L+1), probability that a molecule released by emitter i is counted by receiver j l slots later.
    offset : (R,), mean counts per slot that carry no information: background + constant interference.
    symbols : (S, E), molecules released per emitter for each symbol.
    input_law : (S,), probability of each symbol (sums to 1).
    log_prior : (S,), natural log of the prior the MAP detectors use (log input_law, or zeros for plain maximum
        likelihood).
    preamble : (L,) int64, symbol indices sent in slots −L..−1 (preamble[t] in slot t−L), known to the receiver.
    """

    hits: np.ndarray
    offset: np.ndarray
    symbols: np.ndarray
    input_law: np.ndarray
    log_prior: np.ndarray
    preamble: np.ndarray

    @property
    def memory(self) -> int:
        """L, number of past slots a release still reaches."""
        return int(self.hits.shape[2]) - 1

    @property
    def size(self) -> int:
        """S, alphabet size."""
        return int(self.symbols.shape[0])


def make_problem(hits, background, alphabet: Alphabet, input_law, *, interference=None, preamble=None,
                 prior: bool = True) -> DetectionProblem:
    """Validate and assemble a :class:`DetectionProblem`.

    hits : (E, R, L+1) hit probabilities (dimensionless, in [0, 1]); E must equal ``alphabet.emitters``.
    background : (R,) mean background counts per slot (>= 0).
    alphabet : the signalling alphabet, symbols (S, E) in molecules.
    input_law : (S,) symbol probabilities (>= 0, summing to 1 within 1e-9; renormalised; entries above −1e-12
        are taken as round-off and set to 0).
    interference : optional (R,) constant mean interference counts per slot (>= 0), e.g. the residual tail.
    preamble : (L,) known symbol indices before slot 0; default: all symbol 0 (use :func:`draw_preamble` for a
        random one).
    prior : True for maximum a posteriori decisions with ``input_law`` as prior, False for maximum likelihood.
    Raises InputError naming the offending argument.
    """
    h = np.asarray(hits, dtype=float)
    if h.ndim != 3 or 0 in h.shape:
        raise InputError("hits", getattr(h, "shape", None), "must have shape (E, R, L+1)",
                         "pass ChannelResponse.hits")
    if not np.all(np.isfinite(h)) or np.any(h < 0) or np.any(h > 1):
        raise InputError("hits", "array", "hit probabilities must be finite and in [0, 1]",
                         "check the channel response")
    n_e, n_r, n_lag = h.shape
    symbols = np.asarray(alphabet.symbols, dtype=float)
    if symbols.ndim != 2 or symbols.shape[1] != n_e:
        raise InputError("alphabet", symbols.shape, f"symbols must have shape (S, {n_e}) to match hits",
                         "build the alphabet for the same number of emitters as the response")
    offset = _nonneg_vector("background", background, n_r)
    if interference is not None:
        offset = offset + _nonneg_vector("interference", interference, n_r)
    law = np.asarray(input_law, dtype=float).reshape(-1)
    law = np.where((law < 0) & (law > -1e-12), 0.0, law)  # round-off from an optimiser, not a real negative
    if law.shape != (symbols.shape[0],) or not np.all(np.isfinite(law)) or np.any(law < 0) \
            or abs(law.sum() - 1.0) > 1e-9:
        raise InputError("input_law", law.tolist() if law.size < 20 else law.shape,
                         f"must be {symbols.shape[0]} non-negative probabilities summing to 1",
                         "pass e.g. numpy.full(S, 1/S) or the capacity-achieving input_distribution")
    law = law / law.sum()
    with np.errstate(divide="ignore"):
        log_prior = np.log(law) if prior else np.zeros_like(law)
    pre = np.zeros(n_lag - 1, dtype=np.int64) if preamble is None else np.asarray(preamble, dtype=np.int64)
    if pre.shape != (n_lag - 1,) or np.any(pre < 0) or np.any(pre >= symbols.shape[0]):
        raise InputError("preamble", pre.tolist(),
                         f"must be {n_lag - 1} symbol indices in 0..{symbols.shape[0] - 1}",
                         "leave it out (all symbol 0) or draw one with draw_preamble")
    return DetectionProblem(h, offset, symbols, law, log_prior, pre)


def _nonneg_vector(name: str, value, size: int) -> np.ndarray:
    v = np.asarray(value, dtype=float).reshape(-1)
    if v.shape == (1,):
        v = np.full(size, float(v[0]))
    if v.shape != (size,) or not np.all(np.isfinite(v)) or np.any(v < 0):
        raise InputError(name, v.tolist(), f"must be {size} finite non-negative mean counts (one per receiver)",
                         "give one value per receiver, e.g. [0.5, 0.5]")
    return v


def draw_preamble(problem: DetectionProblem, rng: np.random.Generator) -> DetectionProblem:
    """The same problem with a preamble of L symbols drawn i.i.d. from ``problem.input_law``."""
    pre = rng.choice(problem.size, size=problem.memory, p=problem.input_law).astype(np.int64)
    return problem._replace(preamble=pre)


def lag_means(problem: DetectionProblem) -> np.ndarray:
    """Mean counts each symbol adds at each lag, (L+1, S, R): [l, s, j] = Σ_i symbols[s, i] hits[i, j, l]."""
    return np.einsum("se,erl->lsr", problem.symbols, problem.hits)


def mean_isi(problem: DetectionProblem) -> np.ndarray:
    """Mean ISI counts per receiver under the input law, (R,): Σ_{l>=1} Σ_s p_s · lag_means[l, s]."""
    lm = lag_means(problem)
    return np.einsum("s,lsr->r", problem.input_law, lm[1:])


def slot_means(indices: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Noiseless mean counts (n, R) for the symbol indices (n,) sent after the problem's preamble."""
    idx = np.concatenate([problem.preamble, np.asarray(indices, dtype=np.int64)])
    lm = lag_means(problem)
    n, big_l = len(indices), problem.memory
    out = np.broadcast_to(problem.offset, (n, problem.hits.shape[1])).copy()
    for lag in range(big_l + 1):
        out += lm[lag][idx[big_l - lag: big_l - lag + n]]
    return out


def simulate(problem: DetectionProblem, n_symbols: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Draw n i.i.d. symbols from the input law and their Poisson counts.

    Returns (indices (n,) int64, counts (n, R) float64 of whole numbers).
    """
    idx = rng.choice(problem.size, size=int(n_symbols), p=problem.input_law).astype(np.int64)
    counts = rng.poisson(slot_means(idx, problem)).astype(float)
    return idx, counts


def poisson_scores(counts: np.ndarray, means: np.ndarray) -> np.ndarray:
    """Poisson log-likelihoods without the log(y!) term, summed over receivers.

    counts : (n, R); means : (S, R). Returns (n, S): Σ_j y_j ln μ_sj − μ_sj (0·ln 0 = 0; y > 0 with μ = 0 gives
    −inf).
    """
    y = np.asarray(counts, dtype=float)
    return xlogy(y[:, None, :], means[None, :, :]).sum(-1) - means.sum(-1)[None, :]


def check_counts(counts, problem: DetectionProblem) -> np.ndarray:
    """Counts as a float (n, R) array, validated (finite, >= 0)."""
    y = np.asarray(counts, dtype=float)
    if y.ndim != 2 or y.shape[1] != problem.hits.shape[1] or not np.all(np.isfinite(y)) or np.any(y < 0):
        raise InputError("counts", getattr(y, "shape", None),
                         f"must be a finite non-negative array of shape (n, {problem.hits.shape[1]})",
                         "pass one row of receiver counts per slot")
    return y
