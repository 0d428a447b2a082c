"""Provenance record written beside every study's outputs: versions, settings, seeds, timings."""

from __future__ import annotations

import datetime
import json
import platform
import sys
from importlib import metadata
from pathlib import Path


def versions() -> dict:
    out = {"python": sys.version.split()[0], "platform": platform.platform()}
    for pkg in ("capacity", "numpy", "scipy", "jax", "jaxlib", "optax", "matplotlib"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = None
    return out


def write_record(folder: Path, name: str, settings: dict, results: dict, started: float, finished: float) -> Path:
    """Write ``folder/name.json`` with versions, settings, results and wall time."""
    from capacity.cli._common import to_jsonable

    record = {
        "study": name,
        "written": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "wall_seconds": round(finished - started, 2),
        "versions": versions(),
        "settings": settings,
        "results": results,
    }
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{name}.json"
    path.write_text(json.dumps(to_jsonable(record), indent=2) + "\n")
    return path
