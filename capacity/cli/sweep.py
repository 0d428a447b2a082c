"""``capacity sweep SCENARIO --vary FIELD=... --out DIR``: a grid of designs, on this machine's cores or a Dask
cluster; finished points survive a kill and are skipped on the next run."""

from __future__ import annotations

import sys

from capacity.cli._common import add_scenario_argument, dump_json, fmt, load


def add_parser(sub) -> None:
    p = sub.add_parser(
        "sweep",
        help="rates (or scheme comparisons, or responses) over a grid of designs, locally or on a Dask cluster",
        description=(
            "Vary scenario fields over a grid and compute a measure at every point. FIELD is a dotted scenario "
            "path (channel.symbol_interval, signalling.budget, medium.diffusion, receiver[1].radius, "
            "receiver[*].radius for every receiver, emitter[0].position, receiver[0].centre[0] for one "
            "coordinate, medium.flow[0], receiver[0].reaction_rate, emitter[0].pulse, wall[1].point[2]); "
            "values as LO:HI:N (linear), LO:HI:N:log, or v1,v2,... with units as in scenario files "
            "(50ms:400ms:4:log). Each finished point is appended at once to DIR/points.csv; re-running skips "
            "finished points. At the end: DIR/sweep.nc (labelled dataset), DIR/sweep.json (record) and default "
            "plots. A [sweep] table in the scenario file can hold the same settings. Exit status 1 if any point "
            "failed (listed), 2 for bad input."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--vary", action="append", default=[], metavar="FIELD=VALUES",
                   help="a grid axis: FIELD=LO:HI:N[:log] or FIELD=v1,v2,... (repeat for more axes)")
    p.add_argument("--measure", choices=("rate", "compare", "response", "hits"), default=None,
                   help="what to compute at each point (default: the [sweep] table's, else rate)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder of the sweep's files (resumed if it exists)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="local worker processes (default: one per core; 0 = in this process, no cluster)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="use a running Dask scheduler (tcp://HOST:8786) instead of local workers")
    p.add_argument("--schemes", metavar="LIST", help="comma-separated schemes for --measure compare")
    p.add_argument("--model", choices=("lone", "shadowed", "particles"), help="response model override")
    p.add_argument("--symbols", type=int, metavar="N", help="symbols per forward-recursion run (rate: 20000, "
                   "compare: 10000)")
    p.add_argument("--runs", type=int, metavar="K", help="independent runs for standard errors (rate: 8, "
                   "compare: 4)")
    p.add_argument("--bound-samples", type=int, metavar="N", help="Monte Carlo samples of the bounds (rate)")
    p.add_argument("--window-samples", type=int, metavar="N", help="pasts of the windowed bound (rate)")
    p.add_argument("--no-law-search", action="store_true",
                   help="rate: keep the release-slot optimal input law (skip the search for a law tuned to ISI)")
    p.add_argument("--seed", type=int, metavar="S", help="base seed (default: the scenario's); each point's seed "
                   "derives from it and the point's id")
    p.add_argument("--compile-cache", metavar="DIR", default="default",
                   help="JAX compilation cache shared by the workers (default $CAPACITY_CACHE_DIR or "
                        "~/.cache/capacity/jax; 'off' for none)")
    p.add_argument("--force", action="store_true", help=f"allow a grid of more than {100_000} points")
    p.add_argument("--no-plots", action="store_true", help="do not draw the default plots")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.add_argument("--quiet", action="store_true", help="no progress bar or messages on stderr")
    p.set_defaults(func=run)


def run(args) -> int:
    import warnings

    from capacity.scenario.load import ScenarioKeyWarning
    from capacity.sweep.run import run_sweep
    from capacity.sweep.spec import make_spec

    if args.scheduler:  # an unreachable cluster is named at once, before the slower checks below
        from capacity.sweep.engine import open_cluster

        with open_cluster(scheduler=args.scheduler):
            pass
    quiet = args.quiet or args.json
    settings = {"symbols": args.symbols, "runs": args.runs, "bound_samples": args.bound_samples,
                "window_samples": args.window_samples, "model": args.model, "schemes": args.schemes,
                "law_search": False if args.no_law_search else None}
    with warnings.catch_warnings():  # notes about renamed keys: printed once, by load() below
        warnings.simplefilter("ignore", ScenarioKeyWarning)
        spec = make_spec(args.scenario, args.vary, measure=args.measure, settings=settings, seed=args.seed,
                         force=args.force)
    load(args.scenario, strict=getattr(args, "strict", False), announce=not quiet)  # the base scenario's warnings

    def log(text):
        if not quiet:
            print(text, file=sys.stderr)

    cache = None if args.compile_cache == "off" else args.compile_cache
    summary = run_sweep(spec, args.out, workers=args.workers, scheduler=args.scheduler, cache_dir=cache,
                        progress=not quiet, plots=not args.no_plots, log=log)
    if args.json:
        print(dump_json(summary))
    else:
        print(format_summary(summary))
    if summary["points_failed"]:
        print(f"capacity sweep: {summary['points_failed']} point(s) failed: "
              + "; ".join(f"{f['point_id']} ({', '.join(f'{k}={v}' for k, v in f['values'].items())}): "
                          f"{f['error'][:200]}" for f in summary["failed"]), file=sys.stderr)
        return 1
    return 0


def format_summary(s: dict) -> str:
    lines = [f"sweep: {s['points_total']} points: {s['points_computed']} computed, {s['points_skipped']} skipped "
             f"(already done), {s['points_failed']} failed; {s['seconds']:.1f} s; files in {s['out']}: "
             + ", ".join(s["files"])]
    for name, b in s["best"].items():
        where = ", ".join(f"{k}={fmt(v) if isinstance(v, float) else v}" for k, v in b.items()
                          if k not in ("value", "units", "point_id", "stderr"))
        lines.append(f"  best {name}: {fmt(b['value'])} {b['units']} at {where}")
    return "\n".join(lines)
