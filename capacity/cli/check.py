"""``capacity check SCENARIO``: validate a scenario file and summarise its layout."""

from __future__ import annotations

from capacity.cli._common import add_scenario_argument, dump_json, load_noted


def add_parser(sub) -> None:
    p = sub.add_parser(
        "check",
        help="validate a scenario file and summarise distances, gaps, peak times and warnings",
        description=(
            "Validate a scenario file and summarise its layout: emitter-receiver distances and gaps, the lone "
            "eventual capture and peak arrival time d^2/(6D) of each pair, gaps between receivers, and warnings "
            "for legal but suspicious layouts. Exit status 2 on invalid input."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--json", action="store_true", help="print the summary as JSON (SI units)")
    p.set_defaults(func=run)


def run(args) -> int:
    """The warnings are part of the summary (stdout); deprecation notes (old key names) go on stderr as with every
    command, and into the JSON as ``deprecations``."""
    import sys

    from capacity.scenario.summary import format_summary, summarise

    scenario, notes, _ = load_noted(args.scenario, strict=args.strict)
    for note in notes:
        print(f"note: {note}", file=sys.stderr)
    from capacity.scenario.echo import LEGEND, format_parameters, parameters

    summary = summarise(scenario)
    summary["deprecations"] = notes
    summary["response_model_notes"] = model_notes(scenario)
    summary["parameters"] = parameters(scenario)
    if args.json:
        print(dump_json(summary))
    else:
        print(format_summary(summary))
        print(f"\n{LEGEND}\n\nparameters as read:")
        print("\n".join(format_parameters(scenario)))
        for note in summary["response_model_notes"]:
            print(f"model note: {note}")
    return 0


def model_notes(scenario) -> list[str]:
    """Where the layout lies outside the range in which the shadowed model's accuracy was measured."""
    from capacity.physics.shadowed import validity_notes

    absorbing = [r for r in scenario.receivers if r.kind == "absorbing"]
    if len(absorbing) < 2 or scenario.channel.response != "shadowed":
        return []
    return list(validity_notes(scenario.emitter_positions, [r.centre for r in absorbing],
                               [r.radius for r in absorbing], scenario.medium.diffusion,
                               scenario.medium.degradation))
