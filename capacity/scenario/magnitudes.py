"""Warnings for values whose size suggests a unit slip (a bare number is read in SI units).

A bare ``symbol_interval = 500`` is 500 s and a bare ``diffusion = 79.4`` is 79.4 m^2/s: both legal, both
almost certainly meant as milliseconds and square micrometres per second. :func:`magnitude_warnings` names each
value outside the range this tool's users work in, its SI reading, and the unit that would bring it into range.

Plausible ranges (common practice for diffusion-based signalling; a rule of thumb, not a physical law):
diffusion 1e-13..1e-7 m^2/s (large proteins in cytoplasm to small gas molecules in air); lengths 10 nm..10 cm;
times 1 us..1 h. A symbol interval far longer than the slowest signal peak leaves most of the slot empty.
"""

from __future__ import annotations

import numpy as np

from capacity.scenario.validate import hitting_peak_time

DIFFUSION = (1e-13, 1e-7)
LENGTH = (1e-8, 1e-1)
TIME = (1e-6, 3600.0)
#: warn when the symbol interval exceeds this many times the slowest peak arrival (an interval far shorter than the
#: peaks is flagged pair by pair by :func:`capacity.scenario.validate.geometry_warnings`)
LONG_SLOT = 20.0

# unit name -> SI factor, in the order they are offered
_UNITS = {
    "diffusion": (("um^2/s", 1e-12), ("cm^2/s", 1e-4), ("mm^2/s", 1e-6), ("nm^2/s", 1e-18)),
    "length": (("um", 1e-6), ("mm", 1e-3), ("nm", 1e-9), ("cm", 1e-2)),
    "time": (("ms", 1e-3), ("us", 1e-6), ("min", 60.0)),
}
_RANGES = {"diffusion": DIFFUSION, "length": LENGTH, "time": TIME}
_SI = {"diffusion": "m^2/s", "length": "m", "time": "s"}


def _suggest(value: float, kind: str) -> str:
    lo, hi = _RANGES[kind]
    for unit, factor in _UNITS[kind]:
        if lo <= value * factor <= hi:
            return f'if you meant {value:g} {unit}, write "{value:g} {unit}"'
    return f"check the value and give its unit explicitly (plausible: {lo:g}..{hi:g} {_SI[kind]})"


def _check(out: list, field: str, value: float | None, kind: str) -> None:
    if value is None or value == 0 or not np.isfinite(value):
        return
    lo, hi = _RANGES[kind]
    if not lo <= abs(value) <= hi:
        out.append(f"{field} = {value:g} {_SI[kind]} (SI reading) lies outside the usual {lo:g}..{hi:g} "
                   f"{_SI[kind]}; {_suggest(abs(value), kind)}")


def magnitude_warnings(s) -> list[str]:
    """Values of a validated scenario whose size suggests a unit slip (sentences naming field, SI reading and the
    likely intended unit); empty when none."""
    out: list[str] = []
    _check(out, "medium.diffusion", s.medium.diffusion, "diffusion")
    for j, r in enumerate(s.receivers):
        _check(out, f"receiver[{j}].radius", r.radius, "length")
        _check(out, f"receiver[{j}].sample_offset", r.sample_offset, "time")
    em, rc = s.emitter_positions, s.receiver_centres
    for i in range(len(s.emitters)):
        for j in range(len(s.receivers)):
            _check(out, f"distance emitter[{i}] -> receiver[{j}]", float(np.linalg.norm(em[i] - rc[j])), "length")
    ch = s.channel
    _check(out, "channel.symbol_interval", ch.symbol_interval, "time")
    _check(out, "channel.particle_step", ch.particle_step, "time")
    if not out:
        out += _slot_warnings(s)
    return out


def _slot_warnings(s) -> list[str]:
    """The symbol interval against the slowest peak arrival of the layout."""
    em, rc, radii = s.emitter_positions, s.receiver_centres, s.receiver_radii
    peaks = []
    for i in range(len(s.emitters)):
        for j, r in enumerate(s.receivers):
            dist = float(np.linalg.norm(em[i] - rc[j]))
            basis = dist if r.kind == "passive" else dist - radii[j]
            peaks.append(float(hitting_peak_time(max(basis, 0.0), s.medium.diffusion, s.medium.degradation)))
    if not peaks:
        return []
    ts, slow = s.channel.symbol_interval, max(peaks)
    out = []
    if slow > 0 and ts > LONG_SLOT * slow:
        out.append(f"channel.symbol_interval = {ts:g} s is {ts / slow:.3g} times the slowest peak arrival "
                   f"({slow:.3g} s): most of each slot is empty; if you meant {ts:g} ms, write \"{ts:g} ms\", "
                   "or shorten the interval")
    # an interval far shorter than the peaks is flagged pair by pair by geometry_warnings (peak > 5 slots)
    return out
