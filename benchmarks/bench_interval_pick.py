"""Does the optimiser's symbol interval hold up against a sweep of what ``capacity rate`` reports?

For a layout, run ``optimise_design(..., ("symbol_interval",), "bits-per-second")`` (default rate: isi-window),
confirm its pick with the rates ``capacity rate`` reports, then evaluate the same rates on a log grid of at least 8
intervals from 30 ms to 1 s. The baseline is that grid, run in the same process: the record holds the pick's
bits/s as a fraction of the grid's best (target >= 0.97), the evaluations used by each, and wall times.

    python benchmarks/bench_interval_pick.py [SCENARIO ...]      (default: the single-bead test layout and demo)
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
SINGLE = HERE.parent / "tests" / "data" / "scenarios" / "single_bead_ook.toml"


def interval_pick(scenario_name, *, grid=None, n_symbols=5_000, starts=2, steps=60) -> dict:
    """The record described in the module docstring, for one scenario (file path or built-in name)."""
    import capacity  # noqa: F401
    from capacity.design.optimise import confirm, optimise_design
    from capacity.scenario.load import load_scenario

    scenario = load_scenario(scenario_name)
    grid = np.geomspace(0.03, 1.0, 8) if grid is None else np.asarray(grid, dtype=float)
    t = time.perf_counter()
    result = optimise_design(scenario, ("symbol_interval",), "bits-per-second", starts=starts, steps=steps,
                             progress=False, polish_symbols=n_symbols)
    t_opt = time.perf_counter() - t
    pick = float(result.best["symbol_interval"])
    t = time.perf_counter()
    rows = []
    for ts in grid:
        rates = confirm(scenario.with_channel(symbol_interval=float(ts)), n_symbols=n_symbols)
        rows.append({"symbol_interval": float(ts), "bits_per_second": rates.information_rate.rate / float(ts),
                     "stderr": rates.information_rate.stderr / float(ts), "method": rates.information_rate.method})
    t_grid = time.perf_counter() - t
    best = max(rows, key=lambda r: r["bits_per_second"])
    return {"scenario": str(scenario_name), "pick_s": pick, "pick_bits_per_second": result.polished,
            "pick_stderr": result.polished_stderr, "objective_value": result.value, "rate": result.rate,
            "optimiser_evaluations": result.evaluations, "optimiser_seconds": t_opt,
            "grid": rows, "grid_best": best, "grid_points": len(rows), "grid_seconds": t_grid,
            "ratio_to_grid_best": result.polished / best["bits_per_second"]}


def run(scenarios=None) -> dict:
    out = {}
    for name in scenarios or (str(SINGLE), "demo"):
        rec = interval_pick(name)
        out[Path(name).stem] = rec
        print(f"{name}: pick {rec['pick_s'] * 1e3:.1f} ms -> {rec['pick_bits_per_second']:.3g} bits/s; grid best "
              f"{rec['grid_best']['symbol_interval'] * 1e3:.0f} ms -> {rec['grid_best']['bits_per_second']:.3g}; "
              f"ratio {rec['ratio_to_grid_best']:.3f}; optimiser {rec['optimiser_seconds']:.0f} s "
              f"({rec['optimiser_evaluations']} evaluations), grid {rec['grid_seconds']:.0f} s", flush=True)
    return out


if __name__ == "__main__":
    path = HERE.parent / "results" / "interval_pick.json"
    record = json.loads(path.read_text()) if path.exists() else {}  # one entry per scenario, others kept
    record.update(run(sys.argv[1:] or None))
    path.write_text(json.dumps(record, indent=1, default=float))
    print(f"wrote {path}")
