"""Gradient design optimisation against a dense grid search of the same objective.

Two problems on a layout of our own (one emitter, one absorbing sphere of radius 5 um at a 5 um gap,
D = 1e-10 m^2/s, background 0.5 counts per slot, on-off keying with a 100-molecule peak):

1. ``symbol_interval`` alone, bits per second, envelope rate (Blahut–Arimoto re-solved at every point):
   grid of 400 log-spaced slot lengths in [10 ms, 1 s] (1.2 % apart).
2. ``symbol_interval`` and ``levels`` together, bits per second, ISI-as-noise rate: a 30 x 30 grid.

For each: evaluations and wall time of the optimiser (one start from the given design) and of the grid, their
ratios, and the relative difference of the best values (positive = the optimiser found more).
"""

from __future__ import annotations

import itertools
import time

import numpy as np

from capacity import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.design.objectives import Objective
from capacity.design.optimise import build_problem, optimise_design
from capacity.design.params import unconstrain


def _scenario():
    return Scenario("bench link", Medium(1e-10), (Emitter("e", (0.0, 0.0, 0.0)),),
                    (Receiver("r", (10e-6, 0.0, 0.0), 5e-6),),
                    Channel(0.2, memory=5, background=(0.5,), response="lone"), Signalling(levels=2, peak=100.0))


def _case(tune, rate, grid_points):
    sc = _scenario()
    t = time.perf_counter()
    res = optimise_design(sc, tune, "bits-per-second", rate=rate, starts=1, steps=60, progress=False,
                          do_polish=False)
    t_opt = time.perf_counter() - t
    problem = build_problem(sc, tune, "bits-per-second", rate=rate)
    obj = Objective(problem)
    # compile outside the timing
    obj.evaluate(unconstrain(problem.space, dict(zip(tune, grid_points[0], strict=True))))
    obj.evaluations = 0
    t = time.perf_counter()
    vals = [obj.evaluate(unconstrain(problem.space, dict(zip(tune, p, strict=True)))).value for p in grid_points]
    t_grid = time.perf_counter() - t
    k = int(np.argmax(vals))
    return {
        "tune": list(tune), "rate": rate,
        "optimiser_evaluations": res.evaluations, "optimiser_seconds": round(t_opt, 2),
        "optimiser_best": res.best, "optimiser_value_bits_per_second": res.value,
        "grid_evaluations": len(grid_points), "grid_seconds": round(t_grid, 2),
        "grid_best": [float(np.squeeze(v)) for v in grid_points[k]], "grid_value_bits_per_second": vals[k],
        "evaluation_ratio_grid_over_optimiser": len(grid_points) / res.evaluations,
        "relative_difference": (res.value - vals[k]) / vals[k],
        "converged": res.converged,
    }


def run() -> dict:
    ts = np.geomspace(0.01, 1.0, 400)
    one = _case(("symbol_interval",), "envelope", [(x,) for x in ts])
    ts2 = np.geomspace(0.02, 0.6, 30)
    lv = np.linspace(20.0, 99.0, 30)
    two = _case(("symbol_interval", "levels"), "isi-as-noise",
                [(x, np.array([a])) for x, a in itertools.product(ts2, lv)])
    return {"symbol_interval": one, "symbol_interval+levels": two,
            "note": "optimiser time includes compilation; grid time excludes it (compiled before timing)"}


if __name__ == "__main__":  # pragma: no cover
    import json

    print(json.dumps(run(), indent=2, default=str))
