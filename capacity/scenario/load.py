"""Scenario files (TOML) and plain dictionaries turned into validated :class:`Scenario` objects in SI units.

File layout (every quantity a plain SI number or a string with units, e.g. ``"5 um"``)::

    name = "..."                                   # required
    [medium]      diffusion (required), degradation (1/s, default 0),
                  flow = [vx, vy, vz] (uniform flow velocity, m/s, default at rest)
    [[emitter]]   name, position = [x, y, z],      # one table per emitter, at least one
                  pulse (release duration, default 0 = impulse; e.g. "5 ms")
    [[receiver]]  name, centre = [x, y, z], radius, kind = "absorbing" | "passive" | "reactive",
                  sample_offset (passive only; default: the end of the slot),
                  reaction_rate (reactive only: surface reaction rate, m/s, e.g. "20 um/s")
    [channel]     symbol_interval (required), memory (int or "auto"), memory_tolerance, background,
                  counting, residual, response, particle_count, particle_step, seed
    [signalling]  scheme, levels, peak, budget, emitter (name or index), silent, amplitudes   # optional
    [[wall]]      point = [x, y, z], normal = [nx, ny, nz] (pointing into the fluid), kind = "reflecting"
                  # optional: none, one wall (a half space) or two parallel walls facing each other (a channel)

Unknown keys, wrong types and malformed units raise :class:`~capacity.errors.InputError` naming the entry
(``receiver[0].radius``), the value and a fix; unknown keys and option names come with the nearest valid one.
Value ranges and geometry are checked by :func:`capacity.scenario.validate.validate_scenario`.

Renamed keys (:data:`RENAMED`): ``channel.particles`` is now ``channel.particle_count`` (it clashed with
``response = "particles"``) and ``channel.time_step`` is now ``channel.particle_step``. Files with the old names
load to the same scenario, with one :class:`ScenarioKeyWarning` per old key (a deprecation note naming the key
and the fix); both names for one quantity is an :class:`InputError`. The command line prints these notes as
``note:`` lines and does not count them as scenario warnings (``--strict`` ignores them: they say nothing about
the physics).
"""

from __future__ import annotations

import difflib
import math
import numbers
import sys
import warnings
from os import PathLike

from capacity.errors import InputError
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario, Signalling, Wall
from capacity.scenario.validate import (
    COUNTING_LAWS,
    RECEIVER_KINDS,
    RESIDUAL_RULES,
    RESPONSE_MODELS,
    SCHEMES,
    WALL_KINDS,
    validate_scenario,
)
from capacity.units import to_si

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["RENAMED", "ScenarioKeyWarning", "load_scenario", "rename_deprecated_keys", "scenario_from_dict"]

# [sweep] is read by capacity.sweep (the grid a file carries); the scenario itself ignores it
_TOP = ("name", "medium", "emitter", "receiver", "channel", "signalling", "wall", "sweep")
_MEDIUM = ("diffusion", "degradation", "flow")
_EMITTER = ("name", "position", "pulse")
_WALL = ("point", "normal", "kind")
_RECEIVER = ("name", "centre", "radius", "kind", "sample_offset", "reaction_rate")
_CHANNEL = (
    "symbol_interval",
    "memory",
    "memory_tolerance",
    "background",
    "counting",
    "residual",
    "response",
    "particle_count",
    "particle_step",
    "seed",
)
_SIGNALLING = ("scheme", "levels", "peak", "budget", "emitter", "silent", "amplitudes")


#: deprecated scenario keys, (table, old key) -> new key; the old names are read for one more release
RENAMED = {("channel", "particles"): "particle_count", ("channel", "time_step"): "particle_step"}


class ScenarioKeyWarning(FutureWarning):
    """A scenario file uses a deprecated key name (:data:`RENAMED`); the message names the key and its new name.

    A ``FutureWarning`` because scenario files are written by the people running the tool, who should see it
    (Python shows it by default); the command line prints it as a ``note:`` line instead.
    """


def rename_deprecated_keys(data: dict, source: str = "<dict>") -> tuple[dict, list[str]]:
    """``data`` (a scenario table) with the deprecated keys of :data:`RENAMED` renamed, and one note per key.

    Returns ``data`` itself when nothing is renamed, otherwise a copy (the input is never changed). Raises
    :class:`InputError` when a table gives a quantity under both its old and its new name.
    """
    notes = []
    for (table, old), new in RENAMED.items():
        section = data.get(table)
        if not isinstance(section, dict) or old not in section:
            continue
        if new in section:
            raise InputError(f"{table}.{old}", section[old],
                             f"is the old name of {table}.{new}, which is also given ({section[new]!r})",
                             f"keep only {table}.{new} (delete the {table}.{old} line)")
        data = {**data, table: {(new if k == old else k): v for k, v in section.items()}}
        notes.append(f"{table}.{old} in {source} is deprecated: rename it to {table}.{new} (same meaning and "
                     "units; the old name will stop being read in a later release)")
    return data, notes


#: built-in scenarios, by the name that stands for them wherever a scenario file is asked for
BUILTIN = {"demo": "demo.toml", "channel_flow": "channel_flow.toml"}


def builtin_path(name: str):
    """Path of the built-in scenario file ``name`` (a key of :data:`BUILTIN`)."""
    from pathlib import Path

    return Path(__file__).resolve().parent.parent / "data" / BUILTIN[name]


def load_scenario(path: str | PathLike) -> Scenario:
    """Read a TOML scenario file, or a built-in one by name (``"demo"``), and return the validated
    :class:`Scenario` (SI units).

    Raises :class:`InputError` if the file cannot be read, is not TOML (the parser's line and column are
    given), or describes an invalid scenario.
    """
    if isinstance(path, str) and path in BUILTIN:
        path = builtin_path(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except OSError as err:
        raise InputError(
            "scenario file",
            str(path),
            f"cannot be read ({err.strerror or type(err).__name__})",
            "check the path and that the file is readable",
        ) from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as err:
        raise InputError(
            "scenario file", str(path), f"is not UTF-8 text (byte {err.start})", "save the file as UTF-8 TOML"
        ) from None
    except tomllib.TOMLDecodeError as err:
        raise InputError(
            "scenario file",
            str(path),
            f"is not valid TOML: {err}",
            "fix the syntax at that line and column (strings need quotes, tables [name])",
        ) from None
    except RecursionError:
        raise InputError(
            "scenario file", str(path), "is nested too deeply for the TOML reader", "flatten the nested arrays"
        ) from None
    except ValueError as err:  # e.g. an integer literal beyond Python's 4300-digit conversion limit
        raise InputError(
            "scenario file",
            str(path),
            f"holds a value that cannot be read ({err})",
            "write numbers with at most a few dozen digits, e.g. 1e40 instead of a long integer",
        ) from None
    return scenario_from_dict(data, source=str(path))


def scenario_from_dict(data: dict, source: str = "<dict>") -> Scenario:
    """Build and validate a :class:`Scenario` from a dictionary shaped like a scenario file.

    ``source`` is only used in messages. Quantities may be SI numbers or unit strings; see the module docstring
    for the keys. Deprecated key names (:data:`RENAMED`) are read under their new names, with one
    :class:`ScenarioKeyWarning` each (an error in such a value names the key as written).
    """
    if not isinstance(data, dict):
        raise InputError(
            source,
            type(data).__name__,
            "must be a table of scenario keys",
            "give a dictionary with name, medium, emitter, receiver and channel",
        )
    renamed, notes = rename_deprecated_keys(data, source)
    try:
        scenario = _build(renamed, source)
    except InputError as exc:
        written = _as_written(exc, data)
        if written is None:
            raise
        raise written from None
    for note in notes:
        warnings.warn(note, ScenarioKeyWarning, stacklevel=2)
    return scenario


def _as_written(exc: InputError, data: dict) -> InputError | None:
    """``exc`` about a field the file gave under its deprecated name, naming that name; None for other fields."""
    for (table, old), new in RENAMED.items():
        section = data.get(table)
        if exc.field == f"{table}.{new}" and isinstance(section, dict) and old in section:
            return InputError(f"{table}.{old}", exc.value, exc.problem,
                              f"{exc.fix}; and rename {table}.{old} to {table}.{new} (the old name is deprecated)")
    return None


def _build(data: dict, source: str) -> Scenario:
    _known(data, _TOP, "the top level of " + source, "")
    if "name" not in data:
        raise InputError("name", None, f"is missing from {source}", 'add a line such as name = "two receivers"')
    if not isinstance(data["name"], str):
        raise InputError("name", data["name"], "must be a string", 'write name = "..." with quotes')

    medium = _medium(_table(data, "medium", required=True))
    emitters = tuple(_emitter(t, i) for i, t in enumerate(_array(data, "emitter")))
    receivers = tuple(_receiver(t, j) for j, t in enumerate(_array(data, "receiver")))
    channel = _channel(_table(data, "channel", required=True), len(receivers))
    signalling = _signalling(_table(data, "signalling", required=False), emitters)
    walls = tuple(_wall(t, w) for w, t in enumerate(_array(data, "wall"))) if "wall" in data else ()
    scenario = Scenario(
        name=data["name"],
        medium=medium,
        emitters=emitters,
        receivers=receivers,
        channel=channel,
        signalling=signalling,
        walls=walls,
    )
    return validate_scenario(scenario)


# -- structure helpers -------------------------------------------------------------------------------------------
def _nearest(word, options, cutoff: float = 0.6) -> str | None:
    """The option closest to ``word`` (difflib ratio, ignoring case), or None if none is close enough."""
    lowered = {str(o).lower(): o for o in options}
    close = difflib.get_close_matches(str(word).lower(), list(lowered), n=1, cutoff=cutoff)
    return lowered[close[0]] if close else None


def _suggest(word: str, options) -> str:
    close = _nearest(word, options)
    listing = ", ".join(f'"{o}"' for o in options)
    if close is not None:
        return f'did you mean "{close}"? (valid: {listing})'
    return f"valid keys: {listing}"


def _known(table: dict, allowed, where: str, prefix: str) -> None:
    for key in table:
        if key not in allowed:
            shown = "{...}" if isinstance(table[key], (dict, list)) else table[key]
            raise InputError(prefix + str(key), shown, f'unknown key "{key}" in {where}', _suggest(key, allowed))


def _require(table: dict, key: str, prefix: str, fix: str):
    if key not in table:
        raise InputError(
            prefix + key, None, f"is missing (required key of {prefix.rstrip('.') or 'the file'})", fix
        )
    return table[key]


def _table(data: dict, key: str, required: bool) -> dict:
    if key not in data:
        if required:
            raise InputError(key, None, f"the [{key}] table is missing", f"add a [{key}] table")
        return {}
    value = data[key]
    if not isinstance(value, dict):
        raise InputError(key, value, "must be a table", f"write it as a [{key}] section with keys below it")
    return value


def _array(data: dict, key: str) -> list:
    if key not in data:
        raise InputError(key, None, f"no [[{key}]] table is given", f"add at least one [[{key}]] table")
    value = data[key]
    if isinstance(value, dict):
        raise InputError(
            key,
            "{...}",
            "is a single table, but a list of tables is expected",
            f"write [[{key}]] (double brackets) above each {key}",
        )
    if not isinstance(value, list) or len(value) == 0 or not all(isinstance(t, dict) for t in value):
        raise InputError(key, value, "must be a non-empty list of tables", f"write one [[{key}]] table per {key}")
    return value


def _text(table: dict, key: str, prefix: str, fix: str) -> str:
    value = _require(table, key, prefix, fix)
    if not isinstance(value, str):
        raise InputError(prefix + key, value, "must be a string", fix)
    return value


def _point(table: dict, key: str, prefix: str) -> tuple[float, float, float]:
    fix = 'give [x, y, z] as numbers in metres or strings such as ["10 um", "0 um", "0 um"]'
    value = _require(table, key, prefix, fix)
    if not isinstance(value, list) or len(value) != 3:
        raise InputError(prefix + key, value, "must be a list of 3 coordinates [x, y, z]", fix)
    return tuple(to_si(c, "length", f"{prefix}{key}[{k}]") for k, c in enumerate(value))


def _enum(table: dict, key: str, prefix: str, allowed, default: str) -> str:
    value = table.get(key, default)
    if not isinstance(value, str) or value not in allowed:
        listing = ", ".join(f'"{a}"' for a in allowed)
        close = _nearest(value, allowed, cutoff=0.5)
        fix = f'did you mean "{close}"? (valid: {listing})' if close else f"use one of {listing}"
        raise InputError(prefix + key, value, "is not a known option", fix)
    return value


def _integer(value, field: str, fix: str) -> int:
    """An int from a TOML integer or an integral float (``2e4``); booleans and fractions are rejected."""
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        raise InputError(field, value, "must be an integer", fix)
    if isinstance(value, numbers.Integral):
        return int(value)  # exact, however large (the validator checks the range)
    number = to_si(value, "count", field) if isinstance(value, str) else float(value)
    if not math.isfinite(number) or number != math.floor(number):
        raise InputError(field, value, "must be a whole number", fix)
    return int(number)


# -- sections ----------------------------------------------------------------------------------------------------
def _medium(t: dict) -> Medium:
    _known(t, _MEDIUM, "[medium]", "medium.")
    fix = 'give a diffusion coefficient such as "79.4 um^2/s" or 7.94e-11 (m^2/s)'
    diffusion = to_si(_require(t, "diffusion", "medium.", fix), "diffusion", "medium.diffusion")
    degradation = to_si(t.get("degradation", 0.0), "rate", "medium.degradation")
    return Medium(diffusion=diffusion, degradation=degradation, flow=_flow(t))


def _flow(t: dict) -> tuple[float, float, float]:
    """``[medium] flow``: a velocity vector of 3 components (a scalar is refused: its direction is unknown)."""
    value = t.get("flow", [0.0, 0.0, 0.0])
    fix = 'give a velocity vector [vx, vy, vz] such as flow = ["10 um/s", "0 um/s", "0 um/s"] (m/s)'
    if not isinstance(value, list) or len(value) != 3:
        problem = ("is a single value, but the flow is a velocity vector with a direction"
                   if not isinstance(value, list) else "must be a list of 3 velocity components [vx, vy, vz]")
        raise InputError("medium.flow", value, problem, fix)
    return tuple(to_si(c, "velocity", f"medium.flow[{k}]") for k, c in enumerate(value))


def _emitter(t: dict, i: int) -> Emitter:
    p = f"emitter[{i}]."
    _known(t, _EMITTER, f"emitter[{i}]", p)
    name = _text(t, "name", p, 'give each emitter a name such as name = "A"')
    pulse = to_si(t.get("pulse", 0.0), "time", p + "pulse")
    return Emitter(name=name, position=_point(t, "position", p), pulse=pulse)


def _wall(t: dict, w: int) -> Wall:
    p = f"wall[{w}]."
    _known(t, _WALL, f"wall[{w}]", p)
    normal = _require(t, "normal", p, "give the direction into the fluid, e.g. normal = [0, 1, 0]")
    if not isinstance(normal, list) or len(normal) != 3:
        raise InputError(p + "normal", normal, "must be a list of 3 numbers [nx, ny, nz]",
                         "give the direction into the fluid, e.g. normal = [0, 1, 0]")
    for k, c in enumerate(normal):
        if isinstance(c, bool) or not isinstance(c, numbers.Real):
            raise InputError(f"{p}normal[{k}]", c, "must be a plain number (a direction has no unit)",
                             "give the direction into the fluid, e.g. normal = [0, 1, 0]")
    kind = _enum(t, "kind", p, WALL_KINDS, "reflecting")
    return Wall(point=_point(t, "point", p), normal=tuple(float(c) for c in normal), kind=kind)


def _receiver(t: dict, j: int) -> Receiver:
    p = f"receiver[{j}]."
    _known(t, _RECEIVER, f"receiver[{j}]", p)
    name = _text(t, "name", p, 'give each receiver a name such as name = "R1"')
    centre = _point(t, "centre", p)
    radius = to_si(_require(t, "radius", p, 'give a radius such as "5 um"'), "length", p + "radius")
    kind = _enum(t, "kind", p, RECEIVER_KINDS, "absorbing")
    offset = t.get("sample_offset")
    if offset is not None:
        offset = to_si(offset, "time", p + "sample_offset")
    rate = t.get("reaction_rate")
    if rate is not None:
        rate = to_si(rate, "velocity", p + "reaction_rate")
    return Receiver(name=name, centre=centre, radius=radius, kind=kind, sample_offset=offset, reaction_rate=rate)


def _channel(t: dict, n_rx: int) -> Channel:
    p = "channel."
    _known(t, _CHANNEL, "[channel]", p)
    ts = to_si(
        _require(t, "symbol_interval", p, 'give a slot length such as "100 ms"'), "time", p + "symbol_interval"
    )
    memory = t.get("memory", "auto")
    if isinstance(memory, str):
        if memory != "auto":
            raise InputError(
                p + "memory",
                memory,
                'is neither an integer nor "auto"',
                'give a number of lags such as 20, or "auto"',
            )
    else:
        memory = _integer(memory, p + "memory", 'give a number of lags such as 20, or "auto"')
    tolerance = t.get("memory_tolerance", 0.01)
    if isinstance(tolerance, bool) or not isinstance(tolerance, numbers.Real):
        raise InputError(p + "memory_tolerance", tolerance, "must be a number", "give a fraction such as 0.01")
    if isinstance(tolerance, numbers.Integral) and abs(tolerance) > 1:
        raise InputError(p + "memory_tolerance", tolerance, "must lie strictly between 0 and 1",
                         "give a fraction such as 0.01")
    background = t.get("background", 0.0)
    if isinstance(background, list):
        if len(background) != n_rx:
            raise InputError(
                p + "background",
                background,
                f"has {len(background)} entries but there are {n_rx} receivers",
                f"give one number for all receivers or a list of {n_rx}",
            )
        background = tuple(to_si(b, "count", f"{p}background[{k}]") for k, b in enumerate(background))
    else:
        background = (to_si(background, "count", p + "background"),) * n_rx
    step = t.get("particle_step")
    if step is not None:
        step = to_si(step, "time", p + "particle_step")
    return Channel(
        symbol_interval=ts,
        memory=memory,
        memory_tolerance=float(tolerance),
        background=background,
        counting=_enum(t, "counting", p, COUNTING_LAWS, "poisson"),
        residual=_enum(t, "residual", p, RESIDUAL_RULES, "interference"),
        response=_enum(t, "response", p, RESPONSE_MODELS, "shadowed"),
        particle_count=_integer(t.get("particle_count", 20000), p + "particle_count",
                                "give a number of molecules such as 20000"),
        particle_step=step,
        seed=_integer(t.get("seed", 0), p + "seed", "give an integer seed such as 0"),
    )


def _signalling(t: dict, emitters: tuple[Emitter, ...]) -> Signalling:
    p = "signalling."
    _known(t, _SIGNALLING, "[signalling]", p)
    defaults = Signalling()
    scheme = _enum(t, "scheme", p, SCHEMES, defaults.scheme)
    amplitudes = t.get("amplitudes")
    if amplitudes is not None:
        if not isinstance(amplitudes, list):
            raise InputError(
                p + "amplitudes",
                amplitudes,
                "must be a list of molecule counts",
                "write e.g. amplitudes = [0, 500, 1000]",
            )
        amplitudes = tuple(to_si(a, "count", f"{p}amplitudes[{k}]") for k, a in enumerate(amplitudes))
    levels_fix = "give 2 for on-off keying, or more levels"
    if "levels" in t:  # explicit amplitudes override it (as in Signalling), so it is kept as written
        levels = _integer(t["levels"], p + "levels", levels_fix)
    else:
        levels = len(amplitudes) if amplitudes is not None else defaults.levels
    if "peak" in t:
        peak = to_si(t["peak"], "count", p + "peak")
    else:
        peak = max(amplitudes) if amplitudes else defaults.peak
    budget = t.get("budget")
    if budget is not None:
        budget = to_si(budget, "count", p + "budget")
    emitter = defaults.emitter
    if "emitter" in t:  # only the amplitude scheme uses it; accepted (and checked) with every scheme
        emitter = _emitter_index(t["emitter"], emitters)
    silent = t.get("silent", defaults.silent)
    if not isinstance(silent, bool):
        raise InputError(p + "silent", silent, "must be true or false", "write silent = true (no quotes)")
    return Signalling(
        scheme=scheme,
        levels=levels,
        peak=peak,
        budget=budget,
        emitter=emitter,
        silent=silent,
        amplitudes=amplitudes,
    )


def _emitter_index(value, emitters: tuple[Emitter, ...]) -> int:
    names = [e.name for e in emitters]
    if isinstance(value, str):
        if value in names:
            return names.index(value)
        close = _nearest(value, names)
        listing = ", ".join(f'"{n}"' for n in names)
        fix = f'did you mean "{close}"? (emitters: {listing})' if close else f"use one of {listing}"
        raise InputError("signalling.emitter", value, "is not the name of an emitter", fix)
    index = _integer(value, "signalling.emitter", "give the index or the name of an emitter")
    if not 0 <= index < len(emitters):
        raise InputError(
            "signalling.emitter",
            value,
            f"is not an emitter index (0 to {len(emitters) - 1})",
            "give the index or the name of an emitter",
        )
    return index
