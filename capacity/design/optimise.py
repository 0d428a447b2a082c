"""Gradient design optimisation with optax: several seeded starts, constraints by reparametrisation, a polish.

``optimise_design`` maximises one objective of :mod:`capacity.design.objectives` over the tunables of
:mod:`capacity.design.params`:

1. set-up: alphabet (``build_alphabet``), differentiable response model (``shadowed`` when every receiver absorbs
   and the scenario asks for ``shadowed`` or ``particles``; ``lone`` otherwise), memory L (the scenario's, or the
   smallest L whose later slots are below ``channel.memory_tolerance`` of the pair's peak at the given design);
2. ``starts`` runs of an optax optimiser on the unconstrained parameters (default Rprop, whose per-coordinate
   step sizes are its schedule; or Adam with a warm-up + cosine-decay schedule, see :func:`make_optimiser`);
   start 0 is the given design, the others are seeded random perturbations of it (±0.7 in the unconstrained
   coordinates, i.e. about a factor 2 in log-scaled quantities). A step that would make the geometry infeasible
   (emitter inside a receiver, receivers closer than the minimum gap) is halved until feasible (up to 8 times,
   else skipped). A run stops early when, over the last ``window`` steps, the objective changed by less than
   ``rtol`` relatively and every step was small (see :func:`run_start`); each start reports both;
3. confirmation of the best design with the estimators ``capacity rate`` uses on the written scenario
   (:func:`confirm`, ``polish_symbols`` symbols x 4 runs): the rate with ISI at the better of the ISI-free and
   the ISI-optimised i.i.d. law, with the tightest bracket, in the objective's units; with a tuned ``split`` (no
   scenario field) the trellis rate and single-letter bounds at the design's own arrays instead.
"""

from __future__ import annotations

import math
import sys
import time
from typing import Callable, NamedTuple

import jax.numpy as jnp
import numpy as np
import optax

from capacity import _jax  # noqa: F401  (float64)
from capacity.design.objectives import (
    OBJECTIVES,
    Objective,
    Problem,
    canonical_rate,
    objective_value,
    response,
)
from capacity.design.params import (
    TUNABLES,
    base_physical,
    constrain,
    describe,
    feasible,
    geometry,
    layout,
    make_space,
    unconstrain,
)
from capacity.errors import InputError

JITTER = 0.7
MAX_MEMORY = 40
MAX_PASTS = 256
MAX_BOUND_STATES = 1024
#: stopping rule's relative change for the Monte Carlo isi-window objective (about 3 of its standard errors)
NOISY_RTOL = 0.03


class DesignResult(NamedTuple):
    """Outcome of :func:`optimise_design` (bits, seconds, molecules, metres).

    best : tuned parameter -> SI value (see :mod:`capacity.design.params` for what each means).
    objective : objective name.  value : objective at ``best`` with the optimised rate (``rate``).
    lower_bound, upper_bound : bounds on the i.i.d. information rate with ISI at ``best`` (objective units):
        max(I_sbs, I_dfe) and I_mf; NaN when the polish was skipped.
    evaluations : objective evaluations (each a value, most with a gradient).
    history : one dict per step: start, step, value, bits, molecules, grad_norm, the tuned values.
    converged : whether the best start met the stopping rule.  message : readable summary.
    scenario : the optimised Scenario.
    rate : the differentiable rate used ("isi-window", "mean-isi" or "isi-as-noise").
    polished : the reported rate with ISI at ``best`` (:func:`confirm`; objective units), NaN if skipped;
        polished_stderr its SE.
    starts : one dict per start (value, best, converged, evaluations, seconds).
    geometry : resulting receiver centres, radii, gaps, receiver distance (m).
    law : (S,) input law at ``best``.  model : response model used.  notes : remarks.
    """

    best: dict
    objective: str
    value: float
    lower_bound: float
    upper_bound: float
    evaluations: int
    history: list
    converged: bool
    message: str
    scenario: object
    rate: str = "isi-window"
    polished: float = float("nan")
    polished_stderr: float = float("nan")
    starts: list = []
    geometry: dict = {}
    law: np.ndarray | None = None
    model: str = ""
    notes: tuple = ()


def differentiable_model(scenario) -> str:
    """"shadowed" if every receiver absorbs in a still fluid and the scenario does not ask for "lone", else "lone"
    (with a flow or reactive receivers the lone flow / reactive forms of :mod:`capacity.physics.transport`)."""
    absorbing = all(r.kind == "absorbing" for r in scenario.receivers)
    still = not any(float(v) != 0.0 for v in scenario.medium.flow)
    return "shadowed" if absorbing and still and scenario.channel.response != "lone" else "lone"


def build_problem(scenario, tune, objective, *, rate="auto", bounds=None, min_gap=None) -> Problem:
    """The :class:`~capacity.design.objectives.Problem` of a scenario (alphabet, model, memory, budget).

    rate "auto": "isi-window" when the memory L > 0, else "mean-isi" (exact capacity of the memoryless channel).
    """
    from capacity.schemes.builders import build_alphabet

    if objective not in OBJECTIVES:
        raise InputError("objective", objective, "unknown objective", f"use one of {', '.join(OBJECTIVES)}")
    rate = "auto" if rate == "auto" else canonical_rate(rate)
    alphabet = build_alphabet(scenario.signalling, len(scenario.emitters))
    symbols = np.asarray(alphabet.symbols, dtype=float)
    space = make_space(scenario, symbols, tune, bounds=bounds, min_gap=min_gap)
    model = differentiable_model(scenario)
    problem = Problem(space, symbols, scenario.background, float(scenario.medium.diffusion),
                      float(scenario.medium.degradation), model, 0, scenario.channel.residual, objective, rate,
                      scenario.signalling.budget, 0)
    from capacity.physics.transport import transport_spec

    problem = problem._replace(transport=transport_spec(scenario))
    problem = _walls_and_pulses(scenario, problem, tune)
    memory = scenario.channel.memory
    if not isinstance(memory, (int, np.integer)):
        memory = auto_memory(problem, float(scenario.channel.memory_tolerance))
    problem = _image_depth(problem, int(memory), float(scenario.channel.symbol_interval))
    lags = 0
    n_sym = symbols.shape[0]
    while lags < memory and n_sym ** (lags + 1) <= MAX_PASTS:
        lags += 1
    if rate == "auto":
        rate = "isi-window" if memory > 0 else "mean-isi"
        problem = problem._replace(rate=rate)
    if rate == "isi-window":
        from capacity.design.objectives import WINDOW_FUTURES
        from capacity.information.window import auto_window

        return problem._replace(memory=int(memory), lags=auto_window(n_sym, int(memory), WINDOW_FUTURES))
    return problem._replace(memory=int(memory), lags=lags if rate == "isi-as-noise" else 0)


#: tunables that move the geometry (refused with walls: the optimiser has no wall constraint)
_GEOMETRY_TUNABLES = ("gap", "spacing", "radius")


def _walls_and_pulses(scenario, problem: Problem, tune) -> Problem:
    """Reflecting walls (image layouts) and release pulses of the scenario in the problem; geometry tunables with
    walls are refused (InputError)."""
    from capacity.physics.images import wall_geometry

    walls = wall_geometry(scenario.walls)
    pulses = np.asarray(scenario.emitter_pulses, dtype=float)
    if walls is not None:
        moved = [t for t in tune if t in _GEOMETRY_TUNABLES]
        if moved:
            raise InputError("tune", moved[0],
                             "moves receivers, but the optimiser has no wall constraint (a receiver could cross a "
                             "wall)", "with walls, tune symbol_interval, levels or split only")
    if problem.transport is not None and np.any(pulses > 0.0):
        raise InputError("emitter.pulse", pulses.tolist(),
                         "the design objectives do not combine release pulses with a flow or reactive receivers",
                         "optimise with impulse releases, or evaluate fixed designs with capacity rate")
    problem = problem._replace(walls=walls, pulses=tuple(pulses) if np.any(pulses > 0.0) else None)
    # provisional depth for the memory decision (horizon of MAX_MEMORY lags); set again once L is known
    return _image_depth(problem, MAX_MEMORY, float(scenario.channel.symbol_interval))


def _image_depth(problem: Problem, memory: int, symbol_interval: float) -> Problem:
    """Image depth for a channel, chosen for the horizon (memory + 1) Ts at the scenario's symbol interval."""
    if problem.walls is None:
        return problem
    from capacity.physics.walled import design_depth

    depth, _, _ = design_depth(problem.walls, problem.space.emitters, (memory + 1) * symbol_interval,
                               problem.diffusion, problem.degradation, problem.model, len(problem.space.radii))
    return problem._replace(image_depth=int(depth))


def wall_design_notes(problem: Problem, symbol_interval: float) -> list[str]:
    """Design notes on walls and pulses (the image truncation bound at the given symbol interval)."""
    out = []
    if problem.pulses is not None:
        out.append("release pulses (rectangular) of " + ", ".join(f"{p * 1e3:.4g} ms" for p in problem.pulses))
    if problem.walls is not None:
        from capacity.physics.images import truncation_bounds

        slot, _ = truncation_bounds(problem.walls, problem.space.emitters, problem.image_depth,
                                    (problem.memory + 1) * symbol_interval, problem.diffusion, problem.degradation)
        what = "a channel" if problem.walls.channel else "one reflecting wall"
        out.append(f"walls ({what}): method of images in the design objective, cells |m| <= {problem.image_depth}, "
                   f"truncation error per slot <= {slot:.2g} at the best symbol interval")
    return out


def auto_memory(problem: Problem, tolerance: float) -> int:
    """Smallest L >= 1 such that every slot after L is at most ``tolerance`` of the pair's largest slot."""
    lay = layout(problem.space, base_physical(problem.space), problem.base_symbols)
    hits, _ = response(problem._replace(memory=MAX_MEMORY), lay)
    h = np.asarray(hits)
    peak = h.max(axis=-1, keepdims=True)
    big = np.any(h > tolerance * peak, axis=(0, 1))
    last = int(np.nonzero(big)[0].max()) if big.any() else 0
    return max(1, min(last, MAX_MEMORY))


def to_scenario(scenario, problem: Problem, phys: dict):
    """The scenario with the design ``phys`` written in (symbol interval, receivers, amplitude levels).

    A tuned ``split`` has no scenario field: it is kept in :attr:`DesignResult.best` only (see notes).
    """
    import dataclasses

    lay = layout(problem.space, phys, problem.base_symbols)
    ts = float(lay.symbol_interval)
    receivers = []
    for j, rec in enumerate(scenario.receivers):
        offset = None if rec.sample_offset is None else float(problem.space.sample_fraction[j]) * ts
        receivers.append(dataclasses.replace(rec, centre=tuple(float(v) for v in np.asarray(lay.centres)[j]),
                                             radius=float(np.asarray(lay.radii)[j]), sample_offset=offset))
    out = scenario.replace(receivers=tuple(receivers), name=scenario.name + " (optimised)")
    out = out.with_channel(symbol_interval=ts)
    if "levels" in phys:
        levels = np.sort(np.concatenate([[0.0], np.asarray(phys["levels"], dtype=float)]))
        out = out.with_signalling(amplitudes=tuple(float(v) for v in levels))
    return out


def _start_points(space, n_starts, seed):
    u0 = unconstrain(space, base_physical(space))
    rng = np.random.default_rng(seed)
    points = [u0]
    while len(points) < n_starts:
        for _ in range(50):
            u = {k: jnp.asarray(np.asarray(v) + JITTER * rng.standard_normal(np.shape(v))) for k, v in u0.items()}
            if feasible(space, constrain(space, u)):
                break
        else:
            u = u0
        points.append(u)
    return points


def _norm(g: dict) -> float:
    return float(math.sqrt(sum(float(np.sum(np.square(v))) for v in g.values())))


def make_optimiser(method: str, learning_rate: float, steps: int):
    """(optax transformation, schedule) for ``method``:

    ``"rprop"`` (default): resilient propagation (Riedmiller & Braun, ICNN 1993) — per-coordinate steps that grow
    x1.2 while the gradient keeps its sign and halve when it flips, starting at ``learning_rate``; suited to
    these small deterministic problems (no momentum overshoot, insensitive to the gradient's scale).
    ``"adam"``: Adam (Kingma & Ba, ICLR 2015) with a warm-up + cosine-decay schedule and global-norm clipping.
    """
    if method == "rprop":
        opt = optax.rprop(learning_rate, eta_minus=0.5, eta_plus=1.2, min_step_size=1e-7, max_step_size=1.0)
        return opt, lambda step: learning_rate
    if method == "adam":
        schedule = optax.warmup_cosine_decay_schedule(0.2 * learning_rate, learning_rate, max(1, steps // 20),
                                                      max(2, steps), 0.05 * learning_rate)
        return optax.chain(optax.clip_by_global_norm(10.0), optax.adam(schedule)), schedule
    raise InputError("method", method, "unknown optimiser", 'use "rprop" or "adam"')


def run_start(obj: Objective, u0: dict, *, steps, learning_rate, method="rprop", window=8, rtol=1e-6,
              step_tol=1e-3, start=0, bar=None):
    """One optimiser run from ``u0``; returns (best Evaluation, best u, history, converged flag, report).

    report: relative change of the objective and largest step over the last ``window`` steps, last gradient
    norm (unconstrained coordinates).

    ``steps`` caps the optimiser steps. A step that leaves the parameters unchanged (Rprop after a sign flip)
    reuses the previous evaluation instead of spending a new one. Converged: over the last ``window`` steps the
    objective moved by less than ``rtol`` relatively and the largest step taken was below ``step_tol`` in the
    unconstrained coordinates (for Adam also: gradient norm x learning rate below ``rtol`` of the objective).
    """
    space = obj.problem.space
    opt, schedule = make_optimiser(method, learning_rate, steps)
    u = dict(u0)
    state = opt.init(u)
    best, best_u, history, values, moves, converged = None, u, [], [], [], False
    ev, moved = None, True
    for step in range(steps):
        if moved or ev is None:
            ev = obj.evaluate(u, grad=True)
        gnorm = _norm(ev.grad)
        row = {"start": start, "step": step, "value": ev.value, "bits": ev.bits, "molecules": ev.molecules,
               "grad_norm": gnorm, "evaluations": obj.evaluations}
        row.update(describe(space, constrain(space, u)))
        history.append(row)
        values.append(ev.value)
        if best is None or ev.value > best.value:
            best, best_u = ev, u
        if bar is not None:
            bar.update(1)
            bar.set_postfix(start=start, value=f"{ev.value:.6g}")
        if len(values) > window:
            recent = np.asarray(values[-window:])
            scale = max(abs(recent[-1]), 1e-300)
            small = max(moves[-window:]) < step_tol
            if method == "adam":
                small = small and gnorm * float(schedule(step)) / scale < rtol
            if (recent.max() - recent.min()) / scale < rtol and small:
                converged = True
                break
        neg = {k: -jnp.asarray(v) for k, v in ev.grad.items()}
        updates, state = opt.update(neg, state, u)
        move = 0.0
        for _ in range(8):
            trial = optax.apply_updates(u, updates)
            if feasible(space, constrain(space, trial)):
                move = max(float(np.max(np.abs(np.asarray(v)))) for v in updates.values())
                u = trial
                break
            updates = {k: 0.5 * v for k, v in updates.items()}
        moves.append(move)
        moved = move > 0
    recent = np.asarray(values[-window:])
    report = {"relative_change": float((recent.max() - recent.min()) / max(abs(recent[-1]), 1e-300)),
              "grad_norm": history[-1]["grad_norm"], "largest_step": float(max(moves[-window:], default=0.0)),
              "window": window}
    return best, best_u, history, converged, report


def polish(scenario, problem: Problem, phys: dict, law, *, n_symbols=20_000, n_runs=4, seed=0):
    """Trellis information rate (RateResult), lower and upper bounds (bits per symbol), mean molecules per
    symbol, and a note, at a design."""
    from capacity.information.bounds import isi_bounds
    from capacity.information.trellis import information_rate

    lay = layout(problem.space, phys, problem.base_symbols)
    hits, tail = response(problem, lay)
    hits, tail = np.asarray(hits), np.asarray(tail)
    symbols = np.asarray(lay.symbols)
    law = np.asarray(law, dtype=float)
    interference = (law @ symbols) @ tail if problem.residual == "interference" else np.zeros(hits.shape[1])
    background = np.asarray(problem.background, dtype=float)
    rate = information_rate(hits, background, symbols, law, interference=interference, n_symbols=n_symbols,
                            n_runs=n_runs, seed=seed)
    n_sym, lags, note = symbols.shape[0], hits.shape[2] - 1, ""
    kept = lags
    while n_sym ** kept > MAX_BOUND_STATES:
        kept -= 1
    if kept < lags:  # the bounds enumerate S^L pasts: later lags enter as mean interference
        interference = interference + (law @ symbols) @ hits[:, :, kept + 1:].sum(axis=-1)
        hits = hits[:, :, :kept + 1]
        note = (f"bounds keep {kept} of {lags} lags exactly (S^L <= {MAX_BOUND_STATES}); later lags enter them as "
                "mean interference, so they bound that reduced channel")
    bounds = isi_bounds(hits, background, symbols, law, interference=interference, seed=seed + 1)
    lower = max(bounds["sbs"].rate, bounds["dfe"].rate)
    if "lower bound" in rate.method:
        lower = max(lower, rate.rate)
    return rate, float(lower), float(bounds["mf"].rate), float(law @ symbols.sum(axis=1)), note


def confirm(scenario, *, n_symbols=20_000, n_runs=4, seed=None):
    """The rates ``capacity rate`` reports for a scenario (response model and memory as the scenario asks; the
    same estimators, with ``n_symbols`` x ``n_runs`` simulated symbols)."""
    from capacity.physics.response import channel_response
    from capacity.rates import link_rates
    from capacity.schemes.builders import build_alphabet

    response = channel_response(scenario)
    alphabet = build_alphabet(scenario.signalling, len(scenario.emitters))
    return link_rates(scenario, response, alphabet, n_symbols=n_symbols, n_runs=n_runs, seed=seed)


def optimise_design(scenario, tune, objective: str, *, rate: str = "auto", starts: int = 4, steps: int = 200,
                    learning_rate: float = 0.1, seed: int = 0, method: str = "rprop", bounds: dict | None = None,
                    progress: bool = True,
                    min_gap: float | None = None, do_polish: bool = True, polish_symbols: int = 20_000,
                    on_start: Callable | None = None) -> DesignResult:
    """Maximise ``objective`` over the tunables ``tune`` of ``scenario`` (see the module docstring).

    scenario : Scenario.  tune : names from :data:`capacity.design.params.TUNABLES`.
    objective : "bits-per-second" | "bits-per-molecule" | "bits-per-symbol".
    rate : "auto" (isi-window when memory > 0, else mean-isi) | "isi-window" | "mean-isi" | "isi-as-noise".
    starts : seeded starts (>= 1).  steps : optimiser steps per start (cap; runs stop early when converged).
    learning_rate : initial (Rprop) or peak (Adam) step in unconstrained units.  method : "rprop" | "adam"
    (see :func:`make_optimiser`).
    bounds : name -> (lo, hi) in the physical units of :mod:`capacity.design.params`.
    min_gap : smallest receiver-emitter and receiver-receiver surface gap, m (default: smallest radius / 10).
    do_polish : run the trellis rate and bounds at the best design.  on_start : called as
    ``on_start(index, record)`` when each start finishes (the CLI saves it at once).
    """
    tune = tuple(tune)
    for name, val in (("starts", starts), ("steps", steps)):
        if isinstance(val, bool) or not isinstance(val, (int, np.integer)) or val < 1:
            raise InputError(name, val, "must be a positive integer", f"give e.g. --{name} 4")
    if not (isinstance(learning_rate, (int, float)) and learning_rate > 0):
        raise InputError("learning_rate", learning_rate, "must be positive", "use e.g. 0.1")
    problem = build_problem(scenario, tune, objective, rate=rate, bounds=bounds, min_gap=min_gap)
    rate = problem.rate
    space = problem.space
    obj = Objective(problem)
    bar = None
    if progress:
        from tqdm.auto import tqdm

        # on stderr, and only when it is a terminal (a log file gets no bar)
        bar = tqdm(total=starts * steps, desc=f"optimise {objective}", unit="step", leave=False, file=sys.stderr,
                   disable=not sys.stderr.isatty())
    results, history = [], []
    try:
        for k, u0 in enumerate(_start_points(space, starts, seed)):
            t0 = time.perf_counter()
            n0 = obj.evaluations
            best, best_u, hist, conv, report = run_start(obj, u0, steps=steps, learning_rate=learning_rate,
                                                         method=method, start=k, bar=bar,
                                                         rtol=NOISY_RTOL if rate == "isi-window" else 1e-6)
            history.extend(hist)
            record = {"start": k, "value": best.value, "bits": best.bits, "molecules": best.molecules,
                      "best": describe(space, constrain(space, best_u)), "converged": conv,
                      "evaluations": obj.evaluations - n0, "steps": len(hist), "convergence": report,
                      "seconds": time.perf_counter() - t0}
            results.append((best, best_u, conv, record))
            if on_start is not None:
                on_start(k, record)
    finally:
        if bar is not None:
            bar.close()
    best, best_u, conv, _ = max(results, key=lambda r: r[0].value)
    phys = constrain(space, best_u)
    best_phys = {k: np.asarray(v) for k, v in phys.items()}
    new_scenario = to_scenario(scenario, problem, best_phys)
    notes = [f"response model: {problem.model}, memory {problem.memory} lags",
             f"largest Poisson mass outside the output grid at the best design: {best.truncated:.1e}"]
    if rate == "isi-window":
        notes.append(f"isi-window: windowed decision-feedback bound, look-ahead J = {problem.lags} slots, "
                     "input law = Blahut-Arimoto optimum of the mean-isi channel at each design")
    if rate in ("mean-isi", "isi-window"):
        notes.append(f"Blahut-Arimoto certified gap at the best design: {best.gap:.1e} bits")
    else:
        notes.append("isi-as-noise: uniform i.i.d. input over the alphabet (any budget ignored)")
    if "split" in tune:
        notes.append("the emitter split has no scenario field: it is reported in 'best' only")
    notes += wall_design_notes(problem, float(np.asarray(layout(space, best_phys, problem.base_symbols)
                                                         .symbol_interval)))
    polished = stderr = lower = upper = float("nan")
    if do_polish:
        ts = float(np.asarray(layout(space, best_phys, problem.base_symbols).symbol_interval))
        try:
            if "split" in tune:  # no scenario field for the split: the rate at the design's own arrays
                rr, lo_b, up_b, mol, note = polish(scenario, problem, best_phys, best.law,
                                                   n_symbols=polish_symbols, seed=int(scenario.channel.seed) + seed)
                method, message = rr.method, rr.message
            else:  # what `capacity rate` reports on the written scenario
                rates = confirm(new_scenario, n_symbols=polish_symbols, seed=int(scenario.channel.seed) + seed)
                rr, mol, note = rates.information_rate, rates.mean_molecules, ""
                lo_b, up_b = rates.lower_bound, rates.upper_bound
                method = f"{rr.method} at the {rates.law_choice} input law"
                message = (f"{rr.message}; lower bound from {rates.lower_bound_method}, upper bound from "
                           f"{rates.upper_bound_method}")
        except (InputError, ValueError, MemoryError) as exc:  # the design itself is kept; say why
            notes.append(f"polish skipped: {exc}")
        else:
            polished = objective_value(objective, rr.rate, mol, ts)
            stderr = objective_value(objective, rr.stderr, mol, ts)
            lower = objective_value(objective, lo_b, mol, ts)
            upper = objective_value(objective, up_b, mol, ts)
            notes.append(f"polish: {method}; {message}")
            if note:
                notes.append(note)
    n_conv = sum(r[2] for r in results)
    message = (f"best of {starts} start(s): {objective} = {best.value:.6g} ({rate} rate); "
               f"{n_conv}/{starts} start(s) met the stopping rule; {obj.evaluations} evaluations")
    return DesignResult(describe(space, best_phys), objective, best.value, lower, upper, obj.evaluations,
                        history, bool(conv), message, new_scenario, rate, polished, stderr,
                        [r[3] for r in results], geometry(space, best_phys), best.law, problem.model,
                        tuple(notes))


__all__ = ["DesignResult", "optimise_design", "build_problem", "to_scenario", "TUNABLES"]
