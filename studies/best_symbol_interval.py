"""Which symbol interval gives the most bits per second, or per molecule, for the demo layout?

Sweeps the symbol interval on a grid through the sweep engine (``capacity.sweep``: local Dask workers, each
finished point stored at once and skipped when the study is re-run), recomputes the shadowed response (memory
chosen automatically at each interval) and every rate, and writes ``results/symbol_interval/``: a CSV, a PNG
(bits/s and bits/molecule against the interval, bounds as bands) and a JSON record, beside the sweep's own files
(points.csv, sweep.nc, sweep.json, sweep.png). Each point's seed derives from the scenario's seed and the point.

    python studies/best_symbol_interval.py [--quick] [--scenario FILE]
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

from capacity.report.plots import _log_axis, save_figure  # noqa: E402

FIELDS = ("symbol_interval", "memory", "single_slot_capacity", "information_rate", "stderr", "lower_bound",
          "upper_bound", "mean_molecules", "bits_per_second", "bits_per_molecule", "rate_method", "input_law",
          "lower_bound_method", "upper_bound_method", "bracket_relative", "flag")


def main(argv=None) -> int:
    from capacity.sweep import make_spec, run_sweep

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", default="demo", help="scenario file (default: the built-in demo)")
    ap.add_argument("--quick", action="store_true", help="coarse grid, short simulations")
    ap.add_argument("--workers", type=int, default=None, help="local worker processes (default: one per core)")
    ap.add_argument("--out", default="results/symbol_interval")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    n_points = 4 if args.quick else 8
    n_symbols = 2_000 if args.quick else 6_000
    spec = make_spec(args.scenario, [f"channel.symbol_interval=60ms:1s:{n_points}:log"],
                     settings={"symbols": n_symbols, "runs": 4})
    out = Path(args.out)
    summary = run_sweep(spec, out, workers=args.workers)
    rows = _rows(out / "sweep.nc")
    with open(out / "symbol_interval.csv", "w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=FIELDS)
        writer.writeheader()
        writer.writerows(rows)
    best_s = max(rows, key=lambda r: r["bits_per_second"])
    best_m = max(rows, key=lambda r: r["bits_per_molecule"])
    _plot(rows, out / "symbol_interval.png")
    grid = [r["symbol_interval"] for r in rows]
    write_record(out, "symbol_interval", {"scenario": spec.source, "grid_s": grid, "n_symbols": n_symbols,
                                          "runs": 4, "base_seed": spec.base_seed,
                                          "seeds": "per point, from the base seed and the point id (sweep.json)",
                                          "model": "shadowed", "engine": "capacity.sweep"},
                 {"best_bits_per_second": best_s, "best_bits_per_molecule": best_m,
                  "points_computed": summary["points_computed"], "points_skipped": summary["points_skipped"]},
                 started, time.perf_counter())
    print(f"most bits per second: Ts = {best_s['symbol_interval'] * 1e3:.0f} ms, "
          f"{best_s['bits_per_second']:.3g} bits/s (+/- {best_s['stderr'] / best_s['symbol_interval']:.2g})")
    print(f"most bits per molecule: Ts = {best_m['symbol_interval'] * 1e3:.0f} ms, "
          f"{best_m['bits_per_molecule']:.3g} bits/molecule")
    return 1 if summary["points_failed"] else 0


def _rows(path) -> list[dict]:
    """The study's CSV rows, one per interval in grid order, from the sweep's dataset."""
    import xarray as xr

    with xr.open_dataset(path, engine="scipy") as ds:
        rows = []
        for i, ts in enumerate(ds["symbol_interval"].values):
            row = {"symbol_interval": float(ts)}
            for name in FIELDS[1:]:
                v = ds[name].values[i]
                v = v.decode() if isinstance(v, bytes) else v
                row[name] = v if isinstance(v, str) else float(v)
            row["memory"] = int(row["memory"])
            if not isinstance(row["flag"], str):  # every flag empty: stored as a missing number
                row["flag"] = ""
            if not np.isfinite(row["bracket_relative"]):
                row["bracket_relative"] = None
            rows.append(row)
    return rows


def _plot(rows, path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    ts = np.array([r["symbol_interval"] for r in rows])
    rate = np.array([r["information_rate"] for r in rows])
    lo = np.array([r["lower_bound"] for r in rows])
    hi = np.array([r["upper_bound"] for r in rows])
    free = np.array([r["single_slot_capacity"] for r in rows])
    mol = np.array([r["mean_molecules"] for r in rows])
    fig, axes = plt.subplots(1, 2, figsize=(7, 2.8))
    for ax, scale, label in ((axes[0], 1 / ts, "bits per second"), (axes[1], 1 / mol, "bits per molecule")):
        ax.plot(ts * 1e3, rate * scale, marker="o", markersize=3, label="i.i.d. rate with ISI")
        ax.fill_between(ts * 1e3, lo * scale, hi * scale, alpha=0.2, label="bounds (sbs/dfe .. mf)")
        ax.plot(ts * 1e3, free * scale, linestyle=":", label="ISI-free capacity")
        _log_axis(ax)
        ax.set_xlabel("symbol interval (ms)")
        ax.set_ylabel(label)
        ax.grid(alpha=0.3, which="both")
    axes[0].legend(fontsize=7)
    save_figure(fig, path)


if __name__ == "__main__":
    sys.exit(main())
