"""``capacity response SCENARIO``: hit probabilities of every emitter-receiver pair, slot by slot."""

from __future__ import annotations

import argparse
import sys

import numpy as np

from capacity.cli._common import (
    SAFETY,
    add_scenario_argument,
    apply_overrides,
    check_plot_path,
    dump_json,
    load,
    status,
)
from capacity.errors import InputError

MODELS = ("lone", "shadowed", "particles")


def add_parser(sub) -> None:
    p = sub.add_parser(
        "response",
        help="per-slot hit probabilities of every emitter-receiver pair",
        description=(
            "Compute the probability that a molecule released by each emitter is counted by each receiver in "
            "each symbol slot after its release, the mass counted after the last kept slot (tail), and, for the "
            "particle model, standard errors. Options override the scenario file."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--model", choices=MODELS, help="response model (default: the scenario's channel.response)")
    p.add_argument("--particle-count", type=int, metavar="N",
                   help="molecules simulated per emitter (particle model; overrides channel.particle_count)")
    # the old spelling, hidden from --help, accepted with a note for one release
    p.add_argument("--particles", dest="old_particles", type=int, help=argparse.SUPPRESS)
    p.add_argument("--seed", type=int, metavar="S", help="random seed (particle model)")
    p.add_argument("--force", action="store_true",
                   help="start a particle run even when a timed pilot estimates it at more than an hour")
    p.add_argument("--json", action="store_true", help="print JSON instead of tables")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.add_argument("--plot", metavar="FILE", help="write a plot of the responses (.png, .pdf or .svg)")
    p.add_argument("--log", action="store_true", help="logarithmic probability axis in the plot (shows cross-talk)")
    p.add_argument("--slots", type=int, metavar="N", help="show only the first N slots in the table (default all)")
    p.set_defaults(func=run)


def response_record(scenario, response) -> dict:
    """The JSON record of a response (SI units, probabilities dimensionless)."""
    return {
        "scenario": scenario.name,
        "model": response.model,
        "hits": response.hits,
        "tail": response.tail,
        "stderr": response.stderr,
        "slot_edges": response.slot_edges,
        "emitters": [e.name for e in scenario.emitters],
        "receivers": [r.name for r in scenario.receivers],
        "units": {"hits": "probability per molecule per slot", "slot_edges": "s"},
        "notes": list(response.notes),
    }


def _cell(x: float) -> str:
    """One number format for every cell: 4 significant digits in scientific notation."""
    return f"{x:.3e}"


def format_response(scenario, response, max_slots: int | None = None) -> str:
    """Slots (rows, with the slot's start time in ms) x emitter -> receiver pairs (columns), every slot unless
    ``max_slots`` is given (then "... N more slots" with the mass they hold), then the tail beyond the last kept
    slot, the total and the peak slot per pair. Particle responses add a row of largest standard errors."""
    hits = np.asarray(response.hits)
    se = None if response.stderr is None else np.asarray(response.stderr)
    n_e, n_r, n_slots = hits.shape
    shown = n_slots if max_slots is None else min(n_slots, max_slots)
    starts_ms = np.asarray(response.slot_edges)[:-1] * 1e3
    ts_ms = float(response.slot_edges[1] - response.slot_edges[0]) * 1e3
    pairs = [(i, j) for i in range(n_e) for j in range(n_r)]
    head = [f"{scenario.emitters[i].name}->{scenario.receivers[j].name}" for i, j in pairs]
    width = max(11, *(len(h) + 2 for h in head))
    lines = [f"{scenario.name}: {response.model} model, slot {ts_ms:g} ms, {n_slots} slots kept "
             f"(lag 0..{n_slots - 1}); hit probability per molecule released at time 0",
             "  receivers: " + ", ".join(f"{r.name} ({r.kind})" for r in scenario.receivers),
             "",
             f"  {'slot':>5} {'start ms':>10}" + "".join(f"{h:>{width}}" for h in head)]
    for lag in range(shown):
        lines.append(f"  {lag:>5} {starts_ms[lag]:>10.4g}" + "".join(f"{_cell(hits[i, j, lag]):>{width}}"
                                                                 for i, j in pairs))
    if shown < n_slots:
        rest = hits[:, :, shown:].sum(axis=-1)
        label = f"+{n_slots - shown} slots"
        lines.append(f"  {label:>16}" + "".join(f"{_cell(rest[i, j]):>{width}}" for i, j in pairs))
    rows = [("tail", np.asarray(response.tail)), ("total", hits.sum(axis=-1) + np.asarray(response.tail))]
    for name, values in rows:
        lines.append(f"  {name:>16}" + "".join(f"{_cell(values[i, j]):>{width}}" for i, j in pairs))
    lines.append(f"  {'peak slot':>16}" + "".join(f"{int(np.argmax(hits[i, j])):>{width}}" for i, j in pairs))
    if se is not None:
        lines.append(f"  {'largest std err':>16}" + "".join(f"{_cell(se[i, j].max()):>{width}}" for i, j in pairs))
    if shown < n_slots:
        lines.append(f"  +{n_slots - shown} slots: the mass of the slots not shown (--slots; --json for all)")
    lines.append("  tail: mass counted after the last kept slot; total: slots + tail (for absorbing receivers the "
                 "eventual capture)")
    for note in response.notes:
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def run(args) -> int:
    from capacity.physics.response import channel_response

    if args.slots is not None and args.slots < 1:
        raise InputError("--slots", args.slots, "must be at least 1", "give a number of slots such as 12")
    if args.plot:
        check_plot_path(args.plot)
    _old_particles_option(args)
    scenario = apply_overrides(load(args.scenario, strict=args.strict), args)
    model = args.model or scenario.channel.response
    with status(f"computing the {model} response", args.quiet or args.json or model == "particles"):
        response = channel_response(scenario, args.model, particle_count=args.particle_count, seed=args.seed,
                                    progress=not (args.json or args.quiet), force=args.force)
    if args.plot:
        from capacity.report.plots import plot_response

        where = plot_response(response, [e.name for e in scenario.emitters], [r.name for r in scenario.receivers],
                              args.plot, title=scenario.name, log=args.log)
        print(f"plot written to {where}", file=sys.stderr)
    print(dump_json(response_record(scenario, response)) if args.json
          else f"{format_response(scenario, response, args.slots)}\n{SAFETY}")
    return 0


def _old_particles_option(args) -> None:
    """``--particles N``, the deprecated spelling of ``--particle-count N``: taken as it, with a one-line note on
    stderr; both spellings at once is an :class:`InputError`."""
    if args.old_particles is None:
        return
    if args.particle_count is not None:
        raise InputError("--particles", args.old_particles, "is the old name of --particle-count, which is also given",
                         "give only --particle-count")
    print("note: --particles is deprecated: use --particle-count (same meaning)", file=sys.stderr)
    args.particle_count = args.old_particles
