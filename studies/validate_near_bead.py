"""Where does the ``shadowed`` model hold when a sender sits right next to a bead?

The demo layout's two beads (radius 5 um, centres (12, 2, 0) and (12, 22, 0) um, D = 100 um^2/s, k = 0.5 1/s,
symbol interval 200 ms) with one emitter on the line towards the near bead's centre, at a surface gap of
0.01, 0.02, 0.05, 0.1, 0.2 and 0.5 bead radii. For each gap: the raw shadowed model (``shadowed_hits``), whether
``channel_response``'s guard would fall back to the particle simulator (``broken_invariants``: a probability
outside [0, 1] or a capture total above 1), whether its near-bead rule does (``NEAR_BEAD``, set from this study),
which model the response layer therefore uses, and the particle simulator as the reference. The model "holds" at a
gap when both beads' totals over the kept slots are within 10 % of the particles' (or, for a total too small for
the particle count to resolve to 10 %, within 2 standard errors), every slot within 0.005, and no invariant breaks.

Writes ``results/validation/near_bead.csv`` and ``near_bead.json`` (provenance: versions, settings, seeds, times).
Usage: ``python studies/validate_near_bead.py [--particles N] [--memory L] [--out DIR]``.
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

import numpy as np

import capacity  # noqa: F401  (float64)
from capacity.physics import particles as particle_model
from capacity.physics.response import NEAR_BEAD, broken_invariants
from capacity.physics.shadowed import shadowed_hits

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _record import write_record  # noqa: E402

UM = 1e-6
CENTRES = np.array([[12.0, 2.0, 0.0], [12.0, 22.0, 0.0]]) * UM
RADII = np.array([5.0, 5.0]) * UM
D, K, TS = 100e-12, 0.5, 0.2
GAPS = [0.01, 0.02, 0.05, 0.1, 0.2, 0.5]  # surface gap to the near bead, in bead radii
TOTAL_REL, SLOT_ABS = 0.10, 0.005


def emitter_at(gap: float) -> np.ndarray:
    """On the -x side of the near bead, on the line through its centre, ``gap`` radii from its surface."""
    return np.array([[CENTRES[0, 0] - RADII[0] * (1.0 + gap), CENTRES[0, 1], 0.0]])


def run(out: Path, particles: int, memory: int, seed: int) -> list[dict]:
    started = time.time()
    rows = []
    for index, gap in enumerate(GAPS):
        e = emitter_at(gap)
        t0 = time.perf_counter()
        model, model_tail = (np.asarray(a) for a in shadowed_hits(e, CENTRES, RADII, D, K, TS, memory))
        t_model = time.perf_counter() - t0
        problems = broken_invariants(model, model_tail, np.zeros(2, dtype=bool), shared=True)
        # what channel_response does: the invariant guard, and the near-bead rule (0.1 radius) on top of it
        rule = NEAR_BEAD > gap
        t0 = time.perf_counter()
        sim, _, se = (np.asarray(a) for a in particle_model.simulate_hits(
            e, CENTRES, RADII, np.zeros(2, dtype=bool), np.full(2, TS), D, K, TS, memory,
            particles=particles, seed=seed + index))
        t_sim = time.perf_counter() - t0
        tot_m, tot_s = model.sum(-1)[0], sim.sum(-1)[0]
        tot_se = np.sqrt(tot_s * (1 - tot_s) / particles)
        with np.errstate(divide="ignore", invalid="ignore"):
            rel = (tot_m - tot_s) / tot_s
        # a total agrees when within 10 %, or (a small total the particles cannot resolve to 10 %) within 2 SE
        agree = (np.abs(rel) <= TOTAL_REL) | (np.abs(tot_m - tot_s) <= 2.0 * tot_se)
        slot_err = np.abs(model - sim)[0]
        holds = bool(np.all(agree) and slot_err.max() <= SLOT_ABS and not problems)
        row = dict(gap_radii=gap, gap_um=gap * RADII[0] / UM,
                   near_total_model=tot_m[0], near_total_particles=tot_s[0], near_total_se=tot_se[0],
                   far_total_model=tot_m[1], far_total_particles=tot_s[1], far_total_se=tot_se[1],
                   near_rel_error=rel[0], far_rel_error=rel[1], totals_agree=bool(np.all(agree)),
                   max_slot_abs_error=slot_err.max(),
                   max_slot_se=se.max(), model_min_slot=model.min(), model_capture_sum=float(tot_m.sum()
                                                                                            + model_tail.sum()),
                   guard_falls_back=bool(problems), near_bead_rule_falls_back=bool(rule),
                   response_layer_uses="particles" if (problems or rule) else "shadowed",
                   broken="; ".join(problems) or "-", model_holds=holds,
                   model_seconds=round(t_model, 2), particle_seconds=round(t_sim, 1))
        rows.append(row)
        print(f"gap {gap:5.2f} r: totals model {tot_m.round(4)} particles {tot_s.round(4)} (SE {tot_se.round(4)}),"
              f" rel {rel.round(3)}, slot err {slot_err.max():.4f}; guard falls back: {bool(problems)}; "
              f"near-bead rule: {bool(rule)}; "
              f"holds: {holds} ({t_sim:.0f} s)", flush=True)
    out.mkdir(parents=True, exist_ok=True)
    with open(out / "near_bead.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        for r in rows:
            w.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})
    write_record(out, "near_bead", dict(particles_per_emitter=particles, memory=memory, base_seed=seed,
                                        centres_um=(CENTRES / UM).tolist(), radii_um=(RADII / UM).tolist(),
                                        diffusion=D, degradation=K, symbol_interval=TS, gaps_radii=GAPS,
                                        criteria=f"totals within {TOTAL_REL:.0%}, slots within {SLOT_ABS}",
                                        particle_time_step="automatic (simulate_hits, time_step=None)"),
                 {"rows": rows}, started, time.time())
    return rows


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--particles", type=int, default=100_000, help="molecules per gap (default 100000)")
    parser.add_argument("--memory", type=int, default=10, help="lags kept, L (default 10: 2.2 s)")
    parser.add_argument("--seed", type=int, default=2027)
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parents[1] / "results" / "validation")
    args = parser.parse_args(argv)
    run(args.out, args.particles, args.memory, args.seed)


if __name__ == "__main__":
    main()
