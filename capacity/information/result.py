"""Result types shared by the information estimators (all values in bits unless a field says otherwise)."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np


class CapacityResult(NamedTuple):
    """Result of a capacity computation (Blahut–Arimoto family).

    capacity : best certified lower bound on the capacity, bits per channel use (= I(p; W) at
        ``input_distribution``).
    input_distribution : shape (S,), the input law that achieves ``capacity``.
    gap : upper bound minus ``capacity``, bits (the certificate: the true capacity lies in
        ``[capacity, capacity + gap]``).
    mean_cost : sum_x p(x) b(x) at ``input_distribution`` (0 when no cost was given).
    iterations : number of iterations taken.
    converged : whether ``gap <= tol`` (and, with a budget, the budget met within tolerance).
    message : readable summary of how the run ended.
    slope : Lagrange multiplier of the cost constraint, bits per cost unit (0 without a budget).
    """

    capacity: float
    input_distribution: np.ndarray
    gap: float
    mean_cost: float
    iterations: int
    converged: bool
    message: str
    slope: float = 0.0

    @property
    def upper_bound(self) -> float:
        return float(self.capacity + self.gap)


class RateResult(NamedTuple):
    """An information rate estimate, bits per channel use (symbol).

    rate : the estimate.
    stderr : its standard error (0 for exact values).
    method : how it was computed, e.g. ``"forward-recursion"``, ``"reduced-state lower bound"``, ``"exact"``.
    samples : symbols simulated (0 for exact values).
    seed : seed used (or ``None``).
    message : readable remarks (state count, truncation mass, ...).
    """

    rate: float
    stderr: float
    method: str
    samples: int = 0
    seed: int | None = None
    message: str = ""
