"""How long ``capacity demo`` takes as a new user sees it: ``--quick`` on an empty compilation cache, then the full
run (cache filled by the quick one), each in a fresh interpreter writing into a temporary folder.

Targets (absolute, 2 cores): ``capacity demo --quick`` <= 2 minutes, ``capacity demo`` <= 8 minutes. Baseline in
the same process: the per-step seconds each run records in its ``run.json`` (so a slow step is visible) and the
CPU seconds of the child process (``resource.getrusage``): other work on the machine shows as CPU share < 1 per
busy core. The load average at the start is recorded.

    python benchmarks/bench_demo_command.py          (or: python benchmarks/run_all.py bench_demo_command)
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _timed(args, env, out) -> dict:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-m", "capacity.cli", "demo", *args, "--out", str(out)], env=env, check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    steps = json.loads((Path(out) / "run.json").read_text())["seconds"]
    return {"wall_seconds": round(wall, 1), "cpu_seconds": round(cpu, 1),
            "steps_seconds": {k: round(v, 1) for k, v in steps.items()}}


def run() -> dict:
    out = {"load_average_at_start": [round(x, 2) for x in os.getloadavg()], "targets_seconds": {"quick": 120,
                                                                                                "full": 480}}
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, CAPACITY_CACHE_DIR=str(Path(tmp) / "cache"))
        out["quick_empty_cache"] = _timed(["--quick"], env, Path(tmp) / "quick")
        print(f"capacity demo --quick (empty cache): {out['quick_empty_cache']['wall_seconds']} s", flush=True)
        out["full"] = _timed([], env, Path(tmp) / "full")
        print(f"capacity demo: {out['full']['wall_seconds']} s", flush=True)
    out["load_average_at_end"] = [round(x, 2) for x in os.getloadavg()]
    return out


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
