"""How much simulation a rate estimate gets: named settings, a stopping rule on the standard error, and a
trellis size chosen from a time budget.

Two settings (:data:`EFFORTS`):

* ``"quick"`` (the command line's default): short runs, a trellis whose reduced state is sized so that the
  forward recursion takes about :attr:`Effort.trellis_seconds`, fewer Monte Carlo samples for the bounds that
  are not the headline, and a stopping rule: batches of independent runs are added until the headline estimate's
  standard error is at most ``precision`` times its value (or ``max_rounds`` batches were run).
* ``"full"``: the long settings used for committed results (20 000 symbols x 8 runs, up to 4 096 trellis states).

The input-law search keeps as many Monte Carlo pasts in both settings (2 048): with 512 the ascent could not tell
the better law on the demo, and the quick rate came out 2 % (2.7 standard errors) below the full one; with 2 048
pasts and 10 steps both choose the law optimised for the rate with ISI and agree within their errors.

The standard error always comes from the spread of independent runs (or Monte Carlo samples), so pooling batches
keeps it honest; the batch seeds derive from the base seed (:func:`batch_seed`), so results are reproducible.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from capacity.errors import InputError
from capacity.information.result import RateResult

#: seconds per trellis branch per simulated symbol of the forward recursion (states x inputs x symbols), measured
#: on the 2-core build machine (about 7-8 ns for 625 and 3 125 states, float64); used only to size the reduced
#: state for a time budget, never to report a time
BRANCH_SECONDS = 8e-9


class Effort(NamedTuple):
    """Simulation settings of :func:`capacity.rates.link_rates`.

    n_symbols, n_runs : symbols per run and runs per batch of the forward recursion.
    max_states : largest trellis (S^L') when ``trellis_seconds`` is None.
    trellis_seconds : time budget of one batch of the forward recursion; the reduced state keeps as many lags
        as fit (:func:`states_for_budget`), at most ``max_states`` states.
    window_samples : Monte Carlo pasts of the windowed decision-feedback bound, per batch.
    bound_samples : Monte Carlo samples of the single-letter bounds (not refined).
    law_samples, law_iterations : Monte Carlo pasts and ascent steps of the input-law search.
    precision : target relative standard error of the trellis and windowed estimates (None: one batch).
    max_rounds : largest number of batches for the stopping rule.
    """

    n_symbols: int = 20_000
    n_runs: int = 8
    max_states: int = 4096
    trellis_seconds: float | None = None
    window_samples: int = 4096
    bound_samples: int = 20_000
    law_samples: int = 2048
    law_iterations: int = 15
    precision: float | None = None
    max_rounds: int = 1


EFFORTS = {
    "quick": Effort(n_symbols=2_500, n_runs=8, max_states=4096, trellis_seconds=2.0, window_samples=1024,
                    bound_samples=2_000, law_samples=2048, law_iterations=10, precision=0.005, max_rounds=8),
    "full": Effort(),
}


def effort(name_or_effort="full", **overrides) -> Effort:
    """An :class:`Effort` by name (``"quick"``/``"full"``) or as given, with fields replaced (None ignored)."""
    if isinstance(name_or_effort, Effort):
        base = name_or_effort
    elif name_or_effort in EFFORTS:
        base = EFFORTS[name_or_effort]
    else:
        raise InputError("effort", name_or_effort, "unknown setting", f"use one of {sorted(EFFORTS)}")
    out = base._replace(**{k: v for k, v in overrides.items() if v is not None})
    if out.precision is not None and not (np.isfinite(out.precision) and 0 < out.precision < 1):
        raise InputError("--precision", out.precision, "must be a relative standard error in (0, 1)",
                         "use e.g. 0.005 (0.5 %)")
    for field in ("n_symbols", "n_runs", "max_rounds", "window_samples", "bound_samples"):
        value = getattr(out, field)
        if not isinstance(value, (int, np.integer)) or value < (2 if field == "n_runs" else 1):
            raise InputError(field, value, "must be a positive whole number (n_runs >= 2)", "use the defaults")
    return out


def states_for_budget(n_inputs: int, memory: int, n_symbols_total: int, seconds: float, max_states: int) -> int:
    """Largest trellis size S^L' (L' <= memory, S^L' <= max_states) whose forward recursion over
    ``n_symbols_total`` symbols is expected to take at most ``seconds`` (at :data:`BRANCH_SECONDS`); at least
    one lag is kept when the memory allows it."""
    S = int(n_inputs)
    kept = 0
    while kept < memory and S ** (kept + 1) <= max_states:
        if kept >= 1 and S ** (kept + 2) * n_symbols_total * BRANCH_SECONDS > seconds:
            break
        kept += 1
    return S**kept


def batch_seed(seed: int, batch: int) -> int:
    """Seed of batch ``batch`` (0 = the base seed itself): distinct, reproducible streams."""
    return int(seed) + 7919 * int(batch)


def relative_se(result: RateResult) -> float:
    """Standard error over |value| (inf when the value is zero and the error is not)."""
    if result.stderr == 0:
        return 0.0
    return float(result.stderr / abs(result.rate)) if result.rate != 0 else float("inf")


def pool(results: list[RateResult]) -> RateResult:
    """Pool independent estimates of one quantity made with equal effort: mean of the values, standard error
    sqrt(sum se^2) / k; sample counts add up. The method and message are those of the first, with the batch
    count appended."""
    if len(results) == 1:
        return results[0]
    k = len(results)
    rate = float(np.mean([r.rate for r in results]))
    se = float(np.sqrt(np.sum([r.stderr**2 for r in results])) / k)
    first = results[0]
    return RateResult(rate, se, first.method, int(sum(r.samples for r in results)), first.seed,
                      f"{first.message}; {k} independent batches pooled (seeds from {first.seed})")
