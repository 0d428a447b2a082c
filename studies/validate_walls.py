"""How accurate is the shadowed model with reflecting walls and release pulses? Compare it with particles.

Still fluid, absorbing beads. The shadowed model runs on the image layout (:mod:`capacity.physics.images`); the
particle simulator reflects every step exactly and tests contacts against the beads and their mirror images.
Targets as for the shadowed model without walls: kept-sum totals within 10 %, every slot within 0.005.

Invented layouts (D = 79.4 um^2/s, Ts = 100 ms, L = 8, emitter at the origin, a 5 um bead centred 12 um away):
a bead 2 um from one wall; a bead 0.5 um from one wall (its image 0.2 radii away, outside the validated 0.3);
a 16 um channel with two beads; one wall with a 20 ms release pulse.

Writes ``results/validation/walls.csv`` (one row per layout, emitter and receiver) and
``results/validation/walls.json`` (settings, versions, seeds, wall time, per-layout maxima and notes).

Usage: ``python studies/validate_walls.py [--particles N] [--out DIR]``.
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

import capacity  # noqa: E402, F401  (float64)
from capacity.physics.response import channel_response  # noqa: E402
from capacity.scenario.load import scenario_from_dict  # noqa: E402

D = "79.4 um^2/s"
BEAD = {"name": "bead", "centre": ["12 um", "0 um", "0 um"], "radius": "5 um"}


def _wall(y_um, normal=(0, 1, 0)):
    return {"point": ["0 um", f"{y_um} um", "0 um"], "normal": list(normal)}


def _layout(name, walls, receivers=(BEAD,), pulse="0 ms"):
    return {"name": name, "medium": {"diffusion": D},
            "emitter": [{"name": "tx", "position": ["0 um", "0 um", "0 um"], "pulse": pulse}],
            "receiver": list(receivers), "wall": list(walls),
            "channel": {"symbol_interval": "100 ms", "memory": 8}}


LAYOUTS = [
    _layout("wall_gap_2um", [_wall(-7)]),
    _layout("wall_gap_0.5um", [_wall(-5.5)]),
    _layout("channel_two_beads", [_wall(-7), _wall(9, (0, -1, 0))],
            receivers=({"name": "b1", "centre": ["12 um", "0 um", "0 um"], "radius": "4 um"},
                       {"name": "b2", "centre": ["-12 um", "2 um", "0 um"], "radius": "5 um"})),
    _layout("wall_pulse_20ms", [_wall(-7)], pulse="20 ms"),
]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--particles", type=int, default=400_000)
    ap.add_argument("--out", default=str(Path(__file__).resolve().parent.parent / "results" / "validation"))
    args = ap.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    started = time.time()
    rows, summary = [], {}
    for k, spec in enumerate(LAYOUTS):
        seed = 100 + k
        s = scenario_from_dict(spec).with_channel(particle_count=args.particles, seed=seed)
        t0 = time.time()
        sh = channel_response(s, "shadowed")
        pa = channel_response(s, "particles")
        diff = np.abs(sh.hits - pa.hits)
        tot_sh, tot_pa = sh.hits.sum(-1), pa.hits.sum(-1)
        rel = tot_sh / tot_pa - 1.0
        for i, e in enumerate(s.emitters):
            for j, r in enumerate(s.receivers):
                rows.append({"layout": s.name, "emitter": e.name, "receiver": r.name,
                             "total_shadowed": tot_sh[i, j], "total_particles": tot_pa[i, j],
                             "total_rel_error": rel[i, j], "max_slot_abs_error": diff[i, j].max(),
                             "max_slot_stderr": pa.stderr[i, j].max()})
        summary[s.name] = {"seed": seed, "max_slot_abs_error": float(diff.max()),
                           "max_total_rel_error": float(np.abs(rel).max()),
                           "meets_targets": bool(diff.max() < 0.005 and np.abs(rel).max() < 0.10),
                           "seconds": round(time.time() - t0, 1), "notes": list(sh.notes)}
        print(f"{s.name:20s} slot {diff.max():.4f}  total {np.abs(rel).max():.2%}", flush=True)
        with open(out / "walls.csv", "w", newline="") as fh:  # rewritten after every layout
            w = csv.DictWriter(fh, fieldnames=list(rows[0]))
            w.writeheader()
            w.writerows(rows)
    write_record(out, "walls", {"particles": args.particles, "layouts": LAYOUTS}, summary, started, time.time())
    return 0


if __name__ == "__main__":
    sys.exit(main())
