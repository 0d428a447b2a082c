"""How fast the command line answers when no computation is asked for (``--help``, argument errors).

Baseline in the same process: a bare interpreter start (``python -c pass``). Target (absolute, 2 cores): each
command <= 0.5 s, i.e. JAX is not imported until a sub-command needs it.

    python benchmarks/bench_cli_start.py
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time

CASES = (("--help",), ("rate", "--help"), ("optimise", "--help"), ("rate", "no-such-file.toml"),
         ("rate", "demo", "--no-such-option"))


def _seconds(args, repeats=5) -> float:
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        subprocess.run(args, capture_output=True, check=False)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def run() -> dict:
    base = _seconds([sys.executable, "-c", "pass"])
    out = {"baseline_python_start_s": base}
    for case in CASES:
        s = _seconds([sys.executable, "-m", "capacity.cli", *case])
        out[" ".join(case)] = {"seconds": s, "ratio_to_bare_python": s / base}
        print(f"capacity {' '.join(case):<28} {s:.3f} s ({s / base:.1f}x a bare interpreter)", flush=True)
    return out


if __name__ == "__main__":
    run()
