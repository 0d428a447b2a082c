"""How far from the senders and how big should the receivers be? A layout sweep on the demo.

Both beads of the demo are moved together along x (their distance from the line of senders: ``receiver[*].
centre[0]``) and resized together (``receiver[*].radius``); at every layout the shadowed response and the rates
``capacity rate`` reports are computed, through the sweep engine (``capacity.sweep``: local Dask workers,
resumable). Writes ``results/layout_sweep/``: points.csv, sweep.nc, sweep.json, heat maps (bits per second and
bits per symbol, best layout marked) and layout_sweep.json (the finding). Re-running skips finished layouts.

    python studies/layout_sweep.py [--quick] [--workers N] [--scenario FILE]
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

DISTANCES = "receiver[*].centre[0]=10um,14um,20um,28um,40um"
RADII = "receiver[*].radius=2um,3um,4um,5um,6.5um"
QUICK = ("receiver[*].centre[0]=12um,24um", "receiver[*].radius=3um,6um")


def main(argv=None) -> int:
    from capacity.sweep import make_spec, run_sweep

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", default="demo", help="scenario file (default: the built-in demo)")
    ap.add_argument("--quick", action="store_true", help="2 x 2 grid, short simulations")
    ap.add_argument("--workers", type=int, default=None, help="local worker processes (default: one per core)")
    ap.add_argument("--out", default="results/layout_sweep")
    args = ap.parse_args(argv)
    started = time.perf_counter()
    vary = QUICK if args.quick else (DISTANCES, RADII)
    settings = {"symbols": 2_000 if args.quick else 6_000, "runs": 4}
    spec = make_spec(args.scenario, vary, settings=settings)
    summary = run_sweep(spec, args.out, workers=args.workers)
    finding = _finding(Path(args.out))
    write_record(Path(args.out), "layout_sweep", {"scenario": spec.source, "vary": list(vary), "measure": "rate",
                                                  "settings": spec.settings, "base_seed": spec.base_seed},
                 {"summary": summary, "finding": finding}, started, time.perf_counter())
    b = finding["best_bits_per_second"]
    print(f"most bits per second: receivers {b['distance_um']:.3g} um from the senders, radius {b['radius_um']:.3g} "
          f"um: {b['bits_per_second']:.3g} +/- {b['stderr_bits_per_second']:.2g} bits/s")
    for row in finding["best_radius_per_distance"]:
        print(f"  at {row['distance_um']:.3g} um the best radius is {row['radius_um']:.3g} um "
              f"({row['bits_per_second']:.3g} bits/s)")
    return 1 if summary["points_failed"] else 0


def _finding(folder: Path) -> dict:
    """Best layout overall and the best radius at each distance, read back from the stored dataset."""
    import xarray as xr

    with xr.open_dataset(folder / "sweep.nc", engine="scipy") as ds:
        bps = ds["bits_per_second"].values
        se = ds["stderr"].values / ds["information_rate"].values * bps
        x = ds["centre_x"].values * 1e6
        r = ds["radius"].values * 1e6
        i, j = np.unravel_index(np.nanargmax(bps), bps.shape)
        rows = []
        for a in range(len(x)):
            k = int(np.nanargmax(bps[a]))
            rows.append({"distance_um": float(x[a]), "radius_um": float(r[k]), "bits_per_second": float(bps[a, k]),
                         "stderr_bits_per_second": float(se[a, k])})
        per_radius = [{"radius_um": float(r[b]), "distance_um": float(x[int(np.nanargmax(bps[:, b]))]),
                       "bits_per_second": float(np.nanmax(bps[:, b]))} for b in range(len(r))]
        best = {"distance_um": float(x[i]), "radius_um": float(r[j]), "bits_per_second": float(bps[i, j]),
                "stderr_bits_per_second": float(se[i, j]),
                "information_rate": float(ds["information_rate"].values[i, j]),
                "lower_bound": float(ds["lower_bound"].values[i, j]),
                "upper_bound": float(ds["upper_bound"].values[i, j])}
    finding = {"best_bits_per_second": best, "best_radius_per_distance": rows, "best_distance_per_radius": per_radius,
               "grid_bits_per_second": np.round(bps, 4).tolist(), "distances_um": x.tolist(), "radii_um": r.tolist()}
    (folder / "layout_sweep_finding.json").write_text(json.dumps(finding, indent=2) + "\n")
    return finding


if __name__ == "__main__":
    sys.exit(main())
