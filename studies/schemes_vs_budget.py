"""Spatial, amplitude or both? And how does the rate grow with the molecule budget?

For the demo layout (or a given scenario), on the sweep engine (``capacity.sweep``: local Dask workers, each
finished point stored at once, finished points skipped when the study is re-run):

* every signalling scheme at the scenario's budget (measure ``compare``: rates, bracket, the single-slot capacity,
  each scheme's best detector) -> ``table.csv``, ``table.md``;
* rate-versus-budget curves with their bracket (measure ``rate`` over ``signalling.scheme`` x
  ``signalling.budget``, a log grid from 3 to 120 molecules/symbol; every point computed on its own, with its own
  seed), then a second pass that carries each scheme's laws to the larger budgets (``capacity.sweep.carry``: a
  point below the best estimate at a smaller budget is evaluated again, with its own id and seed, with that
  budget's input law among its candidates; a law that meets a budget meets every larger one, so the best rate
  cannot fall with the budget) -> ``curves.csv``, ``curves.png``, ``curves_per_second.png``. Each point reports
  the larger of its estimates (first and carried): biased upward by at most about one standard error;
  ``first_rate`` keeps the first estimate, ``carried_from`` the budget of the law a carried row was given;
* ``schemes.json``: versions, settings, seeds, wall time, the findings, and each curve's largest remaining fall
  below a smaller budget's value in combined standard errors (before and after carrying).

The sweeps' own files stay beside them (``at_budget/`` and ``budget_sweep/``: points.csv, sweep.nc,
sweep.json; ``budget_sweep_carried/points.csv``: the second pass's evaluations).

    python studies/schemes_vs_budget.py [--quick] [--workers N] [--scenario FILE] [--out DIR]
"""

from __future__ import annotations

import argparse
import csv
import math
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

#: the budget grid (molecules per symbol, log spacing) and the simulation lengths of the full and quick runs
FULL = {"budgets": (3.0, 120.0, 11), "table_symbols": 10_000, "curve_symbols": 5_000, "runs": 4}
QUICK = {"budgets": (3.0, 120.0, 3), "table_symbols": 1_000, "curve_symbols": 1_000, "runs": 2}
#: columns of table.csv: ``capacity compare``'s CSV names, then the best detector
TABLE_FIELDS = ("scheme", "budget", "mean_molecules", "single_slot_capacity", "certified_gap", "information_rate",
                "stderr", "lower_bound", "upper_bound", "bits_per_second", "bits_per_molecule", "rate_method",
                "input_law", "lower_bound_method", "upper_bound_method", "bracket_relative", "flag",
                "best_detector", "best_detector_ser", "best_detector_rate")
#: columns of curves.csv: one row per (scheme, budget) point of the rate sweep
CURVE_FIELDS = ("scheme", "budget", "mean_molecules", "single_slot_capacity", "information_rate", "stderr",
                "lower_bound", "upper_bound", "bits_per_second", "lower_bits_per_second", "upper_bits_per_second",
                "bits_per_molecule", "rate_method", "input_law", "lower_bound_method", "upper_bound_method",
                "bracket_relative", "flag", "memory", "model", "seed", "point_id", "first_point", "first_rate",
                "first_stderr", "evaluations", "carried_from", "input_law_probabilities")

#: how the curves' second pass works and what its statistics mean (schemes.json)
CARRY_NOTE = ("after the rate sweep (every budget on its own), each scheme's budgets are walked upward; a point "
              "whose estimate is below the best estimate at a smaller budget is evaluated again with that point's "
              "input law among its candidates (a law that meets a budget meets every larger one: the capacity-cost "
              "function is non-decreasing), as a point of its own (id from the scenario, settings and carried law; "
              "seed from the id; stored in budget_sweep_carried/points.csv); rounds repeat until no point is below "
              "the best below it without having been given that law. Each point reports the larger of its "
              "estimates: the pick favours the luckier estimate, an upward bias of at most about one standard "
              "error; first_rate/first_stderr keep the first estimate. Nothing is copied forward: remaining falls "
              "are reported in findings.falls")


def main(argv=None) -> int:
    from capacity.compare import applicable_schemes
    from capacity.scenario.load import scenario_from_dict
    from capacity.sweep import make_spec, run_sweep
    from capacity.sweep.carry import carry_laws
    from capacity.sweep.spec import read_table

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", default="demo", help="scenario file (default: the built-in demo)")
    ap.add_argument("--quick", action="store_true", help="3 budgets, short simulations (a smoke test)")
    ap.add_argument("--workers", type=int, default=None, help="local worker processes (default: one per core)")
    ap.add_argument("--out", default="results/schemes")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    cfg = QUICK if args.quick else FULL
    out = Path(args.out)
    data, source = read_table(args.scenario)
    data.pop("sweep", None)  # this study's grid only
    scenario = scenario_from_dict(data, source=source)
    schemes = applicable_schemes(scenario)
    budget = scenario.signalling.budget
    if budget is None:
        budget = 25.0
        print("the scenario gives no budget: the table is at 25 molecules/symbol")

    table_spec = make_spec(data, [f"signalling.budget={budget!r}"], measure="compare", source=source,
                           settings={"symbols": cfg["table_symbols"], "runs": cfg["runs"],
                                     "schemes": ",".join(schemes)})
    table_summary = run_sweep(table_spec, out / "at_budget", workers=args.workers, plots=False)
    lo, hi, n = cfg["budgets"]
    curve_spec = make_spec(data, [f"signalling.scheme={','.join(schemes)}", f"signalling.budget={lo}:{hi}:{n}:log"],
                           measure="rate", source=source,
                           settings={"symbols": cfg["curve_symbols"], "runs": cfg["runs"]})
    curve_summary = run_sweep(curve_spec, out / "budget_sweep", workers=args.workers, plots=False)
    carry_summary = carry_laws(curve_spec, out / "budget_sweep", out / "budget_sweep_carried",
                               along="signalling.budget", workers=args.workers)

    table = _table_rows(out / "at_budget" / "points.csv", _ids(table_spec), schemes)
    _write_csv(out / "table.csv", TABLE_FIELDS, table)
    lines = _table_md(table)
    (out / "table.md").write_text(
        f"Schemes at a mean budget of {budget:g} molecules/symbol, {scenario.name}, slot "
        f"{scenario.channel.symbol_interval * 1e3:g} ms (bits per symbol unless stated). The rate with ISI is "
        "the estimate of the method named beside it, ± one standard error; the bracket is the tightest lower and "
        "upper bound found (each named in table.csv). The single-slot capacity counts only the molecules that "
        "arrive in their own slot and ignores later arrivals: it is not a bound on the rate with ISI.\n\n"
        + "\n".join(lines) + "\n")
    print("\n".join(lines))

    curve_rows = _curve_rows(carry_summary["rows"], schemes)
    _write_csv(out / "curves.csv", CURVE_FIELDS, curve_rows)
    curves = _curves(curve_rows, schemes, scenario.channel.symbol_interval)
    from capacity.report.plots import plot_rate_curves

    plot_rate_curves(curves, out / "curves.png", title=scenario.name)
    plot_rate_curves(curves, out / "curves_per_second.png", per_second=True, title=scenario.name)
    findings = _findings(table, curves)
    findings["falls"] = _falls(curve_rows, schemes)
    write_record(out, "schemes", {"scenario": source, "engine": "capacity.sweep", "schemes": schemes,
                                  "table": {"measure": "compare", "budget": budget, "settings": table_spec.settings,
                                            "base_seed": table_spec.base_seed},
                                  "curves": {"measure": "rate", "vary": [ax.field.path for ax in curve_spec.axes],
                                             "budgets": list(curve_spec.axes[1].values),
                                             "settings": curve_spec.settings, "base_seed": curve_spec.base_seed,
                                             "carry": CARRY_NOTE},
                                  "seeds": "per point, from the base seed and the point id (points.csv, "
                                           "sweep.json)", "quick": args.quick},
                 {"at_budget": table, "curves": curves, "findings": findings,
                  "sweeps": {"at_budget": _counts(table_summary), "budget_sweep": _counts(curve_summary),
                             "budget_sweep_carried": {k: carry_summary[k] for k in
                                                      ("points_computed", "points_skipped", "points_failed",
                                                       "rounds")}}},
                 started, time.perf_counter())
    for scheme, f in findings["plateau"].items():
        print(f"{scheme}: highest rate {f['rate']:.3f} ± {f['stderr']:.3f} bits/symbol at {f['budget']:.3g} "
              f"molecules/symbol (using {f['mean_molecules']:.3g})")
    for scheme, f in findings["falls"].items():
        print(f"{scheme}: largest fall below a smaller budget's value {f['after']['sigmas']:.2f} combined SE "
              f"(first pass alone: {f['before']['sigmas']:.2f})")
    failed = table_summary["points_failed"] or curve_summary["points_failed"] or carry_summary["points_failed"]
    return 1 if failed else 0


def _ids(spec) -> set[str]:
    """Point ids of this run's grid (a folder may also hold points of an earlier grid or version)."""
    from capacity.sweep.run import plan

    return {p.point_id for p in plan(spec)[0]}


def _read(path: Path, ids: set[str]) -> list[dict]:
    """The rows of ``points.csv`` whose point is in ``ids``, numbers parsed back (exactly: written with repr)."""
    from capacity.sweep.store import parse_cell

    with open(path, newline="") as fh:
        return [{k: (v if k == "point_id" else parse_cell(v)) for k, v in row.items()} for row in csv.DictReader(fh)
                if row["point_id"] in ids]


def _text(value) -> str:
    """A text cell of points.csv back to text ("" for an empty cell, read as NaN)."""
    return value if isinstance(value, str) else ""


def _table_rows(path: Path, ids, schemes) -> list[dict]:
    """One row per scheme from the compare point (a single point: the scenario's budget)."""
    (point,) = _read(path, ids)
    rows = []
    for s in schemes:
        row = {"scheme": s, "budget": point["budget"]}
        for key in TABLE_FIELDS[2:]:
            row[key] = point[f"{s}_{key}"]
        for key in ("rate_method", "input_law", "lower_bound_method", "upper_bound_method", "flag",
                    "best_detector"):
            row[key] = _text(row[key])
        rows.append(row)
    return rows


def _table_md(rows) -> list[str]:
    lines = ["| scheme | single-slot capacity (later arrivals ignored) | rate with ISI | method of the rate | "
             "bracket | bits/s | bits/molecule | best detector (symbol error rate, hard-decision rate) |",
             "|---|---|---|---|---|---|---|---|"]
    for r in rows:
        det = (f"{r['best_detector']} ({r['best_detector_ser']:.3g}, {r['best_detector_rate']:.3f})"
               if r["best_detector"] else "-")
        lines.append(f"| {r['scheme']} | {r['single_slot_capacity']:.3f} | {r['information_rate']:.3f} ± "
                     f"{r['stderr']:.3f} | {r['rate_method']} | {r['lower_bound']:.3f} .. {r['upper_bound']:.3f} | "
                     f"{r['bits_per_second']:.3g} | {r['bits_per_molecule']:.3g} | {det} |")
    return lines


def _curve_rows(reported: dict, schemes) -> list[dict]:
    """The reported row of every budget point (``capacity.sweep.carry.carry_laws``), by scheme (in the order of
    ``schemes``) and budget; ``carried_from`` empty where the first evaluation is reported."""
    rows = []
    for p in reported.values():
        row = {k: p[k] for k in CURVE_FIELDS}
        for key in ("rate_method", "input_law", "lower_bound_method", "upper_bound_method", "flag", "model"):
            row[key] = _text(row[key])
        row["memory"], row["seed"] = int(row["memory"]), int(row["seed"])
        if not math.isfinite(row["carried_from"]):
            row["carried_from"] = ""
        rows.append(row)
    return sorted(rows, key=lambda r: (schemes.index(r["scheme"]), r["budget"]))


def _falls(rows, schemes) -> dict:
    """Per scheme, the largest fall of the curve below its value at a smaller budget (bits, combined standard
    errors, the two budgets), with the first estimates alone (``before``) and as reported (``after``)."""
    from capacity.sweep.carry import drops

    out = {}
    for s in schemes:
        mine = [r for r in rows if r["scheme"] == s]
        if not mine:
            continue
        out[s] = {}
        for when, rate, se in (("before", "first_rate", "first_stderr"), ("after", "information_rate", "stderr")):
            d = drops([r[rate] for r in mine], [r[se] for r in mine])
            out[s][when] = {"drop": d["drop"], "sigmas": d["sigmas"],
                            "budget": None if d["at"] is None else mine[d["at"]]["budget"],
                            "below_budget": None if d["below"] is None else mine[d["below"]]["budget"]}
    return out


def _curves(rows, schemes, symbol_interval) -> dict:
    """{scheme: {"budget", "rate", "stderr", "lower", "upper", "single_slot", "mean_molecules",
    "symbol_interval"}}, as :func:`capacity.report.plots.plot_rate_curves` takes them."""
    keys = {"budget": "budget", "rate": "information_rate", "stderr": "stderr", "lower": "lower_bound",
            "upper": "upper_bound", "single_slot": "single_slot_capacity", "mean_molecules": "mean_molecules"}
    curves = {}
    for s in schemes:
        mine = [r for r in rows if r["scheme"] == s]
        if mine:
            curves[s] = {k: [float(r[c]) for r in mine] for k, c in keys.items()}
            curves[s]["symbol_interval"] = symbol_interval
    return curves


def _findings(table, curves) -> dict:
    """The best scheme at the budget (by bits per second) and, per scheme, the highest rate on its curve."""
    best = max(table, key=lambda r: r["bits_per_second"])
    plateau = {}
    for s, c in curves.items():
        k = max(range(len(c["rate"])), key=lambda i: c["rate"][i])
        plateau[s] = {"budget": c["budget"][k], "rate": c["rate"][k], "stderr": c["stderr"][k],
                      "lower": c["lower"][k], "upper": c["upper"][k], "mean_molecules": c["mean_molecules"][k],
                      "bits_per_second": c["rate"][k] / c["symbol_interval"]}
    return {"best_at_budget": {"scheme": best["scheme"], "information_rate": best["information_rate"],
                               "stderr": best["stderr"], "bits_per_second": best["bits_per_second"]},
            "plateau": plateau}


def _counts(summary) -> dict:
    return {k: summary[k] for k in ("points_total", "points_computed", "points_skipped", "points_failed",
                                    "seconds")}


def _write_csv(path: Path, fields, rows) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(fields))
        writer.writeheader()
        writer.writerows(rows)


if __name__ == "__main__":
    sys.exit(main())
