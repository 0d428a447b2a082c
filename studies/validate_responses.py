"""How accurate is the ``shadowed`` response model? Compare it with the particle simulator on varied layouts.

Writes into ``results/validation/`` (or ``--out``):

* ``accuracy.csv`` / ``accuracy.md`` - per layout, emitter and receiver: kept-sum totals of both models, the
  relative total error, the largest absolute slot error, and the particle standard errors;
* ``summary.csv`` - per layout: max relative total error, max absolute slot error, max standard errors;
* ``<layout>.png`` - slot hit probabilities of both models for every emitter-receiver pair;
* ``record.json`` - package versions, seeds, particle counts, time steps, settings, timestamps, run times;
* ``sweeps/<layout>/`` - the sweep engine's files of each layout (points.csv, sweep.nc, sweep.json).

Each layout is a two-point sweep on the engine (``capacity.sweep``: ``channel.response = shadowed, particles``,
measure ``hits``: every slot of the response, with the particle standard errors), so the two models of a layout
run side by side on local workers and a killed study resumes: finished points are skipped when it is re-run.
Each point's seed derives from ``--seed`` and the point (``sweeps/<layout>/points.csv``).

Usage: ``python studies/validate_responses.py [--quick] [--particles N] [--memory L] [--workers N] [--out DIR]``.
``--quick`` runs a fast smoke version (two layouts, few particles, short memory) for tests.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import json
import platform
import sys
from importlib import metadata
from pathlib import Path

import numpy as np

import capacity  # noqa: F401  (float64)
from capacity.physics.shadowed import validity_notes

UM = 1e-6
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from reference_images import image_split  # noqa: E402  (independent Kelvin image series, k = 0 only)

# Our own invented layouts (micrometres). Each: emitters, centres, radii, D (m^2/s), k (1/s), Ts (s).
LAYOUTS = {
    "side_by_side": dict(emitters=[(0, 0, 0)], centres=[(14, 7, 0), (14, -7, 0)], radii=[4, 4],
                         D=1.0e-10, k=0.0, Ts=0.2),
    "one_behind": dict(emitters=[(0, 0, 0)], centres=[(13, 0, 0), (26, 0, 0)], radii=[4, 5],
                       D=1.0e-10, k=0.0, Ts=0.2),
    "three_around": dict(emitters=[(0, 0, 0)], centres=[(12, 0, 0), (-6, 10, 0), (-5, -9, 4)], radii=[4, 4, 4],
                         D=1.2e-10, k=0.0, Ts=0.15),
    "unequal_radii": dict(emitters=[(0, 2, 0)], centres=[(11, 0, 0), (16, 9, 0)], radii=[2.5, 6],
                          D=1.0e-10, k=0.0, Ts=0.25),
    "close_spacing": dict(emitters=[(0, 0, 0)], centres=[(12, 4.6, 0), (12, -4.6, 0)], radii=[4, 4],
                          D=1.0e-10, k=0.0, Ts=0.2),
    "emitter_near_receiver": dict(emitters=[(0, 0, 0)], centres=[(6, 0, 0), (14, 7, 0)], radii=[4, 4],
                                  D=1.0e-10, k=0.0, Ts=0.1),
    "hidden_close": dict(emitters=[(0, 0, 0)], centres=[(12, 0, 0), (20.2, 1, 0)], radii=[4, 3],
                         D=1.0e-10, k=0.0, Ts=0.2),
    "degradation_two_emitters": dict(emitters=[(0, 0, 0), (10, 14, 0)], centres=[(12, 0, 0), (22, 5, 0)],
                                     radii=[4, 4], D=1.0e-10, k=2.0, Ts=0.2),
}


def _versions() -> dict:
    out = {"python": platform.python_version()}
    for name in ("capacity", "numpy", "scipy", "jax", "jaxlib", "matplotlib", "dask", "distributed"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def _plot(path: Path, name: str, spec: dict, model: np.ndarray, sim: np.ndarray, se: np.ndarray) -> None:
    from capacity.report.plots import _pyplot, save_figure, style

    plt = _pyplot()
    n_e, n_r, n_l = model.shape
    mid = spec["Ts"] * (np.arange(n_l) + 0.5)
    fig, axes = plt.subplots(1, n_e, figsize=(5.5 * n_e, 4), squeeze=False)
    for i in range(n_e):
        ax = axes[0, i]
        for j in range(n_r):
            c = style(j)["color"]
            ax.plot(mid, model[i, j], "-", color=c, label=f"receiver {j}: shadowed model")
            ax.errorbar(mid, sim[i, j], yerr=2 * se[i, j], fmt=style(j)["marker"], ms=3, color=c, capsize=2,
                        label=f"receiver {j}: particles (±2 SE)")
        ax.set_xlabel("time of slot centre (s)")
        ax.set_ylabel(f"hit probability per slot (Ts = {spec['Ts']} s)")
        ax.set_title(f"{name}, emitter {i}")
        ax.legend(fontsize=7)
    save_figure(fig, path, dpi=110, footer=f"validation layout {name}")


def scenario_table(name: str, spec: dict, particles: int, memory: int) -> dict:
    """A layout of :data:`LAYOUTS` as a scenario table (as a scenario file would give it), absorbing receivers."""
    def point(p):
        return [f"{c!r} um" for c in p]

    return {"name": f"validation layout {name}",
            "medium": {"diffusion": spec["D"], "degradation": spec["k"]},
            "emitter": [{"name": f"e{i}", "position": point(p)} for i, p in enumerate(spec["emitters"])],
            "receiver": [{"name": f"r{j}", "centre": point(c), "radius": f"{r!r} um", "kind": "absorbing"}
                         for j, (c, r) in enumerate(zip(spec["centres"], spec["radii"], strict=True))],
            "channel": {"symbol_interval": spec["Ts"], "memory": int(memory), "response": "shadowed",
                        "particle_count": int(particles)}}


def _arrays(row: dict, n_e: int, n_r: int, memory: int):
    """(hits (E,R,L+1), stderr (E,R,L+1), tail (E,R)) from a point's row of the hits measure."""
    hits = np.array([[[row[f"hits_e{i}_r{j}_l{lag}"] for lag in range(memory + 1)] for j in range(n_r)]
                     for i in range(n_e)], dtype=float)
    se = np.array([[[row[f"hits_se_e{i}_r{j}_l{lag}"] for lag in range(memory + 1)] for j in range(n_r)]
                   for i in range(n_e)], dtype=float)
    tail = np.array([[row[f"tail_e{i}_r{j}"] for j in range(n_r)] for i in range(n_e)], dtype=float)
    return hits, se, tail


def _layout_points(name: str, spec: dict, out: Path, particles: int, memory: int, seed: int,
                   workers: int | None) -> dict:
    """Both models of one layout through the sweep engine (resumed if ``out/sweeps/name`` holds them)."""
    from capacity.sweep import make_spec, run_sweep
    from capacity.sweep.store import parse_cell

    table = scenario_table(name, spec, particles, memory)
    sweep = make_spec(table, ["channel.response=shadowed,particles"], measure="hits", seed=seed,
                      source=f"validation layout {name}")
    folder = out / "sweeps" / name
    summary = run_sweep(sweep, folder, workers=workers, plots=False)
    if summary["points_failed"]:
        raise RuntimeError(f"{name}: {summary['failed']}")
    from capacity.sweep.run import plan

    ids = {p.point_id for p in plan(sweep)[0]}  # the folder may also hold points of other settings
    with open(folder / "points.csv", newline="") as fh:
        rows = {r["response"]: {k: parse_cell(v) for k, v in r.items()} for r in csv.DictReader(fh)
                if r["point_id"] in ids}
    return rows


def run(out: Path, particles: int, memory: int, seed: int, layouts: dict | None = None,
        workers: int | None = None) -> dict:
    """Compare both models on ``layouts`` (default: all of :data:`LAYOUTS`) and write the outputs into ``out``."""
    layouts = LAYOUTS if layouts is None else layouts
    out.mkdir(parents=True, exist_ok=True)
    started = dt.datetime.now(dt.timezone.utc).isoformat()
    rows, summary, record_layouts = [], [], {}
    for name, spec in layouts.items():
        e = np.array(spec["emitters"], dtype=float) * UM
        c = np.array(spec["centres"], dtype=float) * UM
        r = np.array(spec["radii"], dtype=float) * UM
        points = _layout_points(name, spec, out, particles, memory, seed, workers)
        shadowed, particle = points["shadowed"], points["particles"]
        if shadowed["model"] != "shadowed":  # channel_response switched models (near-bead rule, invariants)
            raise RuntimeError(f"{name}: the shadowed point was computed with the {shadowed['model']} model")
        model, _, model_tail = _arrays(shadowed, len(e), len(r), memory)
        sim, se, sim_tail = _arrays(particle, len(e), len(r), memory)
        t_model, t_sim = float(shadowed["seconds"]), float(particle["seconds"])
        slot_err = np.abs(model - sim)
        tot_m, tot_s = model.sum(-1), sim.sum(-1)
        tot_se = np.sqrt(tot_s * (1 - tot_s) / particles)
        safe = np.where(tot_s > 0, tot_s, np.nan)
        rel = (tot_m - tot_s) / safe  # NaN where no particle arrived (quick mode only)
        for i in range(e.shape[0]):
            for j in range(r.shape[0]):
                l_max = int(np.argmax(slot_err[i, j]))
                rows.append(dict(layout=name, emitter=i, receiver=j, particles_total=f"{tot_s[i, j]:.5f}",
                                 model_total=f"{tot_m[i, j]:.5f}", total_se=f"{tot_se[i, j]:.5f}",
                                 total_rel_error=f"{rel[i, j]:+.4f}",
                                 total_rel_se=f"{tot_se[i, j] / safe[i, j]:.4f}",
                                 max_slot_abs_error=f"{slot_err[i, j, l_max]:.5f}", at_slot=l_max,
                                 slot_se=f"{se[i, j, l_max]:.5f}"))
        summary.append(dict(layout=name, max_total_rel_error=f"{np.nanmax(np.abs(rel)):.4f}",
                            total_rel_se_at_worst=f"{(tot_se / safe).flat[np.nanargmax(np.abs(rel))]:.4f}",
                            max_slot_abs_error=f"{slot_err.max():.5f}", max_slot_se=f"{se.max():.5f}",
                            notes="; ".join(validity_notes(e, c, r, spec["D"], spec["k"])) or "-"))
        eventual = (model.sum(-1) + np.asarray(model_tail))
        kelvin = None
        if spec["k"] == 0.0:
            images = np.stack([image_split(x, c, r, tol=1e-10) for x in e])
            kelvin = dict(model_eventual=eventual.tolist(), images_eventual=images.tolist(),
                          relative_error=((eventual - images) / images).tolist())
        record_layouts[name] = dict(spec, seed=int(particle["seed"]), model_seed=int(shadowed["seed"]),
                                    model_seconds=round(t_model, 2),
                                    eventual_vs_kelvin_images=kelvin,
                                    particle_seconds=round(t_sim, 2),
                                    model_tail=np.asarray(model_tail).tolist(),
                                    particle_tail_lone_estimate=np.asarray(sim_tail).tolist())
        _plot(out / f"{name}.png", name, spec, model, sim, se)
        print(f"{name}: max |total rel err| {np.nanmax(np.abs(rel)):.4f}, max slot err {slot_err.max():.5f} "
              f"(slot SE up to {se.max():.5f}); model {t_model:.1f}s, particles {t_sim:.1f}s", flush=True)

    with open(out / "accuracy.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    with open(out / "summary.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(summary[0]))
        w.writeheader()
        w.writerows(summary)
    lines = ["| layout | max relative total error | total rel. SE | max slot abs. error | max slot SE |",
             "|---|---|---|---|---|"]
    lines += [f"| {s['layout']} | {s['max_total_rel_error']} | {s['total_rel_se_at_worst']} | "
              f"{s['max_slot_abs_error']} | {s['max_slot_se']} |" for s in summary]
    lines += ["", "Per receiver:", "",
              "| " + " | ".join(rows[0]) + " |", "|" + "---|" * len(rows[0])]
    lines += ["| " + " | ".join(str(v) for v in row.values()) + " |" for row in rows]
    (out / "accuracy.md").write_text(
        f"# shadowed model vs particle simulator\n\n{particles} particles per emitter, memory L = {memory} "
        f"(totals are sums over the kept slots 0..L).\n\n" + "\n".join(lines) + "\n")
    record = dict(started=started, finished=dt.datetime.now(dt.timezone.utc).isoformat(), versions=_versions(),
                  particles_per_emitter=particles, memory=memory, base_seed=seed,
                  seeds="per layout and model, from base_seed and the point id (sweeps/<layout>/points.csv)",
                  engine="capacity.sweep, measure hits, channel.response = shadowed, particles",
                  particle_time_step="automatic: min(l^2/(100 D), Ts/200), adaptive multiples far from surfaces "
                                     "(capacity.physics.particles.simulate_hits, time_step=None)",
                  shadowed_settings="capacity.channel_response, model shadowed (defaults of "
                                    "capacity.physics.shadowed.shadowed_hits)",
                  layouts_micrometres=record_layouts)
    (out / "record.json").write_text(json.dumps(record, indent=2))
    return dict(rows=rows, summary=summary)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fast smoke run (few particles, short memory)")
    parser.add_argument("--particles", type=int, default=None, help="molecules per emitter")
    parser.add_argument("--memory", type=int, default=None, help="lags kept, L")
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--workers", type=int, default=None, help="local worker processes (default: one per core)")
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parents[1] / "results" / "validation")
    args = parser.parse_args(argv)
    particles = args.particles or (500 if args.quick else 100_000)
    memory = args.memory if args.memory is not None else (3 if args.quick else 12)
    layouts = dict(list(LAYOUTS.items())[:2]) if args.quick else LAYOUTS
    run(args.out, particles, memory, args.seed, layouts, args.workers)


if __name__ == "__main__":
    main()
