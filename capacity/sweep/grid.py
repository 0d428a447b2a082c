"""Grid axes from ``--vary`` text, the points of their product, point ids and per-point seeds.

``FIELD=LO:HI:N`` gives N values evenly spaced from LO to HI (``numpy.linspace``), ``FIELD=LO:HI:N:log`` N values
evenly spaced in the logarithm (``numpy.geomspace``), ``FIELD=v1,v2,...`` a list. Values take units as in
scenario files (``50ms:400ms:4:log``, ``3um,5um``); a whole point is written ``x,y,z`` and points are separated
by ``;`` (``emitter[0].position=0um,0um,0um;5um,0um,0um``). Bad text raises :class:`InputError` naming the
option, before anything is computed or written.
"""

from __future__ import annotations

import dataclasses
import hashlib
import itertools
import json
import math
from typing import NamedTuple

import numpy as np

from capacity.errors import InputError
from capacity.sweep.fields import NUMERIC, VECTORS, Field, parse_field, set_value
from capacity.units import DIMENSIONS, to_si

#: a grid larger than this needs ``force=True`` (``--force``)
MAX_POINTS = 100_000
#: bump when the meaning of a point's numbers changes, so old stores are not mistaken for new ones
ID_VERSION = 1
#: scenario fields renamed since version 1 -> the name the ids were first computed with. A rename changes no
#: number, so the id record keeps the first name: stores written before the rename stay valid, and the seeds
#: (drawn from the ids) stay the same
_ID_NAMES = {"particle_count": "particles", "particle_step": "time_step"}
_WORDS_TRUE = {"true", "yes", "on", "1"}
_WORDS_FALSE = {"false", "no", "off", "0"}


class Axis(NamedTuple):
    """One grid axis: the field, its values (what is written into the scenario table) and how they were given.

    values : tuple of SI floats, ints, words, bools or (x, y, z) points. spacing : "linear", "log" or "list".
    """

    field: Field
    values: tuple
    spacing: str
    label: str

    @property
    def numeric(self) -> bool:
        """Every value a number (so the axis has a numeric coordinate)."""
        return all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in self.values)

    def coordinate(self, value):
        """The value as a dataset coordinate / CSV cell: a float for numbers, text otherwise."""
        if isinstance(value, tuple):
            return " ".join(repr(float(c)) for c in value)
        if isinstance(value, bool):
            return "true" if value else "false"
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
        return str(value)


def _fail(text: str, problem: str, fix: str, option: str):
    raise InputError(option, text, problem, fix)


def _scalar(item: str, kind: str, text: str, option: str):
    """One list item or range end as the value the loader expects."""
    item = item.strip()
    if not item:
        _fail(text, "has an empty value", "separate values with single commas, e.g. 3um,5um", option)
    if kind in DIMENSIONS:
        try:
            number = float(item)  # a bare number on the command line is SI, as in scenario files
        except ValueError:
            number = None
        try:
            return to_si(item if number is None else number, kind, option)
        except InputError as exc:
            _fail(text, f"{item!r} is not {kind} ({exc.problem})", exc.fix or "give a value with units", option)
    if kind in ("number", "int", "memory"):
        if kind == "memory" and item == "auto":
            return "auto"
        try:
            number = float(item)
        except ValueError:
            _fail(text, f"{item!r} is not a number", "give plain numbers, e.g. 0.01,0.02", option)
        if not math.isfinite(number):
            _fail(text, f"{item!r} is not finite", "give finite numbers", option)
        if kind == "number":
            return number
        if number != math.floor(number):
            _fail(text, f"{item!r} is not a whole number", "give whole numbers, e.g. 2,3,4", option)
        return int(number)
    if kind == "bool":
        if item.lower() in _WORDS_TRUE:
            return True
        if item.lower() in _WORDS_FALSE:
            return False
        _fail(text, f"{item!r} is not true or false", "give true,false", option)
    if kind == "emitter":
        return int(item) if item.isdigit() else item
    return item  # a word: the loader checks it against its options


def _point(item: str, text: str, option: str, kind: str = "length") -> tuple:
    """One vector x,y,z (points: three lengths; flows: three velocities; wall normals: three numbers)."""
    parts = item.split(",")
    if len(parts) != 3:
        _fail(text, f"{item!r} is not a vector x,y,z", "write vectors as x,y,z separated by ';', e.g. "
              "0um,0um,0um;5um,0um,0um (or vary one component: position[0], flow[0])", option)
    return tuple(_scalar(p, kind, text, option) for p in parts)


def _range(spec: str, kind: str, text: str, option: str) -> tuple[tuple, str]:
    parts = spec.split(":")
    if len(parts) not in (3, 4) or (len(parts) == 4 and parts[3].strip().lower() not in ("log", "lin", "linear")):
        _fail(text, "is not LO:HI:N or LO:HI:N:log", "write e.g. 50ms:400ms:4:log", option)
    if kind == "memory":
        kind = "int"
    if kind not in NUMERIC:
        _fail(text, "a range needs a numeric field", "list the values instead, e.g. a,b,c", option)
    lo = _scalar(parts[0], "number" if kind == "int" else kind, text, option)
    hi = _scalar(parts[1], "number" if kind == "int" else kind, text, option)
    try:
        n = int(parts[2])
    except ValueError:
        _fail(text, f"N = {parts[2]!r} is not a whole number", "write e.g. 50ms:400ms:4", option)
    log = len(parts) == 4 and parts[3].strip().lower() == "log"
    if n < 1:
        _fail(text, f"N = {n} points", "give N >= 1", option)
    if lo > hi:
        _fail(text, f"the range is reversed (LO = {lo:g} > HI = {hi:g})", "write the smaller end first", option)
    if lo == hi and n > 1:
        _fail(text, f"the range is empty (LO = HI = {lo:g}) but asks for {n} points", "widen the range, or give "
              "the single value", option)
    if n == 1 and lo != hi:
        _fail(text, "one point cannot span a range", "give N >= 2, or the single value", option)
    if log and lo <= 0:
        _fail(text, f"log spacing needs LO > 0 (got {lo:g})", "use linear spacing, or a positive LO", option)
    values = np.geomspace(lo, hi, n) if log else np.linspace(lo, hi, n)
    if kind == "int":
        if not np.all(values == np.round(values)):
            _fail(text, "these integer values are not whole numbers", "choose LO, HI and N so that the steps are "
                  "whole, or list the values", option)
        return tuple(int(v) for v in values), "log" if log else "linear"
    return tuple(float(v) for v in values), "log" if log else "linear"


def parse_axis(text: str, option: str = "--vary") -> Axis:
    """``FIELD=LO:HI:N[:log]`` or ``FIELD=v1,v2,...`` -> :class:`Axis` (label = the field's leaf)."""
    if "=" not in text:
        _fail(text, "has no '='", "write FIELD=LO:HI:N[:log] or FIELD=v1,v2,...", option)
    path, spec = text.split("=", 1)
    field = parse_field(path, option)
    spec = spec.strip()
    if not spec:
        _fail(text, "gives no values", "write FIELD=LO:HI:N[:log] or FIELD=v1,v2,...", option)
    kind = field.kind
    if ":" in spec:
        values, spacing = _range(spec, kind, text, option)
    elif kind in VECTORS:
        values, spacing = tuple(_point(p, text, option, VECTORS[kind]) for p in spec.split(";")), "list"
    else:
        values, spacing = tuple(_scalar(v, kind, text, option) for v in spec.split(",")), "list"
    if len(set(values)) != len(values):
        _fail(text, "lists a value twice", "give each value once", option)
    return Axis(field, values, spacing, field.leaf)


def check_axes(axes: list[Axis], *, force: bool = False, option: str = "--vary") -> list[Axis]:
    """One axis per field, distinct column labels (``receiver0_radius`` when two leaves clash), size limit."""
    seen = {}
    for ax in axes:
        if ax.field.path in seen:
            _fail(ax.field.path, "is varied twice", "give each field once", option)
        seen[ax.field.path] = ax
    leaves = [ax.field.leaf for ax in axes]
    out = [ax._replace(label=ax.field.leaf if leaves.count(ax.field.leaf) == 1 else
                       f"{ax.field.owner}_{ax.field.leaf}") for ax in axes]
    if not out:
        _fail("", "no field is varied", "give at least one --vary FIELD=... (or a [sweep] table)", option)
    size = math.prod(len(ax.values) for ax in out)
    if size > MAX_POINTS and not force:
        _fail(" x ".join(str(len(ax.values)) for ax in out), f"the grid has {size} points, more than "
              f"{MAX_POINTS}", "use fewer values, or add --force if you mean it", option)
    return out


class Point(NamedTuple):
    """One grid point: its index along every axis, its values, its scenario and its id and seed."""

    index: tuple[int, ...]
    values: tuple
    scenario: object
    point_id: str
    seed: int


def grid_points(data: dict, axes: list[Axis], *, measure: str, settings: dict, base_seed: int,
                source: str = "scenario", option: str = "--vary") -> list[Point]:
    """Every point of the product of ``axes`` (first axis slowest), each scenario validated by the loader.

    data : the scenario file's table (as read by ``tomllib``, without its ``[sweep]`` table). A point the loader
    refuses raises :class:`InputError` naming ``option`` and the point's values, before anything is written.
    """
    from capacity.scenario.load import scenario_from_dict

    points = []
    for index in itertools.product(*(range(len(ax.values)) for ax in axes)):
        values = tuple(ax.values[k] for ax, k in zip(axes, index, strict=True))
        table = data
        for ax, v in zip(axes, values, strict=True):
            table = set_value(table, ax.field, list(v) if isinstance(v, tuple) else v, option)
        try:
            scenario = scenario_from_dict(table, source=source)
        except InputError as exc:
            where = ", ".join(f"{ax.field.path}={ax.coordinate(v)}" for ax, v in zip(axes, values, strict=True))
            raise InputError(option, where, f"gives an invalid scenario: {exc.field} = {exc.value!r}: {exc.problem}",
                             (exc.fix + "; or " if exc.fix else "") + "narrow the grid so that every point is "
                             "valid") from None
        pid = point_id(scenario, measure, settings)
        points.append(Point(index, values, scenario, pid, point_seed(base_seed, pid)))
    return points


def point_id(scenario, measure: str, settings: dict) -> str:
    """16 hex digits of SHA-256 over the validated scenario (SI numbers), the measure and its settings.

    Equal scenarios give equal ids however their values were written (``"50 ms"`` or ``0.05``)."""
    fields = dataclasses.asdict(scenario)
    fields["channel"] = {_ID_NAMES.get(k, k): v for k, v in fields["channel"].items()}
    record = {"version": ID_VERSION, "scenario": fields, "measure": measure, "settings": settings}
    text = json.dumps(record, sort_keys=True, separators=(",", ":"), allow_nan=True)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def point_seed(base_seed: int, pid: str) -> int:
    """Seed of one point from the base seed and its id: independent of workers and of the order of completion.

    Below 2**31 - 1024, so that the estimators' ``seed + k`` offsets stay within 32-bit seeds."""
    digest = hashlib.sha256(f"{int(base_seed)}:{pid}".encode()).hexdigest()
    return int(digest[:12], 16) % (2**31 - 1024)
