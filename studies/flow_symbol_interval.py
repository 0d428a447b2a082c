"""How does the flow change the best symbol interval of the channel_flow demo?

Runs ``studies/best_symbol_interval.py`` on the built-in ``channel_flow`` scenario and on a copy of it with the
flow switched off (same channel, beads, emitters and signalling), and writes both sweeps plus a comparison
record into ``results/symbol_interval_flow/`` (``flow/``, ``still/``, ``comparison.json``).

    python studies/flow_symbol_interval.py [--quick]
"""

from __future__ import annotations

import argparse
import csv
import re
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import best_symbol_interval  # noqa: E402
from _record import write_record  # noqa: E402

from capacity.scenario.load import builtin_path  # noqa: E402


def _best(folder: Path) -> dict:
    with open(folder / "symbol_interval.csv") as fh:
        rows = [{k: float(v) if k in ("symbol_interval", "bits_per_second", "bits_per_molecule", "stderr",
                                      "information_rate") else v for k, v in row.items()} for row in csv.DictReader(fh)]
    best = max(rows, key=lambda r: r["bits_per_second"])
    return {"symbol_interval_s": best["symbol_interval"], "bits_per_second": best["bits_per_second"],
            "stderr_bits_per_second": best["stderr"] / best["symbol_interval"],
            "grid": [(r["symbol_interval"], r["bits_per_second"]) for r in rows]}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--out", default="results/symbol_interval_flow")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    out = Path(args.out)
    (out / "still").mkdir(parents=True, exist_ok=True)
    text = builtin_path("channel_flow").read_text()
    still_text, n = re.subn(r'^flow = \[.*?\]', 'flow = ["0 um/s", "0 um/s", "0 um/s"]', text, flags=re.M)
    assert n == 1
    still = out / "still" / "channel_still.toml"
    still.write_text(still_text.replace('name = "flow-cell twin beads (channel_flow demo)"',
                                        'name = "flow-cell twin beads, pump off"'))
    quick = ["--quick"] if args.quick else []
    best_symbol_interval.main(["--scenario", "channel_flow", "--out", str(out / "flow")] + quick)
    best_symbol_interval.main(["--scenario", str(still), "--out", str(out / "still")] + quick)
    results = {"flow": _best(out / "flow"), "still": _best(out / "still")}
    write_record(out, "comparison", {"scenario": "channel_flow (built-in) and the same with flow = 0",
                                     "response_model": "the scenario's default (lone flow / reactive forms)",
                                     "quick": args.quick}, results, started, time.perf_counter())
    for key, r in results.items():
        print(f"{key}: best Ts = {r['symbol_interval_s'] * 1e3:.0f} ms, {r['bits_per_second']:.3g} bits/s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
