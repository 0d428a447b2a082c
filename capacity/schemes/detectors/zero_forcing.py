"""Zero-forcing detection: invert the direct channel, then decide to the nearest symbol.

With P0 = hits[:, :, 0] (E, R) the mean count vector of one slot, ignoring ISI, is c + P0ᵀ x. Zero forcing solves
it in the least-squares sense, x̂ = pinv(P0ᵀ) (y − c) (E,), i.e. the linear estimate that removes the cross-talk
between emitters exactly (noise-free it returns x), and then decides to the symbol whose release vector is nearest
to x̂ in Euclidean distance (molecules). For a product (multiplex) alphabet that is the nearest level per emitter.
Standard textbook zero forcing (the linear MIMO/equaliser receiver of e.g. Proakis & Salehi, Digital
Communications, 5th ed. [memory]): it ignores ISI (past releases bias x̂ upwards), the
Poisson noise shape and the prior, so it is the simplest and usually the worst of the detectors here.
"""

from __future__ import annotations

import numpy as np

from capacity.errors import InputError
from capacity.schemes.detectors.problem import DetectionProblem, check_counts


def zero_forcing_inverse(problem: DetectionProblem) -> np.ndarray:
    """pinv(P0ᵀ), shape (E, R), molecules per count. Raises InputError if R < E or P0 has rank < E."""
    p0 = problem.hits[:, :, 0]
    n_e, n_r = p0.shape
    if n_r < n_e:
        raise InputError("detector", "zero_forcing",
                         f"zero forcing needs at least as many receivers as emitters (R = {n_r} < E = {n_e})",
                         "use symbol_map, decision_feedback or viterbi, or add receivers")
    if np.linalg.matrix_rank(p0) < n_e:
        raise InputError("detector", "zero_forcing",
                         "the direct hit matrix hits[:, :, 0] has rank below the number of emitters, so their "
                         "releases cannot be separated linearly", "use symbol_map or move the receivers")
    return np.linalg.pinv(p0.T)


def zero_forcing_estimate(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """x̂ = pinv(P0ᵀ)(y − c): counts (n, R) -> estimated releases (n, E), molecules."""
    y = check_counts(counts, problem)
    return (y - problem.offset[None, :]) @ zero_forcing_inverse(problem).T


def zero_forcing(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Zero-forcing decisions: counts (n, R) -> symbol indices (n,), nearest release vector to x̂."""
    xhat = zero_forcing_estimate(counts, problem)
    d2 = ((xhat[:, None, :] - problem.symbols[None, :, :]) ** 2).sum(-1)
    return np.argmin(d2, axis=1).astype(np.int64)
