"""On-off keying detected by a count threshold on the counts summed over receivers, with the MAP threshold.

For two symbols with summed mean counts λ_lo < λ_hi (background + direct contribution + mean ISI, summed over
receivers) and prior probabilities π_lo, π_hi, the summed count Z is Poisson(λ) under each hypothesis (a sum of
independent Poisson counts). The likelihood ratio P(z|hi)/P(z|lo) = e^(λ_lo−λ_hi) (λ_hi/λ_lo)^z grows with z, so
the MAP rule "decide hi iff π_hi P(z|hi) >= π_lo P(z|lo)" is a threshold rule, z >= τ, with

    τ = max(0, ceil( (λ_hi − λ_lo + ln(π_lo/π_hi)) / ln(λ_hi/λ_lo) ))          (λ_lo > 0),

and, when λ_lo = 0 (no background), τ = 0 if π_hi e^(−λ_hi) >= π_lo else 1 (any count proves "hi"). Ties go to
"hi". The error probability of that rule is the pair of Poisson tail sums

    P_e = π_lo · P(Z >= τ | λ_lo) + π_hi · P(Z < τ | λ_hi),

exact when there is no ISI (classical binary Poisson hypothesis test; e.g. Gagliardi & Karp, Optical
Communications, 1976 [memory]; for molecular on-off keying, Jamali et al., Proc. IEEE 107(7), 2019). With ISI the
past releases are replaced by their mean (as in :mod:`symbol_map`), so the threshold is then a heuristic and its
error rate must be simulated (:func:`detector_performance`).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import poisson

from capacity.errors import InputError
from capacity.schemes.detectors.problem import DetectionProblem, check_counts
from capacity.schemes.detectors.symbol_map import symbol_means


def map_threshold(lam_lo: float, lam_hi: float, p_lo: float = 0.5, p_hi: float = 0.5) -> float:
    """The MAP count threshold τ (decide "hi" iff z >= τ) for Poisson(λ_lo) vs Poisson(λ_hi), λ_hi > λ_lo >= 0.

    Returns τ as a float holding a whole number (``inf`` when π_hi = 0: never decide "hi").
    """
    lam_lo, lam_hi = float(lam_lo), float(lam_hi)
    if not (0.0 <= lam_lo < lam_hi and math.isfinite(lam_hi)):
        raise InputError("means", (lam_lo, lam_hi), "the threshold rule needs 0 <= λ_lo < λ_hi (finite)",
                         "use an alphabet whose two symbols give different summed mean counts")
    if p_hi <= 0.0:
        return math.inf
    if p_lo <= 0.0:
        return 0.0
    if lam_lo == 0.0:
        return 0.0 if math.log(p_hi) - lam_hi >= math.log(p_lo) else 1.0
    t = (lam_hi - lam_lo + math.log(p_lo / p_hi)) / math.log(lam_hi / lam_lo)
    return float(max(0, math.ceil(t)))


def threshold_error(lam_lo: float, lam_hi: float, p_lo: float = 0.5, p_hi: float = 0.5) -> tuple[float, float]:
    """(τ, P_e) for the MAP threshold rule without ISI: P_e = π_lo P(Z >= τ | λ_lo) + π_hi P(Z < τ | λ_hi)."""
    tau = map_threshold(lam_lo, lam_hi, p_lo, p_hi)
    return tau, tail_error(tau, lam_lo, lam_hi, p_lo, p_hi)


def tail_error(tau: float, lam_lo: float, lam_hi: float, p_lo: float, p_hi: float) -> float:
    """Error probability of "decide hi iff Z >= τ": p_lo·P(Z >= τ | λ_lo) + p_hi·P(Z < τ | λ_hi) (scipy tails)."""
    if math.isinf(tau):
        return float(p_hi)
    false_on = float(poisson.sf(tau - 1.0, lam_lo)) if tau > 0 else 1.0
    missed = float(poisson.cdf(tau - 1.0, lam_hi)) if tau > 0 else 0.0
    return p_lo * false_on + p_hi * missed


def _binary_means(problem: DetectionProblem) -> tuple[np.ndarray, np.ndarray]:
    """(order, λ) with order = symbol indices sorted by summed mean count, λ the summed means (2,)."""
    if problem.size != 2:
        raise InputError("detector", "threshold",
                         "the threshold detector is for two-symbol (on-off keying) alphabets, "
                         f"got S = {problem.size}",
                         "use symbol_map, decision_feedback or viterbi for larger alphabets")
    lam = symbol_means(problem).sum(axis=1)
    order = np.argsort(lam, kind="stable")
    return order, lam[order]


def ook_threshold(problem: DetectionProblem) -> float:
    """MAP threshold τ on the summed counts for the problem's two symbols (ISI as its mean)."""
    order, lam = _binary_means(problem)
    w = np.exp(problem.log_prior - np.max(problem.log_prior))  # detector's prior: input law (MAP) or flat (ML)
    w = w / w.sum()
    return map_threshold(lam[0], lam[1], float(w[order[0]]), float(w[order[1]]))


def threshold(counts: np.ndarray, problem: DetectionProblem) -> np.ndarray:
    """Threshold decisions: counts (n, R) -> symbol indices (n,) (the larger-mean symbol iff Σ_j y_j >= τ)."""
    y = check_counts(counts, problem)
    order, _ = _binary_means(problem)
    tau = ook_threshold(problem)
    return np.where(y.sum(axis=1) >= tau, order[1], order[0]).astype(np.int64)


def threshold_error_rate(problem: DetectionProblem) -> tuple[float, float]:
    """Closed-form (τ, symbol error rate) of :func:`threshold` on an ISI-free problem (hits[:, :, 1:] all 0).

    Raises InputError when the response has ISI (then there is no closed form; simulate instead).
    """
    if problem.memory > 0 and np.any(problem.hits[:, :, 1:] > 0):
        raise InputError("hits", problem.hits.shape,
                         "the closed-form threshold error rate needs a channel without ISI "
                         "(hits[:, :, 1:] all zero)",
                         "use detector_performance to simulate it")
    order, lam = _binary_means(problem)
    tau = ook_threshold(problem)
    law = problem.input_law  # the true symbol frequencies weight the two error events
    return tau, tail_error(tau, lam[0], lam[1], float(law[order[0]]), float(law[order[1]]))
