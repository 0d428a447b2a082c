"""``run_sweep``: points of a :class:`SweepSpec` computed (skipping finished ones), stored as they finish, then
the dataset, the JSON record and the default plots written."""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

from capacity.sweep.engine import open_cluster, run_points
from capacity.sweep.grid import grid_points
from capacity.sweep.measures import ADDED_OUTPUTS, MEASURES, evaluate
from capacity.sweep.store import Store


def default_cache() -> str | None:
    """Folder of JAX's persistent compilation cache shared by the workers of one machine (as the command line:
    ``$CAPACITY_CACHE_DIR``, "off" for none, else ``$XDG_CACHE_HOME/capacity/jax`` or ``~/.cache/capacity/jax``).
    """
    where = os.environ.get("CAPACITY_CACHE_DIR")
    if where == "off":
        return None
    if where:
        return where
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "capacity", "jax")


def plan(spec):
    """(points, outputs) of a spec; raises InputError for a point the loader refuses."""
    points = grid_points(spec.data, list(spec.axes), measure=spec.measure, settings=spec.settings,
                         base_seed=spec.base_seed, source=spec.source)
    outputs = MEASURES[spec.measure].outputs(points[0].scenario, spec.settings)
    return points, outputs


def run_sweep(spec, out, *, workers: int | None = None, scheduler: str | None = None,
              cache_dir: str | None = "default", progress: bool = True, plots: bool = True, log=None) -> dict:
    """Compute every point of ``spec`` not yet in ``out/points.csv`` and write the sweep's files into ``out``.

    workers : local worker processes (default: one per core; 0 = in this process). scheduler : address of an
    existing Dask scheduler instead. cache_dir : JAX compilation cache for the workers ("default":
    :func:`default_cache`; None: none). progress : a bar with an ETA on stderr when it is a terminal. log :
    callable for one-line messages (default: stderr).

    Returns the summary: points_total, points_computed, points_skipped, points_failed, failed, best, out,
    seconds, files. Bad input raises :class:`InputError` before anything is written.
    """
    from capacity.sweep import results
    from capacity.sweep.plots import default_plots

    started = time.perf_counter()
    log = log or (lambda text: print(text, file=sys.stderr))
    cache = default_cache() if cache_dir == "default" else cache_dir
    out = Path(out)
    points, outputs = plan(spec)
    labels = [ax.label for ax in spec.axes]
    store = Store(out, labels, outputs, ADDED_OUTPUTS)
    finished = store.finished()
    todo = [p for p in points if p.point_id not in finished]
    skipped = len(points) - len(todo)
    if skipped:
        log(f"{skipped} of {len(points)} points already in {out / 'points.csv'}: skipped; computing {len(todo)}")
    failures = []
    cluster = "none (nothing to compute)"
    try:
        if todo:
            with open_cluster(workers, scheduler) as client:
                cluster = _describe(client, scheduler)
                out.mkdir(parents=True, exist_ok=True)
                bar = _bar(len(todo), progress)

                def call(p):
                    return evaluate, (p.scenario, spec.measure, spec.settings, p.seed, cache)

                def on_done(p, result):
                    coords = {ax.label: ax.coordinate(v) for ax, v in zip(spec.axes, p.values, strict=True)}
                    if result["ok"]:
                        store.add_point(p.point_id, coords, result["outputs"], p.seed, result["seconds"],
                                        result["cpu_seconds"])
                    else:
                        store.add_failure(p.point_id, coords, result["error"], result["seconds"])
                        failures.append({"point_id": p.point_id, "values": coords, "error": result["error"]})
                    if bar is not None:
                        bar.update(1)
                        bar.set_postfix_str(f"{len(failures)} failed" if failures else "")

                try:
                    run_points(client, todo, call, on_done)
                finally:
                    if bar is not None:
                        bar.close()
        else:
            out.mkdir(parents=True, exist_ok=True)
    finally:
        store.close()
    rows = store.finished()
    ds = results.build_dataset(spec, points, rows, outputs)
    results.write_dataset(ds, out / "sweep.nc")
    merits = MEASURES[spec.measure].merits(outputs)
    best = results.best_points(spec, points, rows, merits)
    files = ["points.csv", "sweep.nc", "sweep.json"] + (["failures.csv"] if (out / "failures.csv").exists() else [])
    if plots:
        files += [p.name for p in default_plots(ds, spec, MEASURES[spec.measure], outputs, out)]
    wall = time.perf_counter() - started
    record = results.record(spec, points, rows, computed=len(todo) - len(failures), skipped=skipped,
                            failures=failures, best=best, wall=wall, cluster=cluster, files=files)
    record["runs"] = results.run_history(out / "sweep.json", record)
    from capacity.cli._common import dump_json

    dump_json(record, out / "sweep.json")
    return {"points_total": len(points), "points_computed": len(todo) - len(failures), "points_skipped": skipped,
            "points_failed": len(failures), "failed": failures, "best": best, "out": str(out),
            "seconds": round(wall, 3), "files": files}


def _describe(client, scheduler) -> str:
    if client is None:
        return "in this process"
    n = len(client.scheduler_info().get("workers", {}))
    return f"{'scheduler ' + scheduler if scheduler else 'local cluster'}, {n} workers"


def _bar(total: int, progress: bool):
    if not progress or not sys.stderr.isatty():
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, desc="sweep", unit="point", file=sys.stderr, smoothing=0.1)
