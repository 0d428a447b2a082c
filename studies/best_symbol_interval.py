"""Which symbol interval gives the most bits per second, or per molecule, for the demo layout?

Sweeps the symbol interval on a grid, recomputes the shadowed response (memory chosen automatically at each
interval) and every rate, and writes ``results/symbol_interval/``: a CSV, a PNG (bits/s and bits/molecule
against the interval, bounds as bands) and a JSON record. Each finished grid point is written at once.

    python studies/best_symbol_interval.py [--quick] [--scenario FILE]
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
from capacity.compare import bracket_flag  # noqa: E402
from capacity.physics.response import channel_response  # noqa: E402
from capacity.rates import link_rates  # noqa: E402
from capacity.report.plots import _log_axis, save_figure  # noqa: E402
from capacity.schemes.builders import build_alphabet  # noqa: E402

FIELDS = ("symbol_interval", "memory", "isi_free_capacity", "information_rate", "stderr", "lower_bound",
          "upper_bound", "mean_molecules", "bits_per_second", "bits_per_molecule", "rate_method", "input_law",
          "lower_bound_method", "upper_bound_method", "bracket_relative", "flag")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", default="demo", help="scenario file (default: the built-in demo)")
    ap.add_argument("--quick", action="store_true", help="coarse grid, short simulations")
    ap.add_argument("--out", default="results/symbol_interval")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    scenario = load(args.scenario)
    grid = np.geomspace(0.06, 1.0, 4 if args.quick else 8)
    n_symbols = 2_000 if args.quick else 6_000
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    rows = []
    with open(out / "symbol_interval.csv", "w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=FIELDS)
        writer.writeheader()
        for ts in tqdm(grid, desc="symbol intervals"):
            s = scenario.with_channel(symbol_interval=float(ts))
            response = channel_response(s)
            alphabet = build_alphabet(s.signalling, len(s.emitters))
            rates = link_rates(s, response, alphabet, n_symbols=n_symbols, n_runs=4)
            d = rates.to_dict()
            row = {
                "symbol_interval": float(ts), "memory": response.memory,
                "isi_free_capacity": d["isi_free_capacity"], "information_rate": d["information_rate"],
                "stderr": d["stderr"], "lower_bound": d["lower_bound"], "upper_bound": d["upper_bound"],
                "mean_molecules": d["mean_molecules"],
                "bits_per_second": d["bits_per_second"]["information_rate"],
                "bits_per_molecule": d["bits_per_molecule"]["information_rate"], "rate_method": d["rate_method"],
                "input_law": d["input_law_choice"], "lower_bound_method": d["lower_bound_method"],
                "upper_bound_method": d["upper_bound_method"], "bracket_relative": d["bracket_relative"],
                "flag": bracket_flag(d),
            }
            writer.writerow(row)
            handle.flush()
            rows.append(row)
    best_s = max(rows, key=lambda r: r["bits_per_second"])
    best_m = max(rows, key=lambda r: r["bits_per_molecule"])
    _plot(rows, out / "symbol_interval.png")
    write_record(out, "symbol_interval", {"scenario": scenario.name, "grid_s": grid, "n_symbols": n_symbols,
                                          "runs": 4, "seed": scenario.channel.seed, "model": "shadowed"},
                 {"best_bits_per_second": best_s, "best_bits_per_molecule": best_m}, started, time.perf_counter())
    print(f"most bits per second: Ts = {best_s['symbol_interval'] * 1e3:.0f} ms, "
          f"{best_s['bits_per_second']:.3g} bits/s (+/- {best_s['stderr'] / best_s['symbol_interval']:.2g})")
    print(f"most bits per molecule: Ts = {best_m['symbol_interval'] * 1e3:.0f} ms, "
          f"{best_m['bits_per_molecule']:.3g} bits/molecule")
    return 0


def _plot(rows, path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    ts = np.array([r["symbol_interval"] for r in rows])
    rate = np.array([r["information_rate"] for r in rows])
    lo = np.array([r["lower_bound"] for r in rows])
    hi = np.array([r["upper_bound"] for r in rows])
    free = np.array([r["isi_free_capacity"] for r in rows])
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
