"""The finished sweep as a labelled N-D dataset (``sweep.nc``), its best points and its JSON record."""

from __future__ import annotations

import datetime
import json
import math
import platform
import sys
from importlib import metadata
from pathlib import Path

import numpy as np

from capacity.sweep.fields import UNITS
from capacity.sweep.measures import unit_of

#: how axis values are shown in plots: kind -> (factor from SI, unit)
DISPLAY = {"length": (1e6, "um"), "time": (1e3, "ms"), "diffusion": (1e12, "um^2/s"), "velocity": (1e6, "um/s")}


def versions() -> dict:
    out = {"python": sys.version.split()[0], "platform": platform.platform()}
    for pkg in ("capacity", "numpy", "scipy", "jax", "jaxlib", "dask", "distributed", "xarray", "matplotlib"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = None
    return out


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def build_dataset(spec, points, rows: dict, outputs: list[str]):
    """xarray.Dataset over the grid axes (dims = column labels, coords in SI or text); one variable per output
    plus ``seconds``, ``seed`` and ``point_id``; NaN (or "") where a point has no finished row."""
    import xarray as xr

    axes = spec.axes
    shape = tuple(len(ax.values) for ax in axes)
    dims = [ax.label for ax in axes]
    coords = {}
    for ax in axes:
        values = [ax.coordinate(v) for v in ax.values]
        coords[ax.label] = (ax.label, np.asarray(values, dtype=float if ax.numeric else str),
                            {"field": ax.field.path, "units": UNITS.get(ax.field.kind, ""), "spacing": ax.spacing})
    data_vars = {}
    for name in [*outputs, "seconds", "cpu_seconds", "seed"]:
        cells = [rows.get(p.point_id, {}).get(name, "") for p in points]
        numeric = all(_is_number(c) or c in ("", "nan") for c in cells)
        if numeric:
            arr = np.array([float(c) if _is_number(c) else np.nan for c in cells], dtype=float).reshape(shape)
        else:
            arr = np.array([str(c) for c in cells], dtype=str).reshape(shape)
        data_vars[name] = (dims, arr, {"units": unit_of(name)} if numeric else {})
    ids = np.array([p.point_id for p in points], dtype=str).reshape(shape)
    data_vars["point_id"] = (dims, ids, {})
    attrs = {"scenario": spec.source, "measure": spec.measure, "base_seed": spec.base_seed}
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def write_dataset(ds, path) -> None:
    """NetCDF 3 through scipy (no extra library); text variables become character arrays."""
    ds.to_netcdf(path, engine="scipy")


def best_points(spec, points, rows: dict, merits: list[str]) -> dict:
    """For each figure of merit (larger is better): its largest value over the finished points and where."""
    out = {}
    for name in merits:
        best = None
        for p in points:
            v = rows.get(p.point_id, {}).get(name)
            if _is_number(v) and math.isfinite(v) and (best is None or v > best[0]):
                best = (float(v), p)
        if best is None:
            continue
        value, p = best
        entry = {"value": value, "units": unit_of(name), "point_id": p.point_id}
        entry.update({ax.label: ax.coordinate(v) for ax, v in zip(spec.axes, p.values, strict=True)})
        if name in ("information_rate", "bits_per_second") and _is_number(rows[p.point_id].get("stderr")):
            scale = 1.0 if name == "information_rate" else value / rows[p.point_id]["information_rate"]
            entry["stderr"] = rows[p.point_id]["stderr"] * scale
        out[name] = entry
    return out


_RUN_KEYS = ("written", "points_computed", "points_skipped", "points_failed", "wall_seconds", "cluster")


def run_history(path, new: dict) -> list[dict]:
    """Every run of the sweep in this folder, oldest first: the ``runs`` of the previous ``sweep.json`` (or its
    top-level counts, for a record written before runs were listed) and then ``new``'s counts. A re-run that
    finds every point finished adds a run with nothing computed instead of erasing how the points were made."""
    previous = []
    try:
        old = json.loads(Path(path).read_text())
        previous = old["runs"] if isinstance(old.get("runs"), list) else [{k: old.get(k) for k in _RUN_KEYS}]
    except (OSError, ValueError, AttributeError, KeyError):
        previous = []
    return [*previous, {k: new.get(k) for k in _RUN_KEYS}]


def record(spec, points, rows: dict, *, computed: int, skipped: int, failures: list, best: dict, wall: float,
           cluster: str, files: list[str]) -> dict:
    """The JSON record ``sweep.json``: versions, settings, axes, seeds, per-point seconds, counts, wall time."""
    per_point = []
    for p in points:
        row = rows.get(p.point_id)
        per_point.append({"point_id": p.point_id, "index": list(p.index), "seed": p.seed,
                          "values": {ax.label: ax.coordinate(v) for ax, v in zip(spec.axes, p.values, strict=True)},
                          "status": "done" if row else "failed",
                          "seconds": row.get("seconds") if row else None})
    seconds = [r["seconds"] for r in per_point if _is_number(r["seconds"])]
    cpu = [rows[p.point_id]["cpu_seconds"] for p in points if _is_number(rows.get(p.point_id, {}).get("cpu_seconds"))]
    return {
        "written": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "versions": versions(),
        "scenario": spec.source,
        "measure": spec.measure,
        "settings": spec.settings,
        "base_seed": spec.base_seed,
        "seed_rule": "seed = int(sha256(f'{base_seed}:{point_id}')[:12 hex], 16) mod (2**31 - 1024)",
        "axes": [{"field": ax.field.path, "label": ax.label, "spacing": ax.spacing,
                  "units": UNITS.get(ax.field.kind, ""), "values": [ax.coordinate(v) for v in ax.values]}
                 for ax in spec.axes],
        "points_total": len(points), "points_computed": computed, "points_skipped": skipped,
        "points_failed": len(failures), "failed": failures, "best": best,
        "wall_seconds": round(wall, 3), "point_seconds_total": round(float(sum(seconds)), 3),
        "point_cpu_seconds_total": round(float(sum(cpu)), 3),
        "cluster": cluster, "files": files, "points": per_point,
    }
