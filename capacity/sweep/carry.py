"""Curves along a budget that carry each input law to the larger budgets: a second pass after a ``rate`` sweep.

The alphabet of a scheme does not depend on the budget (a mean-cost limit on the input law), so a law that meets
budget B' meets every B > B', and the best rate at B is at least the rate of any law found at a smaller budget:
the capacity-cost function of a fixed channel is non-decreasing in the cost (McEliece, *The Theory of Information
and Coding*, 2002, ch. 3; Cover & Thomas, *Elements of Information Theory*, 2006, sec. 9.1 for the Gaussian case),
and so is the best i.i.d. rate with ISI. A sweep computes every budget on its own, and the law search at a larger
budget can land on a worse law than one found below it (it never sees that law), so its curve can fall.

:func:`carry_laws` walks every line of the grid along one axis (``signalling.budget``) upward. Where a point's
estimate is below the best estimate at a smaller value on its line, the point is evaluated again, in full, with
that point's input law (the measure's ``input_law_probabilities``) added to its candidates under a name such as
"carried from budget 39.7"; :func:`capacity.link_rates` chooses among it, the ISI-free optimum and the law it
optimises itself by the windowed bound on common random numbers, as always. The evaluation is a point of its own:
its id hashes the scenario, the measure and the settings with the carried law (:func:`~capacity.sweep.grid.
point_id`), its seed comes from that id (random numbers independent of the first evaluation's), and it is stored
in ``points.csv`` of its own folder as it finishes: a killed run loses no finished point and a re-run recomputes
nothing. A re-evaluation that lifts a point can lift the best below later points, so the walk repeats in rounds
until no point is below the best below it without having been given that law.

Each point's reported row is the larger estimate among its evaluations. Taking the larger of noisy estimates
favours the luckier one: the reported value is biased upward by at most about one standard error of the point
(each row keeps its own standard error, and the record names the evaluation it comes from). Nothing is copied
forward: a point that stays below the best below it after it was given that law is reported as computed, and
:func:`drops` measures what is left in combined standard errors.
"""

from __future__ import annotations

import json
import math
import sys
from contextlib import ExitStack

from capacity.errors import InputError
from capacity.sweep.grid import Point, point_id, point_seed
from capacity.sweep.measures import ADDED_OUTPUTS, evaluate
from capacity.sweep.store import Store, _cell

LAW = "input_law_probabilities"


def carry_laws(spec, first, out, *, along: str = "signalling.budget", workers: int | None = None,
               scheduler: str | None = None, cache_dir: str | None = "default", log=None) -> dict:
    """Second pass over a finished ``rate`` sweep of ``spec`` (its points in ``first``), into the folder ``out``.

    along : the field path of the axis whose larger values can use every law of the smaller ones (the budget).
    workers, scheduler, cache_dir, log : as :func:`capacity.sweep.run_sweep`.

    Returns {"rows": {first point id: reported row}, "points_computed", "points_skipped" (carried evaluations of
    this grid already stored when the call began), "points_failed", "failed", "rounds", "out"}. Each reported row
    is the stored row of the evaluation with the largest ``information_rate`` plus ``first_point`` (the id of the
    sweep's own point), ``first_rate``, ``first_stderr`` (that point's first estimate), ``evaluations`` (how
    many) and ``carried_from`` (the ``along`` value of the law this evaluation was given, NaN for the first
    evaluation).
    """
    from capacity.sweep.engine import open_cluster, run_points
    from capacity.sweep.run import default_cache, plan

    log = log or (lambda text: print(text, file=sys.stderr))
    if spec.measure != "rate":
        raise InputError("measure", spec.measure, "carrying input laws needs the rate measure (it records the law "
                         "of each point)", "sweep with measure = \"rate\"")
    k = _axis(spec, along)
    cache = default_cache() if cache_dir == "default" else cache_dir
    points, outputs = plan(spec)
    labels = [ax.label for ax in spec.axes]
    done = Store(first, labels, outputs, ADDED_OUTPUTS).finished()
    store = Store(out, [*labels, "carried_from"], outputs, ADDED_OUTPUTS)
    lines = _lines(points, k)
    by_key = {_key(spec, p): p for p in points}
    skipped = sum(len(v) - 1 for v in _evaluations(points, done, store, spec, by_key, k).values())
    failed, tried, computed = [], set(), 0
    settings_of = {}  # carried point id -> (its settings, the value the law was found at)
    rounds = 0
    client = None
    with ExitStack() as stack:
        stack.callback(store.close)
        while True:
            evals = _evaluations(points, done, store, spec, by_key, k)
            todo = []
            for line in lines:
                for p, best, _ in _walk(line, evals):
                    if best is None:
                        continue
                    law = best.get(LAW)
                    if not isinstance(law, str) or not law.startswith("["):
                        raise InputError("--out", str(first), f"the point at {along} = {best['_along']:g} has no "
                                         f"recorded input law ({LAW}: written by an older version)",
                                         "move that sweep's folder away and run the study again to recompute it")
                    cp, settings = _carried_point(spec, p, json.loads(law), along, best["_along"])
                    if cp.point_id in tried or any(r["point_id"] == cp.point_id for r in evals[p.point_id]):
                        continue
                    todo.append(cp)
                    settings_of[cp.point_id] = (settings, best["_along"])
                    tried.add(cp.point_id)
            if not todo:
                break
            rounds += 1
            log(f"carrying laws to larger {spec.axes[k].label}s, round {rounds}: {len(todo)} points")
            if rounds == 1:
                client = stack.enter_context(open_cluster(workers, scheduler))

            def call(p):
                return evaluate, (p.scenario, spec.measure, settings_of[p.point_id][0], p.seed, cache)

            def on_done(p, result):
                nonlocal computed
                coords = {ax.label: ax.coordinate(v) for ax, v in zip(spec.axes, p.values, strict=True)}
                coords["carried_from"] = settings_of[p.point_id][1]
                if result["ok"]:
                    store.add_point(p.point_id, coords, result["outputs"], p.seed, result["seconds"],
                                    result["cpu_seconds"])
                    computed += 1
                else:
                    store.add_failure(p.point_id, coords, result["error"], result["seconds"])
                    failed.append({"point_id": p.point_id, "values": coords, "error": result["error"]})

            run_points(client, todo, call, on_done)
    evals = _evaluations(points, done, store, spec, by_key, k)
    rows = {}
    for line in lines:
        for p, _, top in _walk(line, evals):
            first_row = evals[p.point_id][0]
            rows[p.point_id] = {**{c: v for c, v in top.items() if not c.startswith("_")},
                                "first_point": p.point_id, "first_rate": first_row["information_rate"],
                                "first_stderr": first_row["stderr"], "evaluations": len(evals[p.point_id]),
                                "carried_from": top.get("carried_from", math.nan)}
    return {"rows": rows, "points_computed": computed, "points_skipped": skipped,
            "points_failed": len(failed), "failed": failed, "rounds": rounds, "out": str(out)}


def drops(values, stderrs) -> dict:
    """The largest fall of a curve below its best value at a smaller abscissa, in combined standard errors:
    {"drop" (bits), "sigmas", "at" (index of the lower point), "below" (index of the higher one)}; sigmas 0 when
    the curve never falls."""
    worst = {"drop": 0.0, "sigmas": 0.0, "at": None, "below": None}
    best = None
    for i, (v, s) in enumerate(zip(values, stderrs, strict=True)):
        if not math.isfinite(v):
            continue
        if best is not None and v < values[best]:
            se = math.hypot(s, stderrs[best])
            sig = (values[best] - v) / se if se > 0 else math.inf
            if sig > worst["sigmas"]:
                worst = {"drop": values[best] - v, "sigmas": sig, "at": i, "below": best}
        if best is None or v > values[best]:
            best = i
    return worst


def _axis(spec, along: str) -> int:
    for k, ax in enumerate(spec.axes):
        if ax.field.path == along:
            if not ax.numeric:
                raise InputError("along", along, "is not a numeric axis", "carry along a numeric field")
            return k
    raise InputError("along", along, "is not an axis of the sweep",
                     "vary it, or choose one of " + ", ".join(ax.field.path for ax in spec.axes))


def _lines(points, k: int) -> list[list[Point]]:
    """Points grouped by their values on every other axis, each group sorted by the value on axis ``k``."""
    groups = {}
    for p in points:
        groups.setdefault(p.index[:k] + p.index[k + 1:], []).append(p)
    return [sorted(g, key=lambda p: p.values[k]) for g in groups.values()]


def _key(spec, p) -> tuple:
    """A point's coordinates as stored (text cells), to match carried rows to their grid point."""
    return tuple(_cell(ax.coordinate(v)) for ax, v in zip(spec.axes, p.values, strict=True))


def _evaluations(points, done: dict, store, spec, by_key, k: int) -> dict:
    """point id -> [its sweep row, then its carried rows], each with ``_along`` (the point's value on axis
    ``k``); points without a finished first row are left out."""
    out = {}
    for p in points:
        if p.point_id in done:
            out[p.point_id] = [{**done[p.point_id], "_along": float(p.values[k])}]
    parsed = store.finished()
    for raw in store.points.rows:
        p = by_key.get(tuple(raw[ax.label] for ax in spec.axes))
        if p is not None and p.point_id in out:
            out[p.point_id].append({**parsed[raw["point_id"]], "_along": float(p.values[k])})
    return out


def _carried_point(spec, p, law: list, along: str, source: float):
    """The point ``p`` with ``law`` (found at ``along`` = ``source``) among its candidates: (Point, settings)."""
    label = along.rsplit(".", 1)[-1]
    settings = {**spec.settings, "candidate_laws": {f"carried from {label} {source:.3g}": [float(v) for v in law]}}
    pid = point_id(p.scenario, spec.measure, settings)
    return Point(p.index, p.values, p.scenario, pid, point_seed(spec.base_seed, pid)), settings


def _walk(line, evals):
    """(point, best row at a smaller value or None, the point's best row), upward along one line, for each point
    whose best row is below the best below it (``best``) or the reported row of every point (``top``)."""
    best = None
    for p in line:
        rows = evals.get(p.point_id)
        if not rows:
            continue
        top = max(rows, key=lambda r: r["information_rate"])
        below = best is not None and top["information_rate"] < best["information_rate"]
        yield p, (best if below else None), top
        if not below:
            best = top
