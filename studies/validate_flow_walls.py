"""How accurate are the differentiable models with flow, reactive beads and walls? Compare them with particles.

Each invented layout is run through the response layer with the differentiable models -- ``lone`` (the flow /
reactive forms of :mod:`capacity.physics.transport`, on the image layout when there are walls) and, where it does
not hand over to particles, ``shadowed`` (the renewal model in the flow, :mod:`capacity.physics.flow_shadowed`,
for absorbing beads with at most one wall) -- and with the particle simulator (the ground truth: exact drift in
the step, Skorokhod reflection with the Robin reaction for reactive beads, exact wall reflection). Targets as
for the shadowed model: kept-sum totals within 10 %, every slot within 0.005.

Writes ``results/validation/flow_walls.csv`` (one row per layout, model, emitter and receiver) and
``results/validation/flow_walls.json`` (settings, versions, seeds, wall time, per-layout maxima).

Usage: ``python studies/validate_flow_walls.py [--particles N] [--out DIR] [--quick]``.
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

import capacity  # noqa: E402
from capacity.physics.flow import peclet_numbers  # noqa: E402
from capacity.physics.response import channel_response  # noqa: E402
from capacity.scenario.load import scenario_from_dict  # noqa: E402

D = "100 um^2/s"
BEAD = {"name": "bead", "centre": ["14 um", "0 um", "0 um"], "radius": "4 um"}
SOURCE = [{"name": "tx", "position": ["0 um", "0 um", "0 um"]}]


def _layout(name, receivers, flow=("0 um/s", "0 um/s", "0 um/s"), walls=(), emitters=SOURCE, ts="100 ms",
            degradation="0 1/s"):
    spec = {"name": name, "medium": {"diffusion": D, "degradation": degradation, "flow": list(flow)},
            "emitter": list(emitters), "receiver": list(receivers),
            "channel": {"symbol_interval": ts, "memory": 10, "response": "lone"}}
    if walls:
        spec["wall"] = list(walls)
    return spec


def _reactive(rate, **extra):
    return dict(BEAD, kind="reactive", reaction_rate=rate, **extra)


# our own invented layouts (Pe = |v| a / D with a = 4 um, D = 100 um^2/s: 40 um/s -> 1.6)
LAYOUTS = [
    _layout("flow_toward", [BEAD], flow=("40 um/s", "0 um/s", "0 um/s")),
    _layout("flow_away", [BEAD], flow=("-40 um/s", "0 um/s", "0 um/s")),
    _layout("flow_across", [BEAD], flow=("0 um/s", "40 um/s", "0 um/s")),
    _layout("fast_flow_toward", [BEAD], flow=("200 um/s", "0 um/s", "0 um/s"), ts="50 ms"),
    _layout("fast_flow_oblique", [BEAD], flow=("150 um/s", "150 um/s", "0 um/s"), ts="50 ms"),
    _layout("reactive_bead", [_reactive("20 um/s")], degradation="0.5 1/s"),
    _layout("reactive_bead_in_flow", [_reactive("30 um/s")], flow=("30 um/s", "30 um/s", "0 um/s")),
    _layout("one_wall_flow", [dict(BEAD, centre=["14 um", "0 um", "-5 um"])], flow=("40 um/s", "0 um/s", "0 um/s"),
            walls=[{"point": ["0 um", "0 um", "-10 um"], "normal": [0, 0, 1]}]),
    _layout("two_beads_in_line_flow", [dict(BEAD, name="front", centre=["12 um", "0 um", "0 um"]),
                                       dict(BEAD, name="back", centre=["24 um", "1 um", "0 um"])],
            flow=("40 um/s", "0 um/s", "0 um/s")),
    _layout("two_beads_side_flow", [dict(BEAD, name="left", centre=["14 um", "6 um", "0 um"]),
                                    dict(BEAD, name="right", centre=["14 um", "-6 um", "0 um"])],
            flow=("40 um/s", "20 um/s", "0 um/s")),
    _layout("channel_reactive_and_probe",
            [_reactive("60 um/s", centre=["18 um", "0 um", "0 um"]),
             {"name": "probe", "centre": ["30 um", "0 um", "0 um"], "radius": "3 um", "kind": "passive"}],
            flow=("40 um/s", "0 um/s", "0 um/s"),
            walls=[{"point": ["0 um", "0 um", "-8 um"], "normal": [0, 0, 1]},
                   {"point": ["0 um", "0 um", "8 um"], "normal": [0, 0, -1]}]),
]


def _renewal_applies(sc) -> bool:
    """Whether the shadowed model keeps the renewal model here (several absorbing beads or one wall, no reactive
    bead among them, no channel) rather than handing over to particles."""
    beads = [r for r in sc.receivers if r.kind != "passive"]
    several = len(beads) > 1 or len(sc.walls) == 1
    return several and all(r.kind == "absorbing" for r in beads) and len(sc.walls) <= 1


def run(n_particles: int, out: Path, quick: bool) -> dict:
    started = time.time()
    rows, summary = [], {}
    specs = capacity.load_scenario("channel_flow"), *[scenario_from_dict(spec) for spec in LAYOUTS]
    for sc in specs[: 3 if quick else None]:
        memory = 10
        t0 = time.time()
        truth = channel_response(sc, "particles", memory=memory, particle_count=n_particles, seed=2024)
        t_part = time.time() - t0
        pe = peclet_numbers(sc.receiver_radii, sc.flow, sc.medium.diffusion)
        for name in ("lone", "shadowed") if _renewal_applies(sc) else ("lone",):
            t0 = time.time()
            model = channel_response(sc, name, memory=memory)
            t_model = time.time() - t0
            rel_max, slot_max = 0.0, 0.0
            for i, e in enumerate(sc.emitters):
                for j, r in enumerate(sc.receivers):
                    m_tot, p_tot = model.hits[i, j].sum(), truth.hits[i, j].sum()
                    se_tot = np.sqrt(p_tot * (1.0 - p_tot) / n_particles)
                    rel = m_tot / p_tot - 1.0 if p_tot > 0 else float("nan")
                    slot = float(np.max(np.abs(model.hits[i, j] - truth.hits[i, j])))
                    big = p_tot > 20.0 * se_tot  # relative totals only where the particle SE is below 5 %
                    rel_max = max(rel_max, abs(rel)) if big else rel_max
                    slot_max = max(slot_max, slot)
                    rows.append({"layout": sc.name, "model": name, "emitter": e.name, "receiver": r.name,
                                 "kind": r.kind, "peclet": round(float(pe[j]), 4), "model_total": m_tot,
                                 "particle_total": p_tot, "particle_total_se": se_tot, "relative_total_error": rel,
                                 "max_slot_abs_error": slot, "max_slot_se": float(np.max(truth.stderr[i, j])),
                                 "model_seconds": round(t_model, 2), "particle_seconds": round(t_part, 2)})
            summary[f"{sc.name} [{name}]"] = {"max_relative_total_error": rel_max, "max_slot_abs_error": slot_max,
                                              "within_targets": bool(rel_max <= 0.10 and slot_max <= 0.005),
                                              "notes": list(model.notes)}
            print(f"{sc.name:40s} {name:8s} total err {rel_max:7.2%}  slot err {slot_max:.4f}", flush=True)
    out.mkdir(parents=True, exist_ok=True)
    with open(out / "flow_walls.csv", "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]))
        writer.writeheader()
        for row in rows:
            writer.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in row.items()})
    settings = {"particles_per_emitter": n_particles, "seed": 2024, "memory": 10, "model": "lone (flow/reactive)",
                "layouts": ["channel_flow (built-in)"] + [spec["name"] for spec in LAYOUTS],
                "targets": {"relative_total_error": 0.10, "slot_abs_error": 0.005},
                "command": "python studies/validate_flow_walls.py" + (" --quick" if quick else "")
                + f" --particles {n_particles}"}
    write_record(out, "flow_walls", settings, summary, started, time.time())
    return summary


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--particles", type=int, default=400000)
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parents[1] / "results" / "validation")
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    run(args.particles, args.out, args.quick)


if __name__ == "__main__":
    main()
