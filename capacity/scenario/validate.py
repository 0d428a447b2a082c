"""Checks on a :class:`~capacity.scenario.types.Scenario`: values, names and geometry.

:func:`validate_scenario` raises :class:`~capacity.errors.InputError` for anything the later stages cannot use
(non-positive diffusion, an emitter inside a receiver, overlapping receivers, ...). The loader calls it, and it
works the same on scenarios built directly in Python, so error messages use the same field names as the scenario
file (``receiver[1].radius``). :func:`geometry_warnings` lists legal but suspicious choices as plain sentences.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from capacity.errors import InputError
from capacity.scenario.types import Scenario

__all__ = [
    "COUNTING_LAWS",
    "LIMITS",
    "MAX_MEMORY",
    "RECEIVER_KINDS",
    "RESIDUAL_RULES",
    "RESPONSE_MODELS",
    "SCHEMES",
    "WALL_KINDS",
    "geometry_warnings",
    "hitting_peak_time",
    "validate_scenario",
]

RECEIVER_KINDS = ("absorbing", "passive", "reactive")
COUNTING_LAWS = ("poisson", "binomial")
RESIDUAL_RULES = ("interference", "drop")
RESPONSE_MODELS = ("lone", "shadowed", "particles")
WALL_KINDS = ("reflecting",)
#: two walls count as parallel when the sine of the angle between their normals is below this
PARALLEL_TOLERANCE = 1e-9
SCHEMES = ("amplitude", "spatial", "multiplex", "hybrid")
#: hard cap on the number of lags kept exactly (memory = L keeps L + 1 slots)
MAX_MEMORY = 2000
#: physically meaningful magnitudes (SI); outside them the closed forms overflow or lose all meaning.
#: length: largest |coordinate| and radius, m; diffusion: (smallest, largest) m^2/s (solids ~1e-20 .. gases
#: ~1e-5); degradation: (0, largest) 1/s (a lifetime of 1 ps); seed: numpy/JAX 64-bit seeds; particle_count and levels:
#: more than any simulation or alphabet could use
LIMITS = {
    "length": 1e3,
    "diffusion": (1e-30, 1.0),
    "degradation": (0.0, 1e12),
    "seed": 2**63 - 1,
    "particle_count": 10**9,
    "levels": 10**4,
    "velocity": 1.0,
}

# thresholds of geometry_warnings (fractions of a radius, of a slot, ...)
_NEAR_SURFACE = 0.1
_LATE_PEAK_SLOTS = 5.0
_EARLY_SAMPLE = 0.01
_COARSE_STEP = 0.1
_HEAVY_WORK = 5e7


def um(x: float) -> str:
    """A length in metres written in micrometres, e.g. ``'5 um'``."""
    return f"{x * 1e6:.4g} um"


def hitting_peak_time(distance, diffusion, degradation=0.0):
    """Time at which ``t^(-3/2) exp(-distance^2/(4 D t) - k t)`` peaks, seconds.

    For an absorbing sphere with ``distance`` = gap d from the point source to its surface this is the peak of
    the first-hitting density ``f(t) e^(-k t)`` (Yilmaz et al., IEEE Commun. Lett. 18(6), 2014; degradation as
    in Heren et al., IEEE TMBMC 1(2), 2015). Setting the log-derivative to zero gives
    ``k t^2 + (3/2) t - d^2/(4D) = 0``, solved here in the cancellation-free form
    ``t* = (d^2/(2D)) / (3/2 + sqrt(9/4 + k d^2/D))``, which is ``d^2/(6D)`` when ``k = 0``.

    Parameters
    ----------
    distance : float or array, metres (>= 0).
    diffusion : float, m^2/s (> 0).
    degradation : float, 1/s (>= 0).
    """
    d2 = np.square(np.asarray(distance, dtype=float))
    return (d2 / (2.0 * diffusion)) / (1.5 + np.sqrt(2.25 + degradation * d2 / diffusion))


# -- small value checks ------------------------------------------------------------------------------------------
def _is_int(x) -> bool:
    return isinstance(x, numbers.Integral) and not isinstance(x, bool)


def _finite(field, value, fix):
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise InputError(field, value, "must be a finite number", fix)
    try:
        number = float(value)
    except OverflowError:  # an int beyond the float range
        number = math.inf
    if not math.isfinite(number):
        raise InputError(field, value, "must be a finite number", fix)
    return number


def _at_most(field, value, limit, what, fix):
    if abs(float(value)) > limit:
        raise InputError(field, value, f"is beyond {limit:g} {what}, outside any meaningful layout", fix)


def _positive(field, value, fix):
    if _finite(field, value, fix) <= 0.0:
        raise InputError(field, value, "must be positive", fix)


def _non_negative(field, value, fix):
    if _finite(field, value, fix) < 0.0:
        raise InputError(field, value, "must not be negative", fix)


def _point(field, value, fix):
    if not isinstance(value, (tuple, list, np.ndarray)) or len(value) != 3:
        raise InputError(field, value, "must be a list of 3 coordinates [x, y, z]", fix)
    for k, c in enumerate(value):
        _finite(f"{field}[{k}]", c, fix)
    limit = LIMITS["length"]
    if any(abs(float(c)) > limit for c in value):
        raise InputError(field, value, f"has a coordinate beyond {limit:g} m, outside any meaningful layout",
                         f"give coordinates within +-{limit:g} m (check the units: plain numbers are metres)")


def _choice(field, value, allowed):
    if value not in allowed:
        raise InputError(
            field, value, "is not a known option", "use one of " + ", ".join(f'"{a}"' for a in allowed)
        )


def _unique_names(kind, items):
    seen: dict[str, int] = {}
    for i, item in enumerate(items):
        if not isinstance(item.name, str) or not item.name.strip():
            raise InputError(
                f"{kind}[{i}].name", item.name, "must be a non-empty string", 'give a name such as "A"'
            )
        if item.name in seen:
            raise InputError(
                f"{kind}[{i}].name",
                item.name,
                f"is already used by {kind}[{seen[item.name]}]",
                f"give every {kind} its own name",
            )
        seen[item.name] = i


# -- the validator -----------------------------------------------------------------------------------------------
def validate_scenario(s: Scenario) -> Scenario:
    """Check every value of ``s`` and its geometry; return ``s`` unchanged or raise :class:`InputError`.

    Checks: diffusion > 0, degradation >= 0; at least one emitter and one receiver, unique names, finite
    3-vectors; radii > 0; receiver kinds; ``sample_offset`` only for passive receivers and within
    (0, symbol_interval]; channel settings (symbol_interval > 0, memory an integer in [0, 2000] or ``"auto"``,
    memory_tolerance in (0, 1), background >= 0 with 1 or R entries, known counting/residual/response names,
    particle_count > 0, 0 < particle_step <= symbol_interval, seed >= 0); signalling (scheme, levels >= 2, peak > 0,
    0 < budget <= peak * E (the largest amplitude instead of the peak when explicit amplitudes are
    given; they override levels and peak), emitter index in range, amplitudes >= 0 and distinct);
    geometry: no emitter inside or on a receiver, no two receivers overlapping or touching.
    """
    if not isinstance(s, Scenario):
        raise InputError(
            "scenario", type(s).__name__, "is not a Scenario", "build one with capacity.Scenario(...)"
        )
    if not isinstance(s.name, str) or not s.name.strip():
        raise InputError("name", s.name, "must be a non-empty string", 'add a line such as name = "two receivers"')
    _check_medium(s)
    _check_flow(s)
    _positive(
        "channel.symbol_interval", s.channel.symbol_interval, 'give a positive time such as "100 ms" or 0.1 (s)'
    )
    _check_emitters_receivers(s)
    _check_channel(s)
    _check_signalling(s)
    _check_geometry(s)
    _check_pulses(s)
    _check_walls(s)
    _check_flow_walls(s)
    return s


def _check_flow_walls(s: Scenario) -> None:
    """A uniform flow must run parallel to every wall (fluid cannot pass through a wall)."""
    v = np.asarray(s.medium.flow, dtype=float)
    speed = float(np.linalg.norm(v))
    if speed == 0.0:
        return
    for w, n in enumerate(wall_normals(s)):
        across = float(np.dot(v, n))
        if abs(across) > 1e-9 * speed:
            raise InputError("medium.flow", list(s.medium.flow),
                             f"has a component {across:.3g} m/s across wall[{w}] (normal {list(s.walls[w].normal)}): "
                             "fluid cannot flow through a wall",
                             "give a flow parallel to the walls, e.g. along the channel")


def _check_pulses(s: Scenario) -> None:
    """``emitter[i].pulse``: a release duration in [0, symbol_interval] (seconds)."""
    ts = float(s.channel.symbol_interval)
    for i, e in enumerate(s.emitters):
        fix = f'give a release duration from 0 (an impulse) up to the symbol interval ({ts:g} s), e.g. "5 ms"'
        pulse = _finite(f"emitter[{i}].pulse", e.pulse, fix)
        if pulse < 0.0:
            raise InputError(f"emitter[{i}].pulse", e.pulse, "must not be negative", fix)
        if pulse > ts:
            raise InputError(f"emitter[{i}].pulse", e.pulse,
                             f"is longer than the symbol interval ({ts:g} s): one release would overlap the next",
                             fix)


def wall_normals(s: Scenario) -> list[np.ndarray]:
    """Unit normals of the walls of a validated scenario (pointing into the fluid)."""
    return [np.asarray(w.normal, dtype=float) / np.linalg.norm(np.asarray(w.normal, dtype=float)) for w in s.walls]


def _check_walls(s: Scenario) -> None:
    """At most two reflecting walls (two must be parallel and face each other); every emitter strictly on the
    fluid side of every wall; no wall touching or cutting a receiver."""
    walls = s.walls
    if not isinstance(walls, tuple):
        raise InputError("wall", walls, "must be a tuple of Wall objects", "pass walls=(Wall(...), ...)")
    if len(walls) > 2:
        raise InputError("wall", f"{len(walls)} walls", "at most two walls are supported (a half space or a channel)",
                         "keep one wall, or two parallel walls facing each other")
    fix_n = "give the direction into the fluid, e.g. normal = [0, 1, 0]"
    normals = []
    for w, wall in enumerate(walls):
        _point(f"wall[{w}].point", wall.point,
               'give [x, y, z] in metres or as strings such as ["0 um", "-20 um", "0 um"]')
        n = wall.normal
        if not isinstance(n, (tuple, list, np.ndarray)) or len(n) != 3:
            raise InputError(f"wall[{w}].normal", n, "must be a list of 3 numbers [nx, ny, nz]", fix_n)
        vec = np.asarray([_finite(f"wall[{w}].normal[{k}]", c, fix_n) for k, c in enumerate(n)])
        length = float(np.linalg.norm(vec))
        if not length > 0.0 or not math.isfinite(length):
            raise InputError(f"wall[{w}].normal", n, "is the zero vector, which gives the wall no orientation",
                             fix_n)
        normals.append(vec / length)
        _choice(f"wall[{w}].kind", wall.kind, WALL_KINDS)
    if len(walls) == 2:
        sine = float(np.linalg.norm(np.cross(normals[0], normals[1])))
        if sine > PARALLEL_TOLERANCE:
            angle = math.degrees(math.asin(min(sine, 1.0)))
            raise InputError("wall[1].normal", walls[1].normal,
                             f"is not parallel to wall[0].normal {walls[0].normal} (angle {angle:.3g} degrees): only "
                             "two parallel walls (a channel) are supported",
                             "give the second wall the opposite normal of the first, e.g. [0, 1, 0] and [0, -1, 0]")
        if float(np.dot(normals[0], normals[1])) > 0.0:
            raise InputError("wall[1].normal", walls[1].normal,
                             f"points the same way as wall[0].normal {walls[0].normal}: the normals of a channel's "
                             "walls must face each other (each points into the fluid)",
                             "flip one normal, e.g. [0, 1, 0] for the lower wall and [0, -1, 0] for the upper one")
    for w, wall in enumerate(walls):
        n, p = normals[w], np.asarray(wall.point, dtype=float)
        for i, e in enumerate(s.emitters):
            height = float(np.dot(np.asarray(e.position, dtype=float) - p, n))
            if height <= 0.0:
                where = "on" if height == 0.0 else f"{um(-height)} behind"
                raise InputError(f"emitter[{i}].position", e.position,
                                 f'lies {where} wall[{w}] (the fluid is on the side its normal {wall.normal} points '
                                 "to)", "move the emitter into the fluid, or flip the wall's normal")
        for j, r in enumerate(s.receivers):
            height = float(np.dot(np.asarray(r.centre, dtype=float) - p, n))
            if height <= 0.0:
                where = "on" if height == 0.0 else um(-height) + " behind"
                raise InputError(f"receiver[{j}].centre", r.centre,
                                 f'receiver[{j}] "{r.name}" has its centre {where} '
                                 f"wall[{w}] (the fluid is on the side its normal {wall.normal} points to)",
                                 "move the receiver into the fluid, or flip the wall's normal")
            if height <= float(r.radius):
                how = "touches" if height == float(r.radius) else "is cut by"
                raise InputError(f"receiver[{j}].centre", r.centre,
                                 f'receiver[{j}] "{r.name}" {how} wall[{w}]: its centre is {um(height)} from the wall '
                                 f"and its radius is {um(float(r.radius))}",
                                 f"move the centre more than {um(float(r.radius))} from the wall, or shrink the radius")


def _check_medium(s: Scenario) -> None:
    _positive(
        "medium.diffusion",
        s.medium.diffusion,
        'give a positive diffusion coefficient such as "79.4 um^2/s" or 7.94e-11 (m^2/s)',
    )
    _non_negative(
        "medium.degradation", s.medium.degradation, 'give a rate >= 0 such as "0.5 /s", or 0 for a stable molecule'
    )
    lo, hi = LIMITS["diffusion"]
    if not lo <= s.medium.diffusion <= hi:
        raise InputError(
            "medium.diffusion",
            s.medium.diffusion,
            f"lies outside [{lo:g}, {hi:g}] m^2/s, the range of any diffusing molecule",
            'give a diffusion coefficient such as "79.4 um^2/s" or 7.94e-11 (m^2/s); check the units',
        )
    _at_most("medium.degradation", s.medium.degradation, LIMITS["degradation"][1], "1/s (a lifetime below 1 ps)",
             'give a rate such as "0.5 /s", or 0 for a stable molecule; check the units')


def _check_emitters_receivers(s: Scenario) -> None:
    for kind, items in (("emitter", s.emitters), ("receiver", s.receivers)):
        if not isinstance(items, tuple) or len(items) == 0:
            raise InputError(kind, items, f"needs at least one {kind}", f"add a [[{kind}]] table")
        _unique_names(kind, items)
    pos_fix = 'give [x, y, z] in metres or as strings such as ["10 um", "0 um", "0 um"]'
    for i, e in enumerate(s.emitters):
        _point(f"emitter[{i}].position", e.position, pos_fix)
    ts = s.channel.symbol_interval
    for j, r in enumerate(s.receivers):
        f = f"receiver[{j}]"
        _point(f"{f}.centre", r.centre, pos_fix)
        _positive(f"{f}.radius", r.radius, 'give a positive radius such as "5 um" or 5e-6 (metres)')
        _at_most(f"{f}.radius", r.radius, LIMITS["length"], "m",
                 'give a radius such as "5 um" or 5e-6 (metres); check the units')
        _choice(f"{f}.kind", r.kind, RECEIVER_KINDS)
        _check_reaction_rate(f, r)
        if r.sample_offset is None:
            continue
        if r.kind != "passive":
            raise InputError(
                f"{f}.sample_offset",
                r.sample_offset,
                "is only used by passive receivers (an absorbing receiver counts all slot long)",
                'remove sample_offset, or set kind = "passive"',
            )
        _finite(f"{f}.sample_offset", r.sample_offset, 'give a time such as "50 ms"')
        if isinstance(ts, numbers.Real) and not (0.0 < r.sample_offset <= ts):
            raise InputError(
                f"{f}.sample_offset",
                r.sample_offset,
                f"must lie in (0, symbol_interval] = (0, {ts:g} s]",
                "give a time after the slot start and no later than its end, or leave it out "
                "to sample at the end of the slot",
            )


def _check_flow(s: Scenario) -> None:
    """``medium.flow``: a finite velocity vector of 3 components, each at most LIMITS["velocity"] m/s."""
    flow = s.medium.flow
    fix = 'give a velocity vector [vx, vy, vz] such as flow = ["10 um/s", "0 um/s", "0 um/s"] (m/s)'
    if not isinstance(flow, (tuple, list, np.ndarray)) or len(flow) != 3:
        raise InputError("medium.flow", flow, "must be a velocity vector of 3 components [vx, vy, vz]", fix)
    for k, c in enumerate(flow):
        _finite(f"medium.flow[{k}]", c, fix)
        _at_most(f"medium.flow[{k}]", c, LIMITS["velocity"], "m/s", fix + "; check the units")


def _check_reaction_rate(f: str, r) -> None:
    """``reaction_rate``: required, finite and > 0 for reactive receivers; absent for the other kinds."""
    fix = 'give a surface reaction rate such as reaction_rate = "20 um/s" (m/s)'
    if r.kind != "reactive":
        if r.reaction_rate is not None:
            raise InputError(f"{f}.reaction_rate", r.reaction_rate,
                             f'is only used by reactive receivers (this one is "{r.kind}")',
                             'remove reaction_rate, or set kind = "reactive"')
        return
    if r.reaction_rate is None:
        raise InputError(f"{f}.reaction_rate", None, "is missing: a reactive receiver needs its surface reaction rate",
                         fix)
    rate = _finite(f"{f}.reaction_rate", r.reaction_rate, fix)
    if rate < 0.0:
        raise InputError(f"{f}.reaction_rate", r.reaction_rate, "must not be negative (it is a rate, m/s)", fix)
    if rate == 0.0:
        raise InputError(f"{f}.reaction_rate", r.reaction_rate,
                         "is 0: a receiver that never reacts counts nothing",
                         fix + ', or kind = "passive" to count the molecules inside without taking them')
    _at_most(f"{f}.reaction_rate", rate, LIMITS["velocity"] * 1e3, "m/s",
             'use kind = "absorbing" for a sphere that takes every molecule that touches it')


def _check_channel(s: Scenario) -> None:
    c = s.channel
    _positive("channel.symbol_interval", c.symbol_interval, 'give a positive time such as "100 ms" or 0.1 (s)')
    mem_fix = f'give an integer number of lags from 0 to {MAX_MEMORY}, or "auto"'
    if isinstance(c.memory, str):
        if c.memory != "auto":
            raise InputError("channel.memory", c.memory, 'is neither an integer nor "auto"', mem_fix)
    elif not _is_int(c.memory) or c.memory < 0:
        raise InputError("channel.memory", c.memory, "must be a non-negative integer", mem_fix)
    elif c.memory > MAX_MEMORY:
        raise InputError(
            "channel.memory",
            c.memory,
            f"is above the cap of {MAX_MEMORY} lags",
            mem_fix + "; a longer symbol_interval needs fewer lags",
        )
    tol = _finite("channel.memory_tolerance", c.memory_tolerance, "give a fraction such as 0.01")
    if not 0.0 < tol < 1.0:
        raise InputError(
            "channel.memory_tolerance",
            c.memory_tolerance,
            "must lie strictly between 0 and 1",
            "give a fraction such as 0.01",
        )
    n_rx = len(s.receivers)
    bg = c.background
    if not isinstance(bg, tuple) or len(bg) not in (0, 1, n_rx):
        raise InputError(
            "channel.background",
            bg,
            f"must have 1 or {n_rx} entries (one per receiver)",
            f"give one number for all receivers or a list of {n_rx}",
        )
    for j, b in enumerate(bg):
        _non_negative(f"channel.background[{j}]", b, "give a mean count per slot >= 0, e.g. 0.5")
    _choice("channel.counting", c.counting, COUNTING_LAWS)
    _choice("channel.residual", c.residual, RESIDUAL_RULES)
    _choice("channel.response", c.response, RESPONSE_MODELS)
    if not _is_int(c.particle_count) or not 0 < c.particle_count <= LIMITS["particle_count"]:
        raise InputError(
            "channel.particle_count",
            c.particle_count,
            f"must be a positive integer up to {LIMITS['particle_count']:g}",
            "give a number of molecules to simulate such as 20000",
        )
    if c.particle_step is not None:
        _positive("channel.particle_step", c.particle_step, 'give a time step such as "1 ms", or leave it out')
        if c.particle_step > c.symbol_interval:
            raise InputError(
                "channel.particle_step",
                c.particle_step,
                f"is longer than the symbol_interval ({c.symbol_interval:g} s)",
                "use a step well below the slot length, or leave it out for automatic",
            )
    if not _is_int(c.seed) or c.seed < 0:
        raise InputError("channel.seed", c.seed, "must be a non-negative integer", "give a seed such as 0")
    if c.seed > LIMITS["seed"]:
        raise InputError("channel.seed", c.seed, "is above 2^63 - 1, the largest seed", "give a seed such as 0")


def _check_signalling(s: Scenario) -> None:
    g = s.signalling
    _choice("signalling.scheme", g.scheme, SCHEMES)
    if g.amplitudes is not None:
        _check_amplitudes(g.amplitudes)
    if not _is_int(g.levels) or g.levels < 2:
        raise InputError(
            "signalling.levels",
            g.levels,
            "must be an integer >= 2 (levels include 0)",
            "give 2 for on-off keying, or more levels",
        )
    if g.levels > LIMITS["levels"]:
        raise InputError(
            "signalling.levels",
            g.levels,
            f"is above {LIMITS['levels']}, more levels than any alphabet can use",
            "give 2 for on-off keying, or a few more levels",
        )
    _positive("signalling.peak", g.peak, "give the largest release per emitter and slot, e.g. 1000 (molecules)")
    n_em = len(s.emitters)
    if g.budget is not None:
        _positive("signalling.budget", g.budget, "give a mean number of molecules per symbol > 0, or leave it out")
        top, which = (float(g.peak), "peak") if g.amplitudes is None else (max(g.amplitudes), "largest amplitude")
        most = float(top) * n_em
        if g.budget > most:
            raise InputError(
                "signalling.budget",
                g.budget,
                f"is larger than {which} x number of emitters = {most:g} molecules, the most any "
                "symbol can release, so no alphabet can meet it (it would never bind)",
                f"give a budget of at most {most:g}, or leave it out for no mean constraint",
            )
    if not _is_int(g.emitter) or not 0 <= g.emitter < n_em:
        raise InputError(
            "signalling.emitter",
            g.emitter,
            f"must be an emitter index from 0 to {n_em - 1}",
            "give the index or the name of an emitter",
        )
    if not isinstance(g.silent, bool):
        raise InputError("signalling.silent", g.silent, "must be true or false", "write silent = true")


def _check_amplitudes(amplitudes) -> None:
    """Explicit levels (they override levels and peak): at least two distinct finite counts >= 0."""
    fix = "give at least two distinct release sizes >= 0, e.g. [0, 500, 1000]"
    if not isinstance(amplitudes, tuple) or len(amplitudes) < 2:
        raise InputError("signalling.amplitudes", amplitudes, "needs at least two levels", fix)
    for k, a in enumerate(amplitudes):
        _non_negative(f"signalling.amplitudes[{k}]", a, fix)
    if len(set(float(a) for a in amplitudes)) != len(amplitudes):
        raise InputError("signalling.amplitudes", amplitudes, "repeats a level", fix)


def _check_geometry(s: Scenario) -> None:
    em, rc, radii = s.emitter_positions, s.receiver_centres, s.receiver_radii
    for i, e in enumerate(s.emitters):
        for j, r in enumerate(s.receivers):
            dist = float(np.linalg.norm(em[i] - rc[j]))
            if dist <= radii[j]:
                where = "on the surface of" if dist == radii[j] else f"{um(radii[j] - dist)} inside"
                raise InputError(
                    f"emitter[{i}].position",
                    e.position,
                    f'lies {where} receiver[{j}] "{r.name}" (centre distance {um(dist)}, radius {um(radii[j])})',
                    f"move the emitter at least {um(radii[j] - dist)} further out: its distance from the centre "
                    f'of "{r.name}" must exceed the radius {um(radii[j])} (it is {um(dist)} now)',
                )
    for a in range(len(s.receivers)):
        for b in range(a + 1, len(s.receivers)):
            dist = float(np.linalg.norm(rc[a] - rc[b]))
            overlap = radii[a] + radii[b] - dist
            if overlap >= 0.0:
                other = f'receiver[{a}] "{s.receivers[a].name}"'
                how = f"touches {other}" if overlap == 0.0 else f"overlaps {other} by {um(overlap)}"
                raise InputError(
                    f"receiver[{b}].centre",
                    s.receivers[b].centre,
                    f'receiver[{b}] "{s.receivers[b].name}" {how} '
                    f"(centre distance {um(dist)}, radii {um(radii[a])} + {um(radii[b])})",
                    f"move the centres more than {um(radii[a] + radii[b])} apart (they are {um(dist)} apart now), "
                    "or shrink a radius",
                )


# -- warnings ----------------------------------------------------------------------------------------------------
def geometry_warnings(s: Scenario) -> list[str]:
    """Legal but suspicious choices in a valid scenario, as factual sentences (empty list if none).

    Flags: an emitter closer to a receiver surface than 0.1 of its radius; two receivers closer than 0.1 of the
    smaller radius; a signal peak more than 5 slots after release (``hitting_peak_time`` of the gap for absorbing
    receivers, of the centre distance -- the peak of the concentration at the centre -- for passive ones); a
    passive receiver sampling in the first 1% of the slot; a particle_step above 0.1 of the earliest peak
    time; and particle_count x emitters x (memory + 1) above 5e7 molecule-slots.
    """
    out: list[str] = []
    em, rc, radii = s.emitter_positions, s.receiver_centres, s.receiver_radii
    dcoef, k, ts = s.medium.diffusion, s.medium.degradation, s.channel.symbol_interval
    earliest = math.inf
    for i, e in enumerate(s.emitters):
        for j, r in enumerate(s.receivers):
            dist = float(np.linalg.norm(em[i] - rc[j]))
            gap = dist - radii[j]
            basis = dist if r.kind == "passive" else gap
            peak = float(hitting_peak_time(basis, dcoef, k))
            earliest = min(earliest, peak)
            if gap < _NEAR_SURFACE * radii[j]:
                out.append(
                    f'emitter "{e.name}" is {um(gap)} from the surface of receiver "{r.name}", less than '
                    f"{_NEAR_SURFACE:g} of its radius ({um(radii[j])}); its signal there peaks {peak:.3g} s "
                    "after release"
                )
            if peak > _LATE_PEAK_SLOTS * ts:
                out.append(
                    f'the signal from emitter "{e.name}" at receiver "{r.name}" peaks {peak / ts:.3g} '
                    f"slots after release (at {peak:.3g} s; symbol_interval {ts:.3g} s), so slot 0 holds "
                    "little of it and most arrives in later slots"
                )
    for a in range(len(s.receivers)):
        for b in range(a + 1, len(s.receivers)):
            gap = float(np.linalg.norm(rc[a] - rc[b])) - radii[a] - radii[b]
            small = min(radii[a], radii[b])
            if gap < _NEAR_SURFACE * small:
                out.append(
                    f'receivers "{s.receivers[a].name}" and "{s.receivers[b].name}" are {um(gap)} apart, '
                    f"less than {_NEAR_SURFACE:g} of the smaller radius ({um(small)})"
                )
    for r in s.receivers:
        if r.kind == "passive" and r.sample_offset is not None and r.sample_offset < _EARLY_SAMPLE * ts:
            out.append(
                f'passive receiver "{r.name}" samples {r.sample_offset:.3g} s into the slot, '
                f"{r.sample_offset / ts:.2%} of the symbol_interval"
            )
    c = s.channel
    if c.particle_step is not None and c.particle_step > _COARSE_STEP * earliest:
        out.append(
            f"the particle_step ({c.particle_step:.3g} s) is {c.particle_step / earliest:.3g} of the earliest "
            f"peak time ({earliest:.3g} s); the step error of the particle model grows with this ratio"
        )
    if isinstance(c.memory, int):
        work = float(c.particle_count) * len(s.emitters) * (c.memory + 1)
        if work > _HEAVY_WORK:
            out.append(
                f"particle_count x emitters x (memory + 1) = {work:.3g} molecule-slots for the particle model; "
                "expect a long run"
            )
    return out
