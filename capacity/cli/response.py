"""``capacity response SCENARIO``: hit probabilities of every emitter-receiver pair, slot by slot."""

from __future__ import annotations

import numpy as np

from capacity.cli._common import add_scenario_argument, dump_json, fmt, load

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
    p.add_argument("--particles", type=int, metavar="N", help="molecules simulated per emitter (particle model)")
    p.add_argument("--seed", type=int, metavar="S", help="random seed (particle model)")
    p.add_argument("--json", action="store_true", help="print JSON instead of tables")
    p.add_argument("--plot", metavar="FILE", help="write a PNG of the responses")
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


def format_response(scenario, response, max_slots: int = 12) -> str:
    hits = np.asarray(response.hits)
    se = None if response.stderr is None else np.asarray(response.stderr)
    n_slots = hits.shape[-1]
    shown = min(n_slots, max_slots)
    ts_ms = float(response.slot_edges[1]) * 1e3
    lines = [f"{scenario.name}: {response.model} model, slot {ts_ms:g} ms, {n_slots} slots kept (lag 0..{n_slots-1})"]
    for i, e in enumerate(scenario.emitters):
        for j, r in enumerate(scenario.receivers):
            h = hits[i, j]
            lines.append(f"\n  {e.name} -> {r.name} ({r.kind})")
            lines.append("    slot   hit prob" + ("     std err" if se is not None else ""))
            for lag in range(shown):
                row = f"    {lag:4d}   {fmt(h[lag]):>9}"
                if se is not None:
                    row += f"   {fmt(se[i, j, lag]):>9}"
                lines.append(row)
            if shown < n_slots:
                lines.append(f"    ... {n_slots - shown} more slots (use --json for all)")
            lines.append(
                f"    total {fmt(h.sum())}, tail after slot {n_slots-1}: {fmt(float(response.tail[i, j]))}, "
                f"peak slot {int(np.argmax(h))}"
            )
    for note in response.notes:
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def run(args) -> int:
    from capacity.physics.response import channel_response

    scenario = load(args.scenario, strict=args.strict)
    response = channel_response(scenario, args.model, particles=args.particles, seed=args.seed,
                                progress=not args.json)
    if args.plot:
        from capacity.report.plots import plot_response

        plot_response(response, [e.name for e in scenario.emitters], [r.name for r in scenario.receivers],
                      args.plot)
    print(dump_json(response_record(scenario, response)) if args.json else format_response(scenario, response))
    return 0
