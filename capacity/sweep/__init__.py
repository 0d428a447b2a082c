"""Sweeps over grids of designs: locally or on a Dask cluster, resumable, reproducible.

make_spec(scenario, vary, measure=..., settings=...) -> SweepSpec    (``capacity.sweep.spec``)
run_sweep(spec, out, workers=None, scheduler=None) -> summary dict  (``capacity.sweep.run``)
carry_laws(spec, first, out, along="signalling.budget") -> summary  (``capacity.sweep.carry``: a rate sweep's
    second pass, laws found at smaller budgets offered to the larger ones)
parse_axis("channel.symbol_interval=50ms:400ms:4:log") -> Axis       (``capacity.sweep.grid``)
point_id, point_seed, grid_points                                   (``capacity.sweep.grid``)
MEASURES: "rate", "compare", "response"                             (``capacity.sweep.measures``)

Nothing here imports JAX or Dask at import time; workers import what a point needs.
"""

from capacity.sweep.carry import carry_laws
from capacity.sweep.grid import Axis, grid_points, parse_axis, point_id, point_seed
from capacity.sweep.measures import MEASURES
from capacity.sweep.run import run_sweep
from capacity.sweep.spec import SweepSpec, make_spec

__all__ = ["MEASURES", "Axis", "SweepSpec", "carry_laws", "grid_points", "make_spec", "parse_axis", "point_id",
           "point_seed", "run_sweep"]
