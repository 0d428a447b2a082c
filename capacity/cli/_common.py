"""Helpers shared by the sub-command modules: loading, JSON writing, overrides."""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

SAFETY = (
    "Design-stage estimate only: not validated for clinical, biosafety or environmental-release decisions; "
    "defer those to local regulation and licensed practice."
)


def add_scenario_argument(parser) -> None:
    parser.add_argument(
        "scenario",
        metavar="SCENARIO",
        help="scenario file (TOML), or the word 'demo' for the built-in demo scenario",
    )


def demo_path() -> Path:
    """Path of the built-in demo scenario file."""
    from capacity.scenario.load import builtin_path

    return builtin_path("demo")


def load(path_or_demo: str):
    """Load a scenario file, or the built-in demo for the word ``demo`` (as :func:`capacity.load_scenario`)."""
    from capacity.scenario.load import load_scenario

    return load_scenario(path_or_demo)


def to_jsonable(obj):
    """Convert numpy/jax arrays and scalars (recursively) to plain JSON types; non-finite floats become None."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if hasattr(obj, "tolist") and not isinstance(obj, (str, bytes)):
        return to_jsonable(np.asarray(obj).tolist())
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    return obj


def dump_json(data, path: str | os.PathLike | None = None) -> str:
    text = json.dumps(to_jsonable(data), indent=2)
    if path is not None:
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        Path(path).write_text(text + "\n")
    return text


def fmt(x: float, digits: int = 4) -> str:
    """Compact number formatting for tables."""
    if x is None or not np.isfinite(x):
        return "-"
    if x == 0:
        return "0"
    if 1e-3 <= abs(x) < 1e5:
        return f"{x:.{digits}g}"
    return f"{x:.{max(digits - 1, 1)}e}"
