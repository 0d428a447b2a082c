"""``capacity optimise SCENARIO --tune ... --objective ...``: gradient design optimisation of a layout.

Prints the best design with its rate and bounds; with ``--out DIR`` writes ``optimised.toml`` (the optimised
scenario, SI numbers), ``optimise.json``, ``start_<k>.json`` as each start finishes, ``history.png`` (objective
against step) and, with one scalar tunable, ``objective_vs_<name>.png``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from capacity.cli._common import SAFETY, add_scenario_argument, dump_json, fmt, load
from capacity.errors import InputError

UNITS = {"symbol_interval": "s", "levels": "molecules", "split": "fraction", "gap": "m",
         "spacing": "scale of receiver offsets", "radius": "scale of radii"}
OBJECTIVE_UNITS = {"bits-per-second": "bits/s", "bits-per-molecule": "bits/molecule",
                   "bits-per-symbol": "bits/symbol"}


def add_parser(sub) -> None:
    p = sub.add_parser(
        "optimise",
        help="tune slot length, release levels, emitter split or receiver geometry for the most bits",
        description=(
            "Gradient optimisation (optax Rprop or Adam, several seeded starts) of one objective over chosen "
            "design parameters. "
            "Tunables: symbol_interval (slot length, s); levels (the non-zero release levels, molecules, each "
            "below the peak); split (share of each symbol's molecules per emitter); gap (moves every receiver "
            "along the line from its nearest emitter; the value is the smallest surface gap, m); spacing "
            "(scales receiver offsets from their centroid; 1 = as given); radius (scales every radius, "
            "keeping each receiver's surface gap; 1 = as given). By default the rate optimised is a "
            "lower bound on the information rate with ISI in which a symbol's late-arriving molecules count as "
            "signal (isi-window); the best design is then checked with the information rate with ISI (forward "
            "recursion) and its bounds."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--tune", required=True, metavar="NAMES",
                   help="comma-separated tunables: symbol_interval,levels,split,gap,spacing,radius")
    p.add_argument("--objective", required=True, choices=tuple(OBJECTIVE_UNITS),
                   help="what to maximise")
    p.add_argument("--rate", default="auto", choices=("auto", "isi-window", "mean-isi", "isi-as-noise", "envelope"),
                   help="differentiable rate to optimise: isi-window (windowed decision-feedback lower bound on "
                        "the rate with ISI; late arrivals count as signal), mean-isi (fast: release-slot capacity "
                        "with the ISI as mean interference; 'envelope' is its earlier name), isi-as-noise; "
                        "default auto = isi-window when the memory is > 0")
    p.add_argument("--starts", type=int, default=4, metavar="N", help="seeded starts (default 4)")
    p.add_argument("--steps", type=int, default=200, metavar="N",
                   help="most optimiser steps per start; a start stops early once converged (default 200)")
    p.add_argument("--method", default="rprop", choices=("rprop", "adam"),
                   help="optax optimiser: rprop (sign-based adaptive steps, default) or adam (cosine schedule)")
    p.add_argument("--learning-rate", type=float, default=0.1, metavar="ETA",
                   help="first (rprop) or peak (adam) step in the unconstrained coordinates (default 0.1)")
    p.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the random starts (default 0)")
    p.add_argument("--bound", action="append", default=[], metavar="NAME=LO:HI",
                   help="bound a tunable in its units, e.g. symbol_interval=0.05:2 (repeatable)")
    p.add_argument("--no-polish", action="store_true",
                   help="skip the information-rate check and bounds at the best design")
    p.add_argument("--out", metavar="DIR", help="write optimised.toml, JSON records and plots here")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=run)


def parse_bounds(items) -> dict:
    out = {}
    for item in items:
        try:
            name, rng = item.split("=", 1)
            lo, hi = (float(v) for v in rng.split(":", 1))
        except ValueError:
            raise InputError("--bound", item, "is not NAME=LO:HI", "write e.g. symbol_interval=0.05:2") from None
        out[name.strip()] = (lo, hi)
    return out


def result_record(result) -> dict:
    return {
        "best": result.best, "objective": result.objective, "unit": OBJECTIVE_UNITS[result.objective],
        "value": result.value, "rate": result.rate, "lower_bound": result.lower_bound,
        "upper_bound": result.upper_bound, "information_rate": result.polished,
        "information_rate_stderr": result.polished_stderr, "evaluations": result.evaluations,
        "converged": result.converged, "message": result.message, "model": result.model,
        "geometry": result.geometry, "input_law": result.law, "starts": result.starts, "notes": list(result.notes),
        "history": result.history, "caution": SAFETY,
    }


def format_result(result) -> str:
    unit = OBJECTIVE_UNITS[result.objective]
    lines = [result.message, "", "best design:"]
    for name, value in result.best.items():
        shown = ", ".join(fmt(v) for v in value) if isinstance(value, list) else fmt(value)
        lines.append(f"  {name:<16} {shown} {UNITS[name]}")
    lines.append("")
    lines.append(f"  {result.objective} ({result.rate} rate): {fmt(result.value)} {unit}")
    if np.isfinite(result.polished):
        lines.append(f"  confirmed with what `capacity rate` reports: {fmt(result.polished)} +/- "
                     f"{fmt(result.polished_stderr)} {unit}")
        lines.append(f"  bracket: {fmt(result.lower_bound)} <= i.i.d. rate with ISI <= {fmt(result.upper_bound)} "
                     f"{unit}")
    for note in result.notes:
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def _plots(result, out: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from capacity.report.plots import save_figure

    unit = OBJECTIVE_UNITS[result.objective]
    fig, ax = plt.subplots(figsize=(6, 4))
    for k in sorted({h["start"] for h in result.history}):
        rows = [h for h in result.history if h["start"] == k]
        ax.plot([h["step"] for h in rows], [h["value"] for h in rows], label=f"start {k}")
    ax.set_xlabel("optimiser step")
    ax.set_ylabel(f"{result.objective} [{unit}]")
    ax.set_title(f"{result.objective}, {result.rate} rate")
    ax.legend(fontsize=8)
    save_figure(fig, out / "history.png", dpi=120)
    scalars = [n for n, v in result.best.items() if not isinstance(v, list)]
    if len(result.best) == 1 and scalars:
        name = scalars[0]
        fig, ax = plt.subplots(figsize=(6, 4))
        xs = np.array([h[name] for h in result.history])
        ys = np.array([h["value"] for h in result.history])
        ax.plot(xs, ys, ".", ms=3, label="evaluations")
        ax.plot([result.best[name]], [result.value], "r*", ms=12, label="best")
        if name in ("symbol_interval",) and xs.min() > 0:
            ax.set_xscale("log")
        ax.set_xlabel(f"{name} [{UNITS[name]}]")
        ax.set_ylabel(f"{result.objective} [{unit}]")
        ax.legend(fontsize=8)
        save_figure(fig, out / f"objective_vs_{name}.png", dpi=120)


def run(args) -> int:
    from capacity.design.optimise import optimise_design
    from capacity.design.scenario_toml import scenario_toml

    scenario = load(args.scenario, strict=args.strict)
    tune = tuple(t.strip() for t in args.tune.split(",") if t.strip())
    out = Path(args.out) if args.out else None
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)

    def save_start(k, record):
        if out is not None:
            dump_json(record, out / f"start_{k}.json")

    result = optimise_design(scenario, tune, args.objective, rate=args.rate, starts=args.starts, steps=args.steps,
                             learning_rate=args.learning_rate, method=args.method, seed=args.seed,
                             bounds=parse_bounds(args.bound),
                             progress=not args.json, do_polish=not args.no_polish, on_start=save_start)
    record = result_record(result)
    if out is not None:
        comments = (f"optimised by `capacity optimise` for {result.objective}: {result.value:.6g} "
                    f"{OBJECTIVE_UNITS[result.objective]} ({result.rate} rate)",
                    "tuned: " + ", ".join(f"{k} = {v}" for k, v in result.best.items()))
        (out / "optimised.toml").write_text(scenario_toml(result.scenario, comments))
        dump_json(record, out / "optimise.json")
        _plots(result, out)
    print(dump_json(record) if args.json else format_result(result) + f"\n{SAFETY}")
    return 0
