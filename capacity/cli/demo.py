"""``capacity demo``: the main job on the built-in demo scenario, written into one folder."""

from __future__ import annotations

import time
from pathlib import Path

from capacity.cli._common import SAFETY, demo_path, dump_json, load


def add_parser(sub) -> None:
    p = sub.add_parser(
        "demo",
        help="run the whole job on the built-in demo scenario and write results into a folder",
        description=(
            "Run the main job on the built-in demo scenario (an invented two-sender, two-bead chamber): layout "
            "check, channel responses, rates with bounds, a comparison of signalling schemes with "
            "rate-versus-budget curves, and a symbol-interval optimisation. Writes JSON, CSV and PNG files."
        ),
    )
    p.add_argument("--out", default="results/demo", metavar="DIR", help="output folder (default results/demo)")
    p.add_argument("--quick", action="store_true",
                   help="a quick run: short simulations under a 1 %% standard-error target, 3 budgets, one start")
    p.add_argument("--json", action="store_true", help="print the run record as JSON at the end")
    p.set_defaults(func=run)


def _step(title: str) -> float:
    print(f"\n== {title}", flush=True)
    return time.perf_counter()


def run(args) -> int:
    import numpy as np

    from capacity.cli.compare import format_table
    from capacity.cli.rate import compute, format_rates, rate_record
    from capacity.cli.response import format_response, response_record
    from capacity.compare import applicable_schemes, budget_sweep, compare_schemes
    from capacity.effort import effort as make_effort
    from capacity.report.plots import plot_rate_curves, plot_response
    from capacity.scenario.summary import format_summary, summarise

    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    n_sym = 3_000 if args.quick else 10_000
    scenario = load("demo")
    (out / "scenario.toml").write_text(demo_path().read_text())
    record = {"scenario": scenario.name, "caution": SAFETY, "files": {}, "seconds": {}}

    t = _step("layout check")
    summary = summarise(scenario)
    print(format_summary(summary))
    dump_json(summary, out / "check.json")
    record["seconds"]["check"] = time.perf_counter() - t

    t = _step("channel response (shadowed model)")
    # the quick run: the quick setting at a 1 % relative standard error, fewer budgets, one optimiser start
    effort = make_effort("quick", precision=0.01) if args.quick else None
    if args.quick:
        response, _, rates = compute(scenario, effort=effort, progress=True)
    else:
        response, _, rates = compute(scenario, n_symbols=n_sym, n_runs=8, progress=True)
    print(format_response(scenario, response, max_slots=6))
    dump_json(response_record(scenario, response), out / "response.json")
    names = ([e.name for e in scenario.emitters], [r.name for r in scenario.receivers])
    plot_response(response, *names, out / "response.png", title=scenario.name)
    record["seconds"]["response_and_rate"] = time.perf_counter() - t

    _step("rates of the scenario's scheme")
    print(format_rates(scenario, response, rates))
    dump_json(rate_record(scenario, response, rates), out / "rate.json")

    t = _step("signalling schemes at equal budget")
    records = compare_schemes(scenario, response, n_symbols=n_sym // 2, n_runs=4, detector_symbols=n_sym // 2,
                              effort=effort)
    print(format_table(scenario, records))
    budgets = np.geomspace(4, 60, 3 if args.quick else 5)
    curves = budget_sweep(scenario, response, budgets, applicable_schemes(scenario), n_symbols=n_sym // 4,
                          n_runs=4, csv_path=out / "curves.csv", effort=effort)
    plot_rate_curves(curves, out / "curves.png", title=scenario.name)
    plot_rate_curves(curves, out / "curves_per_second.png", per_second=True, title=scenario.name)
    dump_json({"schemes": records, "curves": curves}, out / "compare.json")
    record["seconds"]["compare"] = time.perf_counter() - t

    try:
        from capacity.design.optimise import optimise_design
    except ModuleNotFoundError:
        optimise_design = None
    if optimise_design is not None:
        t = _step("best symbol interval (bits per second)")
        best = optimise_design(scenario, ("symbol_interval",), "bits-per-second", starts=1 if args.quick else 3,
                               steps=40 if args.quick else 150, progress=True,
                               polish_symbols=2_500 if args.quick else 20_000)
        print(f"best symbol interval {best.best['symbol_interval'] * 1e3:.1f} ms: objective ({best.rate} rate) "
              f"{best.value:.4g} bits/s; at that interval the reported rate (as `capacity rate`) is "
              f"{best.polished:.4g} +/- {best.polished_stderr:.2g} bits/s, bracket {best.lower_bound:.4g} .. "
              f"{best.upper_bound:.4g}")
        print(best.message)
        dump_json({"best": best.best, "objective": best.objective, "rate": best.rate, "value": best.value,
                   "polished": best.polished, "polished_stderr": best.polished_stderr,
                   "lower_bound": best.lower_bound, "upper_bound": best.upper_bound,
                   "evaluations": best.evaluations, "history": best.history, "notes": list(best.notes)},
                  out / "optimise.json")
        record["seconds"]["optimise"] = time.perf_counter() - t

    record["files"] = sorted(p.name for p in out.iterdir())
    dump_json(record, out / "run.json")
    print(f"\nwrote {len(record['files'])} files into {out}/\n{SAFETY}")
    if args.json:
        print(dump_json(record))
    return 0
