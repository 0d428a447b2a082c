"""How does the flow change the best symbol interval of the channel_flow demo?

For the built-in ``channel_flow`` scenario and a copy with the pump off (flow = 0; same channel, beads, emitters
and signalling), sweeps the symbol interval, computes the scenario's default response (lone flow / reactive forms
on the wall images, memory "auto") and the rate with ISI at the best i.i.d. law found (``link_rates``), and writes
``results/symbol_interval_flow/``: ``sweep.csv`` (one row per scenario and interval, rows written as they finish)
and ``record.json`` (settings, versions, best intervals, wall time).

    python studies/flow_symbol_interval.py [--quick]
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

import capacity  # noqa: E402
from capacity.physics.response import channel_response  # noqa: E402
from capacity.rates import link_rates  # noqa: E402
from capacity.schemes.builders import build_alphabet  # noqa: E402

FIELDS = ("scenario", "symbol_interval", "memory", "information_rate", "stderr", "lower_bound", "upper_bound",
          "bits_per_second", "stderr_bits_per_second", "mean_molecules", "bits_per_molecule", "seconds")


def _finished(path: Path) -> list[dict]:
    if not path.exists():
        return []
    with open(path) as fh:
        return [{k: (v if k == "scenario" else (int(v) if k == "memory" else float(v))) for k, v in row.items()}
                for row in csv.DictReader(fh)]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--out", default="results/symbol_interval_flow")
    args = ap.parse_args(argv)
    started = time.time()
    flow = capacity.load_scenario("channel_flow")
    still = flow.replace(medium=flow.medium.__class__(diffusion=flow.medium.diffusion,
                                                      degradation=flow.medium.degradation, flow=(0.0, 0.0, 0.0)),
                         name=flow.name + ", pump off")
    grid = [0.05, 0.1, 0.2, 0.4] if args.quick else [0.05, 0.1, 0.15, 0.2, 0.3, 0.4, 0.6]
    n_symbols, n_runs = (1000, 2) if args.quick else (3000, 4)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    rows = _finished(out / "sweep.csv")  # a re-run keeps the finished points
    done = {(r["scenario"], r["symbol_interval"]) for r in rows}
    with open(out / "sweep.csv", "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=FIELDS)
        writer.writeheader()
        for row in rows:
            writer.writerow(row)
        for label, base in (("flow", flow), ("still", still)):
            for ts in grid:
                if (label, ts) in done:
                    continue
                t0 = time.time()
                sc = base.with_channel(symbol_interval=float(ts))
                response = channel_response(sc)
                alphabet = build_alphabet(sc.signalling, len(sc.emitters))
                d = link_rates(sc, response, alphabet, n_symbols=n_symbols, n_runs=n_runs, seed=11).to_dict()
                row = {"scenario": label, "symbol_interval": ts, "memory": response.memory,
                       "information_rate": d["information_rate"], "stderr": d["stderr"],
                       "lower_bound": d["lower_bound"], "upper_bound": d["upper_bound"],
                       "bits_per_second": d["bits_per_second"]["information_rate"],
                       "stderr_bits_per_second": d["stderr"] / ts, "mean_molecules": d["mean_molecules"],
                       "bits_per_molecule": d["bits_per_molecule"]["information_rate"],
                       "seconds": round(time.time() - t0, 1)}
                writer.writerow(row)
                fh.flush()
                rows.append(row)
                print(f"{label:5s} Ts = {ts * 1e3:4.0f} ms: {row['bits_per_second']:.3g} bits/s "
                      f"(+/- {row['stderr_bits_per_second']:.2g}), memory {response.memory}", flush=True)
    best = {}
    for label in ("flow", "still"):
        mine = [r for r in rows if r["scenario"] == label]
        top = max(mine, key=lambda r: r["bits_per_second"])
        best[label] = {"symbol_interval_s": top["symbol_interval"], "bits_per_second": top["bits_per_second"],
                       "stderr_bits_per_second": top["stderr_bits_per_second"],
                       "memory": top["memory"]}
    write_record(out, "record", {"scenarios": ["channel_flow (built-in)", "channel_flow with flow = 0"],
                                 "grid_s": grid, "n_symbols": n_symbols, "runs": n_runs, "seed": 11,
                                 "response_model": "scenario default (lone flow / reactive forms on wall images)",
                                 "command": "python studies/flow_symbol_interval.py"
                                 + (" --quick" if args.quick else "")},
                 {"best": best, "rows": rows}, started, time.time())
    for label, b in best.items():
        print(f"{label}: best Ts = {b['symbol_interval_s'] * 1e3:.0f} ms, {b['bits_per_second']:.3g} bits/s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
