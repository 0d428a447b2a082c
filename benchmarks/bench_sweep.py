"""How much faster is a sweep on 2 local workers than on 1, and what does the machinery cost per point?

A 16-point sweep of the molecule budget (rate measure) on the single-bead test layout, run on a LocalCluster of
1 worker and then of 2 workers (one thread each), after a 2-point warm-up that fills the compilation cache so both
timed runs start alike. Baseline: the 1-worker run in the same process. Reported: wall times, speed-up (target
>= 1.7 on 2 cores), the points' own compute seconds, the overhead per point ((wall x workers - compute) / points:
cluster start, scheduling, storing), and the load average of the machine before and after (other work on the
same cores lowers the speed-up; ``cpu_share`` = the points' CPU seconds / their wall seconds shows how much of
a core each worker really had). The 1- and 2-worker runs must give identical numbers (same ids, same seeds).

Local workers are bound to one core each (``capacity.sweep.cores``), so "1 worker" means one core. For context
the same points are also run in this process (``workers=0``, no cluster, JAX free to use both cores as it
likes): ``speedup_vs_in_process`` is what a user gains over running the points one after another without Dask.

    python benchmarks/bench_sweep.py          (writes results/sweep_bench.json)
"""

from __future__ import annotations

import csv
import json
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SCENARIO = HERE.parent / "tests" / "data" / "scenarios" / "single_bead_ook.toml"
VARY = "signalling.budget=5:80:16:log"
SETTINGS = {"symbols": 10_000, "runs": 4}


def _timed(spec, out, workers, cache) -> dict:
    from capacity.sweep import run_sweep

    t = time.perf_counter()
    summary = run_sweep(spec, out, workers=workers, cache_dir=cache, progress=False, plots=False, log=lambda s: None)
    wall = time.perf_counter() - t
    with open(Path(out) / "points.csv", newline="") as fh:
        rows = {r["point_id"]: r for r in csv.DictReader(fh)}
    compute = sum(float(r["seconds"]) for r in rows.values())
    cpu = sum(float(r["cpu_seconds"]) for r in rows.values())
    return {"workers": workers, "wall_seconds": round(wall, 2), "point_seconds_total": round(compute, 2),
            "overhead_per_point_seconds": round((wall * max(workers, 1) - compute) / len(rows), 3),
            "point_cpu_seconds_total": round(cpu, 2), "cpu_share": round(cpu / compute, 3),
            "points": summary["points_computed"], "failed": summary["points_failed"], "rows": rows}


def run() -> dict:
    from capacity.sweep import make_spec

    load_before = os.getloadavg()
    with tempfile.TemporaryDirectory() as tmp:
        cache = str(Path(tmp) / "cache")
        warm = make_spec(str(SCENARIO), ["signalling.budget=5,80"], settings=SETTINGS)
        _timed(warm, Path(tmp) / "warm", 1, cache)
        spec = make_spec(str(SCENARIO), [VARY], settings=SETTINGS)
        one = _timed(spec, Path(tmp) / "one", 1, cache)
        two = _timed(spec, Path(tmp) / "two", 2, cache)
        here = _timed(spec, Path(tmp) / "here", 0, cache)
    same = all(one["rows"][k]["information_rate"] == two["rows"][k]["information_rate"] for k in one["rows"])
    # in this process XLA splits reductions over both cores, the workers over one: equal up to round-off only
    drift = max(abs(float(here["rows"][k]["information_rate"]) / float(one["rows"][k]["information_rate"]) - 1.0)
                for k in one["rows"])
    for r in (one, two, here):
        r.pop("rows")
    return {"scenario": SCENARIO.name, "vary": VARY, "settings": SETTINGS, "one_worker": one, "two_workers": two,
            "in_process": here, "speedup": round(one["wall_seconds"] / two["wall_seconds"], 3),
            "target_speedup": 1.7, "speedup_vs_in_process": round(here["wall_seconds"] / two["wall_seconds"], 3),
            "identical_numbers": same, "in_process_max_relative_difference": drift, "cores": os.cpu_count(),
            "load_average_before": [round(x, 2) for x in load_before],
            "load_average_after": [round(x, 2) for x in os.getloadavg()]}


def main() -> int:
    result = run()
    out = HERE.parent / "results" / "sweep_bench.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
