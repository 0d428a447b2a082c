"""``capacity compare SCENARIO``: signalling schemes side by side at equal molecule budget, and over budgets."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from capacity.cli._common import (
    SAFETY,
    add_effort_arguments,
    add_scenario_argument,
    apply_overrides,
    check_plot_path,
    dump_json,
    effort_of,
    fmt,
    load,
)
from capacity.compare import SCHEMES
from capacity.errors import InputError


def parse_budgets(text: str) -> np.ndarray:
    """``LO:HI:N`` -> N budgets spaced logarithmically from LO to HI (molecules per symbol)."""
    parts = text.split(":")
    try:
        lo, hi, n = float(parts[0]), float(parts[1]), int(parts[2])
    except (ValueError, IndexError):
        raise InputError("--budgets", text, "expected LO:HI:N", "write e.g. --budgets 5:200:8") from None
    if not (0 < lo < hi) or n < 2 or not np.isfinite(hi):
        raise InputError("--budgets", text, "need 0 < LO < HI and N >= 2", "write e.g. --budgets 5:200:8")
    return np.geomspace(lo, hi, n)

#: simulated symbols for each detector's error rate
DETECTOR_SYMBOLS = 10_000


def add_parser(sub) -> None:
    p = sub.add_parser(
        "compare",
        help="spatial vs amplitude (and mixed) signalling at equal budget; rate-versus-budget curves",
        description=(
            "Compare signalling schemes on one layout at the same mean molecule budget: single-slot capacity, "
            "i.i.d. information rate with ISI and its bounds, and each detector's symbol error rate and the rate "
            "its hard decisions support, per symbol, second and molecule. With --budgets, also rate-versus-budget "
            "curves (CSV and PNG) with the bounds as a shaded band."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--schemes", metavar="LIST",
                   help=f"comma-separated schemes (default: all the layout supports; from {', '.join(SCHEMES)})")
    p.add_argument("--budget", type=float, metavar="MOLECULES",
                   help="mean molecules per symbol for the side-by-side table (default: the scenario's)")
    p.add_argument("--budgets", metavar="LO:HI:N", help="budget range for rate-versus-budget curves (log spaced)")
    add_effort_arguments(p)
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.add_argument("--seed", type=int, metavar="S", help="random seed (default: the scenario's)")
    p.add_argument("--model", choices=("lone", "shadowed", "particles"), help="response model override")
    p.add_argument("--force", action="store_true",
                   help="with --model particles: run even when a timed pilot estimates more than an hour")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.add_argument("--plot", metavar="FILE", help="PNG of the rate-versus-budget curves (needs --budgets)")
    p.add_argument("--out", metavar="DIR", help="write compare.json, curves.csv and curves.png into DIR")
    p.set_defaults(func=run)


def format_table(scenario, records) -> str:
    ts = scenario.channel.symbol_interval
    lines = [f"{scenario.name}: schemes at a mean budget of {fmt(records[0]['budget'])} molecules/symbol, "
             f"slot {ts * 1e3:g} ms", ""]
    head = (f"  {'scheme':<11}{'1-slot cap.':>12}{'rate':>9}{'std err':>9}{'lower':>9}{'upper':>9}{'bits/s':>9}"
            f"{'bits/mol':>10}")
    lines.append(head + "   (bits/symbol unless stated)")
    for r in records:
        lines.append(f"  {r['scheme']:<11}{fmt(r['single_slot_capacity']):>12}{fmt(r['information_rate']):>9}"
                     f"{fmt(r['stderr'], 2):>9}{fmt(r['lower_bound']):>9}{fmt(r['upper_bound']):>9}"
                     f"{fmt(r['bits_per_second']):>9}{fmt(r['bits_per_molecule']):>10}")
    lines.append("  1-slot cap.: single-slot capacity (Blahut-Arimoto on the release slot, later arrivals ignored; "
                 "not a ceiling); rate: rate with ISI; lower/upper: its bracket")
    lines.append("")
    lines.append(f"  {'scheme':<11}{'detector':<19}{'SER':>9}{'95% interval':>22}{'hard rate':>11}")
    for r in records:
        for d in r["detectors"]:
            if "skipped" in d:
                lines.append(f"  {r['scheme']:<11}{d['name']:<19}  skipped: {d['skipped']}")
                continue
            lo, hi = d["ser_interval"]
            lines.append(f"  {r['scheme']:<11}{d['name']:<19}{fmt(d['symbol_error_rate']):>9}"
                         f"{'[' + fmt(lo) + ', ' + fmt(hi) + ']':>22}{fmt(d['rate']):>11}")
    return "\n".join(lines)


def run(args) -> int:
    from tqdm import tqdm

    from capacity.compare import applicable_schemes, budget_sweep, compare_schemes
    from capacity.physics.response import channel_response

    if args.plot:
        check_plot_path(args.plot)
    scenario = apply_overrides(load(args.scenario, strict=args.strict), args)
    schemes = [s.strip() for s in args.schemes.split(",")] if args.schemes else None
    budgets = parse_budgets(args.budgets) if args.budgets else None
    out = Path(args.out) if args.out else None
    response = channel_response(scenario, args.model, seed=args.seed, force=args.force)
    effort = effort_of(args)
    quiet = args.quiet or args.json or not sys.stderr.isatty()
    names = applicable_schemes(scenario, schemes)
    with tqdm(total=len(names), desc="schemes", unit="scheme", disable=quiet, file=sys.stderr, leave=False) as bar:
        records = compare_schemes(scenario, response, names, budget=args.budget, detector_symbols=DETECTOR_SYMBOLS,
                                  seed=args.seed, effort=effort, progress=bar.update)
    result = {"scenario": scenario.name, "model": response.model,
              "units": {"rates": "bits/symbol", "bits_per_second": "bits/s", "bits_per_molecule": "bits/molecule",
                        "symbol_interval": "s", "budget": "molecules per symbol"},
              "symbol_interval": scenario.channel.symbol_interval, "schemes": records, "caution": SAFETY}
    if budgets is not None:
        with tqdm(total=len(names) * len(budgets), desc="budget sweep", disable=quiet, file=sys.stderr) as bar:
            curves = budget_sweep(scenario, response, budgets, names, seed=args.seed, effort=effort,
                                  csv_path=(out / "curves.csv") if out else None, progress=bar.update)
        result["curves"] = curves
        from capacity.report.plots import plot_rate_curves

        plot_path = args.plot or (out / "curves.png" if out else None)
        if plot_path:
            plot_path = Path(plot_path)
            plot_rate_curves(curves, plot_path, title=scenario.name)
            plot_rate_curves(curves, plot_path.with_name(plot_path.stem + "_per_second" + plot_path.suffix),
                             per_second=True, title=scenario.name)
            print(f"plots written to {plot_path} and its _per_second twin", file=sys.stderr)
    if out:
        dump_json(result, out / "compare.json")
    print(dump_json(result) if args.json else format_table(scenario, records) + f"\n{SAFETY}")
    return 0
