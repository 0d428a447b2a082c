"""Scenario fields a sweep can vary: dotted paths, the kind of value each takes, and how to set one.

A path names one entry of a scenario file: ``channel.symbol_interval``, ``signalling.budget``,
``medium.diffusion``, ``receiver[1].radius``, ``emitter[0].position`` (a whole point), ``receiver[0].centre[0]``
(one coordinate: 0 = x, 1 = y, 2 = z) or ``receiver[*].radius`` (every receiver at once). Vectors other than
points: ``medium.flow`` (a velocity, ``medium.flow[0]`` its x component) and ``wall[0].normal`` (a direction,
plain numbers); ``wall[1].point[2]`` moves a wall along z. Values are written into
the scenario's TOML table, which the project's own loader then validates, so a value the loader refuses gives
its usual message.
"""

from __future__ import annotations

import copy
import re
from typing import NamedTuple

from capacity.errors import InputError

#: (table, key) -> kind of value. Kinds: a dimension of :mod:`capacity.units` (SI number), "number" (plain
#: float), "int", "memory" (int or "auto"), "word" (an option name, checked by the loader), "bool", "emitter"
#: (index or name), "point" (three lengths), "velocity_vector" (three velocities), "direction" (three numbers).
KINDS: dict[tuple[str, str], str] = {
    ("medium", "diffusion"): "diffusion",
    ("medium", "degradation"): "rate",
    ("medium", "flow"): "velocity_vector",
    ("emitter", "position"): "point",
    ("emitter", "pulse"): "time",
    ("receiver", "centre"): "point",
    ("receiver", "radius"): "length",
    ("receiver", "kind"): "word",
    ("receiver", "sample_offset"): "time",
    ("receiver", "reaction_rate"): "velocity",
    ("channel", "symbol_interval"): "time",
    ("channel", "memory"): "memory",
    ("channel", "memory_tolerance"): "number",
    ("channel", "background"): "count",
    ("channel", "counting"): "word",
    ("channel", "residual"): "word",
    ("channel", "response"): "word",
    ("channel", "particle_count"): "int",
    ("channel", "particle_step"): "time",
    ("channel", "seed"): "int",
    ("signalling", "scheme"): "word",
    ("signalling", "levels"): "int",
    ("signalling", "peak"): "count",
    ("signalling", "budget"): "count",
    ("signalling", "emitter"): "emitter",
    ("signalling", "silent"): "bool",
    ("wall", "point"): "point",
    ("wall", "normal"): "direction",
    ("wall", "kind"): "word",
}
#: vector kinds -> the kind of one component (``[0]``, ``[1]``, ``[2]``)
VECTORS = {"point": "length", "velocity_vector": "velocity", "direction": "number"}
#: a vector the loader defaults when the file leaves it out, so that one component can still be varied
_DEFAULT_VECTORS = {("medium", "flow"): [0.0, 0.0, 0.0]}

#: SI unit of each numeric kind, for labels and dataset attributes
UNITS = {"length": "m", "time": "s", "diffusion": "m^2/s", "rate": "1/s", "count": "molecules", "number": "1",
         "int": "1", "memory": "lags", "velocity": "m/s"}
NUMERIC = ("length", "time", "diffusion", "rate", "count", "number", "int", "velocity")
_AXES = "xyz"

_SECTION = re.compile(r"^(medium|channel|signalling)\.([a-z_]+)(?:\[(\d+)\])?$")
_ITEM = re.compile(r"^(emitter|receiver|wall)\[(\d+|\*)\]\.([a-z_]+)(?:\[(\d+)\])?$")


class Field(NamedTuple):
    """One parsed path. ``index`` is an int, ``"*"`` (every item) or None (a section key); ``component`` picks
    one coordinate of a point (0, 1, 2) or is None."""

    path: str
    table: str
    index: int | str | None
    key: str
    component: int | None

    @property
    def kind(self) -> str:
        if self.component is not None:
            return VECTORS[KINDS[(self.table, self.key)]]
        return KINDS[(self.table, self.key)]

    @property
    def leaf(self) -> str:
        """Last path element, used as the column name: ``radius``, ``symbol_interval``, ``centre_x``."""
        return self.key if self.component is None else f"{self.key}_{_AXES[self.component]}"

    @property
    def owner(self) -> str:
        """Prefix that tells two fields with the same leaf apart: ``receiver1``, ``receivers``, ``channel``."""
        if self.index is None:
            return self.table
        return f"{self.table}s" if self.index == "*" else f"{self.table}{self.index}"


def known_paths() -> list[str]:
    """Every path pattern a sweep accepts (for suggestions and help)."""
    out = []
    for (table, key), kind in KINDS.items():
        if table in ("emitter", "receiver", "wall"):
            out.append(f"{table}[0].{key}")
            if kind in VECTORS:
                out.append(f"{table}[0].{key}[0]")
        else:
            out.append(f"{table}.{key}")
            if kind in VECTORS:
                out.append(f"{table}.{key}[0]")
    return out


def parse_field(path: str, option: str = "--vary") -> Field:
    """Parse a dotted path; an unknown one raises :class:`InputError` naming ``option`` with the nearest path.

    The old names of renamed keys (``channel.particles``, ``channel.time_step``:
    :data:`capacity.scenario.load.RENAMED`) are refused with the new path as the fix: scenario files keep being
    read under the old names for a while, but a grid axis is named afresh each run, and its name becomes a column
    of the sweep's files."""
    text = path.strip()
    m = _SECTION.match(text)
    if m and (m.group(1), m.group(2)) in KINDS:
        return Field(text, m.group(1), None, m.group(2), _component(m.group(1), m.group(2), m.group(3), path,
                                                                   option))
    m = _ITEM.match(text)
    if m and (m.group(1), m.group(3)) in KINDS:
        table, index, key, comp = m.group(1), m.group(2), m.group(3), m.group(4)
        index = index if index == "*" else int(index)
        return Field(text, table, index, key, _component(table, key, comp, path, option))
    from capacity.scenario.load import RENAMED, _nearest

    for (table, old), new in RENAMED.items():
        if text == f"{table}.{old}":
            raise InputError(option, path, f"{table}.{old} was renamed {table}.{new}",
                             f"vary {table}.{new} instead (same meaning and units)")
    generic = re.sub(r"\[(\d+|\*)\]", "[0]", text)
    close = _nearest(generic, known_paths(), cutoff=0.5)
    hint = f'did you mean "{close}"? ' if close else ""
    raise InputError(option, path, "is not a scenario field a sweep can vary",
                     hint + "fields: " + ", ".join(known_paths()) + " ([*] = every emitter/receiver)")


def _component(table: str, key: str, comp: str | None, path: str, option: str) -> int | None:
    """The ``[k]`` of a path as an int, checked: only vectors have components, and only 0, 1, 2."""
    if comp is None:
        return None
    if KINDS[(table, key)] not in VECTORS or int(comp) > 2:
        vectors = ", ".join(f"{t}.{k}" for (t, k), kind in KINDS.items() if kind in VECTORS)
        raise InputError(option, path, f"[{comp}] picks a component, but {table}.{key} is not a vector or the "
                         "index is above 2", f"give [0], [1] or [2] (x, y, z) after a vector field: {vectors}")
    return int(comp)


def _set_component(holder: dict, field: Field, value, where: str, option: str) -> None:
    """Set one component of the vector ``holder[field.key]`` (the loader's default vector when it is left out)."""
    vector = holder.get(field.key, _DEFAULT_VECTORS.get((field.table, field.key)))
    if not isinstance(vector, list) or len(vector) != 3:
        raise InputError(option, field.path, f"{where}.{field.key} is not a vector [x, y, z] in the scenario",
                         "fix the scenario file, or vary the whole vector")
    vector = list(vector)
    vector[field.component] = value
    holder[field.key] = vector


def set_value(data: dict, field: Field, value, option: str = "--vary") -> dict:
    """A deep copy of the scenario table ``data`` with ``field`` set to ``value`` (SI number, word, point...)."""
    out = copy.deepcopy(data)
    if field.index is None:
        section = out.setdefault(field.table, {})
        if not isinstance(section, dict):
            raise InputError(option, field.path, f"[{field.table}] is not a table in the scenario", "fix the file")
        if field.component is None:
            section[field.key] = value
        else:
            _set_component(section, field, value, field.table, option)
        return out
    items = out.get(field.table)
    if not isinstance(items, list) or not items:
        raise InputError(option, field.path, f"the scenario has no [[{field.table}]] tables", "fix the file")
    if field.index == "*":
        chosen = range(len(items))
    elif field.index >= len(items):
        raise InputError(option, field.path, f"the scenario has {len(items)} {field.table}s (indices 0 to "
                         f"{len(items) - 1})", f"use an index below {len(items)}, or [*] for all")
    else:
        chosen = [field.index]
    for k in chosen:
        item = items[k]
        if field.component is None:
            item[field.key] = value
        else:
            _set_component(item, field, value, f"{field.table}[{k}]", option)
    return out
