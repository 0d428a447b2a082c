"""Spatial versus amplitude signalling (and their mixtures) at equal molecule budget.

``compare_schemes`` evaluates each scheme on one channel response: ISI-free capacity, i.i.d. rate with ISI,
bounds, and every applicable detector's error rate and hard-decision rate; ``budget_sweep`` repeats the rate part
over a range of budgets to give rate-versus-budget curves.
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Callable

import numpy as np

from capacity.errors import InputError

SCHEMES = ("amplitude", "spatial", "multiplex", "hybrid")
CSV_FIELDS = (
    "scheme", "budget", "mean_molecules", "single_slot_capacity", "certified_gap", "information_rate", "stderr",
    "lower_bound", "upper_bound", "bits_per_second", "bits_per_molecule", "rate_method", "input_law",
    "lower_bound_method", "upper_bound_method", "bracket_relative", "flag",
)
#: a bracket (upper - lower) / lower wider than this is flagged in the CSV with its reason
BRACKET_TARGET = 0.05


def bracket_flag(d: dict) -> str:
    """Why a point's bracket misses :data:`BRACKET_TARGET`, or "" (d: a ``LinkRates.to_dict()`` record)."""
    lo, up = d["lower_bound"], d["upper_bound"]
    rel = d.get("bracket_relative")
    if rel is None:
        return "no positive lower bound"
    if lo > up:
        return "lower above upper (Monte Carlo noise, see notes)"
    if rel <= BRACKET_TARGET:
        return ""
    return (f"bracket {100 * rel:.0f}% > {100 * BRACKET_TARGET:.0f}%: lower from {d['lower_bound_method']}, upper "
            f"from {d['upper_bound_method']} (the trellis keeps too few lags for the auxiliary channel to be close)")


def scheme_alphabet(scenario, scheme: str):
    """The alphabet of ``scheme`` with the scenario's levels, peak and amplitudes."""
    from capacity.schemes.builders import build_alphabet

    if scheme not in SCHEMES:
        raise InputError("schemes", scheme, "unknown scheme", f"choose from {', '.join(SCHEMES)}")
    return build_alphabet(scenario.with_signalling(scheme=scheme).signalling,
                          len(scenario.emitters)).named(e.name for e in scenario.emitters)


def applicable_schemes(scenario, schemes=None) -> list[str]:
    """Schemes the layout supports (multi-emitter schemes need two or more emitters)."""
    if schemes:
        return list(schemes)
    return ["amplitude"] if len(scenario.emitters) < 2 else list(SCHEMES)


def _row(scheme, budget, rates) -> dict:
    d = rates.to_dict()
    return {
        "scheme": scheme,
        "budget": budget,
        "mean_molecules": rates.mean_molecules,
        "single_slot_capacity": d["single_slot_capacity"],
        "certified_gap": d["certified_gap"],
        "information_rate": d["information_rate"],
        "stderr": d["stderr"],
        "lower_bound": d["lower_bound"],
        "upper_bound": d["upper_bound"],
        "bits_per_second": d["bits_per_second"]["information_rate"],
        "bits_per_molecule": d["bits_per_molecule"]["information_rate"],
        "rate_method": d["rate_method"],
        "input_law": d["input_law_choice"],
        "lower_bound_method": d["lower_bound_method"],
        "upper_bound_method": d["upper_bound_method"],
        "bracket_relative": d["bracket_relative"],
        "flag": bracket_flag(d),
    }


def evaluate_detectors(scenario, response, alphabet, rates, *, n_symbols: int, seed: int) -> list[dict]:
    """Every detector that applies to this alphabet and layout; the others are listed with the reason."""
    from capacity.schemes.detectors import DETECTORS, detector_performance

    out = []
    for name in DETECTORS:
        if name == "threshold" and alphabet.size != 2:
            continue
        try:
            res = detector_performance(name, np.asarray(response.hits), scenario.background, alphabet,
                                       np.asarray(rates.iid_input), n_symbols=n_symbols, seed=seed,
                                       interference=np.asarray(rates.interference))
        except InputError as exc:
            out.append({"name": name, "symbol_error_rate": None, "rate": None, "skipped": str(exc)})
            continue
        out.append({
            "name": name,
            "symbol_error_rate": res.symbol_error_rate,
            "ser_interval": list(res.ser_interval),
            "bit_error_rate": res.bit_error_rate,
            "rate": res.rate,
            "bits_per_second": res.rate / scenario.channel.symbol_interval,
            "bits_per_molecule": res.rate / rates.mean_molecules if rates.mean_molecules > 0 else None,
            "message": res.message,
        })
    return out


def compare_schemes(scenario, response, schemes=None, *, budget=None, n_symbols=20_000, n_runs=8,
                    detector_symbols=20_000, seed=None, effort=None, progress: Callable | None = None) -> list[dict]:
    """One record per scheme at the same mean budget (JSON-ready, bits). ``effort`` (an
    :class:`capacity.effort.Effort` or its name) replaces ``n_symbols``/``n_runs`` for the rates when given;
    ``progress`` is called once per finished scheme."""
    from capacity.rates import link_rates

    seed = scenario.channel.seed if seed is None else seed
    budget = scenario.signalling.budget if budget is None else budget
    records = []
    for scheme in applicable_schemes(scenario, schemes):
        alphabet = scheme_alphabet(scenario, scheme)
        rates = link_rates(scenario, response, alphabet, budget=budget, n_symbols=n_symbols, n_runs=n_runs,
                           seed=seed, effort=effort)
        record = _row(scheme, budget, rates)
        record["detectors"] = evaluate_detectors(scenario, response, alphabet, rates, n_symbols=detector_symbols,
                                                 seed=seed + 11)
        record["details"] = rates.to_dict()
        records.append(record)
        if progress is not None:
            progress()
    return records


#: columns of a budget-sweep row that belong to the budget itself, not to the input law used for the rate with ISI
_BUDGET_OWN = ("budget", "single_slot_capacity", "certified_gap")


def carried_row(best_row: dict, row: dict) -> dict:
    """The row of a smaller budget's law carried to ``row``'s budget (its rate with ISI was higher).

    That law is feasible at the larger budget and, evaluated there on the same random numbers (same seed, same
    channel, same law), gives the same rate estimate and bounds, so its rate columns are taken over. The columns
    that depend on the budget itself (the budget and the single-slot capacity under it with its certified gap,
    ``_BUDGET_OWN``) stay those computed at this budget."""
    out = dict(best_row, input_law=f"carried from budget {best_row['budget']:g} ({best_row['input_law']})")
    out.update({k: row[k] for k in _BUDGET_OWN})
    return out


def budget_sweep(scenario, response, budgets, schemes=None, *, n_symbols=5_000, n_runs=4, seed=None,
                 csv_path: str | Path | None = None, progress: Callable | None = None, effort=None) -> dict:
    """Rate-versus-budget curves of the best rate found at each budget, non-decreasing by construction.

    Budgets are taken in increasing order; the best law found so far is a candidate at every larger budget, and
    when it still beats the law found there its row is carried (``input_law`` says so): unused molecules cost
    nothing. Each finished point is appended to ``csv_path`` at once (no lost work).

    Returns {scheme: {"budget", "rate", "stderr", "lower", "upper", "single_slot", "symbol_interval"}}.
    """
    from capacity.rates import link_rates

    seed = scenario.channel.seed if seed is None else seed
    schemes = applicable_schemes(scenario, schemes)
    curves = {s: {k: [] for k in ("budget", "rate", "stderr", "lower", "upper", "single_slot")} for s in schemes}
    writer = None
    handle = None
    if csv_path is not None:
        Path(csv_path).parent.mkdir(parents=True, exist_ok=True)
        handle = open(csv_path, "w", newline="")
        writer = csv.DictWriter(handle, fieldnames=CSV_FIELDS)
        writer.writeheader()
    try:
        for scheme in schemes:
            alphabet = scheme_alphabet(scenario, scheme)
            best_row, best_law = None, None
            for b in sorted(budgets):
                if b < alphabet.cost.min() or b <= 0:
                    continue
                cands = None if best_law is None else {f"best law at budget {best_row['budget']:g}": best_law}
                rates = link_rates(scenario, response, alphabet, budget=float(b), n_symbols=n_symbols,
                                   n_runs=n_runs, seed=seed, candidate_laws=cands, effort=effort)
                row = _row(scheme, float(b), rates)
                if best_row is not None and row["information_rate"] < best_row["information_rate"]:
                    row = carried_row(best_row, row)
                else:
                    best_row, best_law = row, np.asarray(rates.iid_input)
                c = curves[scheme]
                c["budget"].append(float(b))
                c["rate"].append(row["information_rate"])
                c["stderr"].append(row["stderr"])
                c["lower"].append(row["lower_bound"])
                c["upper"].append(row["upper_bound"])
                c["single_slot"].append(row["single_slot_capacity"])
                if writer is not None:
                    writer.writerow(row)
                    handle.flush()
                if progress is not None:
                    progress()
    finally:
        if handle is not None:
            handle.close()
    for c in curves.values():
        c["symbol_interval"] = scenario.channel.symbol_interval
    return curves
