"""How long ``capacity rate`` takes as a user sees it: a first run (empty compilation cache) and a second run.

Targets (absolute, 2 cores): ``capacity rate demo`` <= 20 s on the first run and <= 10 s on the second, at the
default precision (relative standard error 0.5 %). Baseline in the same process: the same command with ``--full``
(the long settings used for committed results), second run. Each run starts a fresh interpreter, as a user does;
the compilation cache lives in a temporary folder so "first" really is first. The load average at the start is
recorded: other work on the machine slows every figure.

    python benchmarks/bench_rate_command.py
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time

SCENARIOS = ("demo", "tests/data/scenarios/single_bead_ook.toml")


def _timed(args, env) -> tuple[float, dict]:
    t = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "capacity.cli", *args, "--json"], capture_output=True, text=True,
                         env=env, check=True)
    seconds = time.perf_counter() - t
    data = json.loads(out.stdout)
    return seconds, {"rate": data["information_rate"], "stderr": data["stderr"],
                     "lower_bound": data["lower_bound"], "upper_bound": data["upper_bound"],
                     "method": data["rate_method"]}


def run() -> dict:
    out = {"load_average_at_start": os.getloadavg()[0]}
    for scenario in SCENARIOS:
        with tempfile.TemporaryDirectory() as cache:
            env = dict(os.environ, CAPACITY_CACHE_DIR=cache)
            first, figures = _timed(["rate", scenario], env)
            second, again = _timed(["rate", scenario], env)
            full, full_figures = _timed(["rate", scenario, "--full"], env)
            full_warm, _ = _timed(["rate", scenario, "--full"], env)
        out[scenario] = {"first_run_s": first, "second_run_s": second, "full_second_run_s": full_warm,
                         "full_first_run_s": full, "speed_up_vs_full": full_warm / second,
                         "quick": figures, "quick_again": again, "full": full_figures}
        print(f"capacity rate {scenario}: first {first:.1f} s, second {second:.1f} s; --full second "
              f"{full_warm:.1f} s ({full_warm / second:.1f}x); rate {figures['rate']:.4g} +/- {figures['stderr']:.2g}"
              f" vs full {full_figures['rate']:.4g} +/- {full_figures['stderr']:.2g}", flush=True)
    return out


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
