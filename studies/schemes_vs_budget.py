"""Spatial, amplitude or both? And how does the rate grow with the molecule budget?

For the demo layout (or a given scenario): every signalling scheme at the scenario's budget (rates, bounds,
detector error rates), then rate-versus-budget curves with bounds. Writes ``results/schemes/``: table.csv,
table.md, curves.csv, curves.png, curves_per_second.png and a JSON record. Finished points are written at once.

    python studies/schemes_vs_budget.py [--quick] [--scenario FILE]
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

import numpy as np
from tqdm import tqdm

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

import capacity  # noqa: E402,F401
from capacity.cli._common import load  # noqa: E402
from capacity.compare import CSV_FIELDS, applicable_schemes, budget_sweep, compare_schemes  # noqa: E402
from capacity.physics.response import channel_response  # noqa: E402
from capacity.report.plots import plot_rate_curves  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", default="demo", help="scenario file (default: the built-in demo)")
    ap.add_argument("--quick", action="store_true", help="few budgets, short simulations")
    ap.add_argument("--out", default="results/schemes")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    scenario = load(args.scenario)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    n_symbols = 2_000 if args.quick else 10_000
    response = channel_response(scenario)
    schemes = applicable_schemes(scenario)

    records = compare_schemes(scenario, response, schemes, n_symbols=n_symbols, n_runs=4,
                              detector_symbols=n_symbols)
    with open(out / "table.csv", "w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=CSV_FIELDS + ("best_detector", "detector_ser", "detector_rate"))
        writer.writeheader()
        for r in records:
            dets = [d for d in r["detectors"] if d.get("rate") is not None]
            best = max(dets, key=lambda d: d["rate"]) if dets else {}
            writer.writerow({**{k: r[k] for k in CSV_FIELDS}, "best_detector": best.get("name"),
                             "detector_ser": best.get("symbol_error_rate"), "detector_rate": best.get("rate")})
    lines = ["| scheme | ISI-free capacity | i.i.d. rate with ISI | bounds | bits/s | bits/molecule | "
             "best detector (SER, hard rate) |", "|---|---|---|---|---|---|---|"]
    for r in records:
        dets = [d for d in r["detectors"] if d.get("rate") is not None]
        best = max(dets, key=lambda d: d["rate"]) if dets else None
        det = f"{best['name']} ({best['symbol_error_rate']:.3g}, {best['rate']:.3f})" if best else "-"
        lines.append(f"| {r['scheme']} | {r['single_slot_capacity']:.3f} | {r['information_rate']:.3f} ± "
                     f"{r['stderr']:.3f} | {r['lower_bound']:.3f} .. {r['upper_bound']:.3f} | "
                     f"{r['bits_per_second']:.3g} | {r['bits_per_molecule']:.3g} | {det} |")
    (out / "table.md").write_text(
        f"Schemes at a mean budget of {scenario.signalling.budget} molecules/symbol, {scenario.name}, "
        f"slot {scenario.channel.symbol_interval * 1e3:g} ms (bits per symbol unless stated).\n\n"
        + "\n".join(lines) + "\n")
    print("\n".join(lines))

    budgets = np.geomspace(3, 120, 4 if args.quick else 9)
    with tqdm(total=len(schemes) * len(budgets), desc="budget sweep") as bar:
        curves = budget_sweep(scenario, response, budgets, schemes, n_symbols=n_symbols // 2, n_runs=4,
                              csv_path=out / "curves.csv", progress=bar.update)
    plot_rate_curves(curves, out / "curves.png")
    plot_rate_curves(curves, out / "curves_per_second.png", per_second=True)
    write_record(out, "schemes", {"scenario": scenario.name, "budgets": budgets, "n_symbols": n_symbols,
                                  "runs": 4, "seed": scenario.channel.seed, "model": response.model,
                                  "memory": response.memory},
                 {"at_budget": records, "curves": curves}, started, time.perf_counter())
    return 0


if __name__ == "__main__":
    sys.exit(main())
