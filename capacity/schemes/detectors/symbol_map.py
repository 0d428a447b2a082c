"""Symbol-by-symbol maximum a posteriori (MAP) detection, ISI treated as its mean (ML with ``prior=False``).

Each slot is decided alone: ŝ_k = argmax_s [ln π_s + Σ_j (y_kj ln μ_sj − μ_sj)], with
μ_sj = c_j + Σ_i x_s[i] hits[i, j, 0] + Σ_{l>=1} Σ_i E[x_i] hits[i, j, l] — the unknown past releases replaced by
their mean under the input law (the usual "ISI as mean interference" receiver, e.g. Jamali et al., Proc. IEEE
107(7), 2019, sec. on detection). ln π_s is the log input law (MAP) or 0 (ML, ``prior=False``); the two agree for
equiprobable symbols. Without ISI (L = 0) this is the exact MAP/ML symbol detector.
"""

from __future__ import annotations

import numpy as np

from capacity.schemes.detectors.problem import DetectionProblem, check_counts, lag_means, mean_isi, poisson_scores


def symbol_means(problem: DetectionProblem) -> np.ndarray:
    """Mean counts the detector assumes for each symbol, (S, R): c + direct contribution + mean ISI."""
    return problem.offset[None, :] + lag_means(problem)[0] + mean_isi(problem)[None, :]


def symbol_map(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Per-slot MAP decisions (ML when the problem's prior is flat): counts (n, R) -> symbol indices (n,)."""
    y = check_counts(counts, problem)
    scores = poisson_scores(y, symbol_means(problem)) + problem.log_prior[None, :]
    return np.argmax(scores, axis=1).astype(np.int64)
