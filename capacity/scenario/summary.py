"""A quick, model-free summary of a scenario's layout (what ``capacity check`` prints).

Everything here is a closed form for one emitter and one receiver alone (no shadowing, no ISI analysis): the
centre distance, the gap to the surface, the eventual capture of a lone absorbing sphere and the time at which
the signal peaks, in seconds and in slots. It is meant to catch unit slips and odd layouts before the expensive
stages run.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import minimize_scalar
from scipy.special import erfc

from capacity.scenario.types import Scenario
from capacity.scenario.validate import geometry_warnings, hitting_peak_time

__all__ = ["format_summary", "lone_capture", "passive_fraction", "passive_peak", "summarise"]


def scenario_warnings(s: Scenario) -> list[str]:
    """Every warning for a valid scenario: legal but suspicious geometry (:func:`geometry_warnings`) and values
    whose size suggests a unit slip (:func:`capacity.scenario.magnitudes.magnitude_warnings`)."""
    from capacity.scenario.magnitudes import magnitude_warnings

    return list(geometry_warnings(s)) + magnitude_warnings(s)


def lone_capture(radius: float, gap: float, diffusion: float, degradation: float = 0.0,
                 reaction_rate: float | None = None) -> float:
    """Eventual fraction of molecules from a point source absorbed by one lone absorbing sphere (still fluid).

    ``r/(r+d) * exp(-d sqrt(k/D))`` with r the radius (m), d the gap from the source to the surface (m), D in
    m^2/s and k the degradation rate in 1/s (Yilmaz et al., IEEE Commun. Lett. 18(6), 2014; the degradation
    factor from Heren et al., IEEE TMBMC 1(2), 2015). A reactive sphere (``reaction_rate`` kappa, m/s) takes the
    factor ``kappa r / (kappa r + D + r sqrt(k D))`` more (:func:`capacity.physics.reactive.reactive_total`).
    """
    factor = 1.0
    if reaction_rate is not None:
        factor = reaction_rate * radius / (reaction_rate * radius + diffusion + radius * math.sqrt(degradation
                                                                                                  * diffusion))
    return factor * radius / (radius + gap) * math.exp(-gap * math.sqrt(degradation / diffusion))


def passive_fraction(t, distance: float, radius: float, diffusion: float, degradation: float = 0.0):
    """Expected fraction of molecules inside a transparent sphere at time ``t`` (s) after a point release.

    ``P(t) = 1/2 [erfc((rho-a)/s) - erfc((rho+a)/s)] - sqrt(D t/pi)/rho [e^(-(rho-a)^2/s^2) - e^(-(rho+a)^2/s^2)]``
    with ``s = sqrt(4 D t)``, times ``e^(-k t)`` for degradation (the exact integral of the 3-D Gaussian over the
    sphere; e.g. Jamali et al., Proc. IEEE 2019). ``distance`` rho > 0 is the centre distance (m), ``radius`` a
    (m). Works on arrays of ``t``.
    """
    t = np.asarray(t, dtype=float)
    s = np.sqrt(4.0 * diffusion * t)
    lo, hi = (distance - radius) / s, (distance + radius) / s
    p = 0.5 * (erfc(lo) - erfc(hi)) - np.sqrt(diffusion * t / math.pi) / distance * (
        np.exp(-(lo**2)) - np.exp(-(hi**2))
    )
    return p * np.exp(-degradation * t)


def passive_peak(
    distance: float, radius: float, diffusion: float, degradation: float = 0.0
) -> tuple[float, float]:
    """Time (s) and value of the peak of :func:`passive_fraction`: a log-spaced scan refined by Brent's method.

    The scan covers 1e-4 to 1e2 times ``rho^2/(6D)`` (the peak of the concentration at the centre); the result is
    refined to a relative width of about 1e-10 in ``ln t``.
    """
    t0 = float(hitting_peak_time(distance, diffusion, degradation))
    logs = np.linspace(math.log(t0) - 4.0 * math.log(10.0), math.log(t0) + 2.0 * math.log(10.0), 241)
    values = passive_fraction(np.exp(logs), distance, radius, diffusion, degradation)
    best = int(np.argmax(values))
    lo, hi = logs[max(best - 1, 0)], logs[min(best + 1, len(logs) - 1)]
    res = minimize_scalar(
        lambda u: -float(passive_fraction(math.exp(u), distance, radius, diffusion, degradation)),
        bounds=(lo, hi),
        method="bounded",
        options={"xatol": 1e-10},
    )
    return math.exp(res.x), -float(res.fun)


def summarise(s: Scenario) -> dict:
    """Layout figures of ``s`` as a JSON-serialisable dict (SI units: m, s, m^2/s, 1/s).

    Keys: ``name``, ``units``, ``n_emitters``, ``n_receivers``, ``diffusion``, ``degradation``,
    ``symbol_interval``, ``pairs`` (one dict per emitter-receiver pair: ``emitter``, ``receiver``, ``kind``,
    ``centre_distance``, ``gap`` (to the surface), ``lone_capture`` (absorbing only, else None),
    ``peak_fraction`` (passive only: the largest expected fraction inside, else None), ``peak_time`` (absorbing:
    peak of the lone hitting rate, d^2/(6D) without degradation; passive: peak of the fraction inside),
    ``peak_time_slots`` = peak_time / symbol_interval), ``receiver_gaps`` (``a``, ``b``, ``centre_distance``,
    ``gap``), ``warnings`` (from :func:`geometry_warnings`), ``walls`` (:func:`wall_summary`) and ``pulses``
    (emitter name -> release duration in s, pulsed emitters only).
    """
    dcoef, k, ts = float(s.medium.diffusion), float(s.medium.degradation), float(s.channel.symbol_interval)
    em, rc, radii = s.emitter_positions, s.receiver_centres, s.receiver_radii
    pairs = []
    for i, e in enumerate(s.emitters):
        for j, r in enumerate(s.receivers):
            dist = float(np.linalg.norm(em[i] - rc[j]))
            gap = dist - float(radii[j])
            if r.kind in ("absorbing", "reactive"):
                capture, fraction = lone_capture(float(radii[j]), gap, dcoef, k, r.reaction_rate), None
                peak = float(hitting_peak_time(gap, dcoef, k))
            else:
                capture = None
                peak, fraction = passive_peak(dist, float(radii[j]), dcoef, k)
            pairs.append(
                {
                    "emitter": e.name,
                    "receiver": r.name,
                    "kind": r.kind,
                    "centre_distance": dist,
                    "gap": gap,
                    "lone_capture": capture,
                    "peak_fraction": fraction,
                    "peak_time": peak,
                    "peak_time_slots": peak / ts,
                }
            )
    gaps = []
    for a in range(len(s.receivers)):
        for b in range(a + 1, len(s.receivers)):
            dist = float(np.linalg.norm(rc[a] - rc[b]))
            gaps.append(
                {
                    "a": s.receivers[a].name,
                    "b": s.receivers[b].name,
                    "centre_distance": dist,
                    "gap": dist - float(radii[a]) - float(radii[b]),
                }
            )
    return {
        "name": s.name,
        "units": {"length": "m", "time": "s", "diffusion": "m^2/s", "rate": "1/s", "capture": "fraction"},
        "n_emitters": len(s.emitters),
        "n_receivers": len(s.receivers),
        "diffusion": dcoef,
        "degradation": k,
        "symbol_interval": ts,
        "pairs": pairs,
        "receiver_gaps": gaps,
        "warnings": scenario_warnings(s),
        "flow": flow_summary(s),
        "walls": wall_summary(s),
        "pulses": {e.name: float(e.pulse) for e in s.emitters if e.pulse > 0.0},
    }


def wall_summary(s: Scenario) -> list[dict]:
    """One dict per wall: ``point``, ``normal`` (unit, into the fluid), ``emitter_distances`` (name -> m from the
    plane) and ``receiver_gaps`` (name -> m from the plane to the receiver's surface); empty without walls."""
    out = []
    for w, wall in enumerate(s.walls):
        n = np.asarray(wall.normal, dtype=float)
        n = n / np.linalg.norm(n)
        p = np.asarray(wall.point, dtype=float)
        out.append({
            "wall": w,
            "kind": wall.kind,
            "point": [float(c) for c in p],
            "normal": [float(c) for c in n],
            "emitter_distances": {e.name: float(np.dot(np.asarray(e.position, dtype=float) - p, n))
                                  for e in s.emitters},
            "receiver_gaps": {r.name: float(np.dot(np.asarray(r.centre, dtype=float) - p, n) - r.radius)
                              for r in s.receivers},
        })
    return out


def flow_summary(s: Scenario) -> dict | None:
    """Flow figures, or None in a still fluid: ``velocity`` (3,) m/s, ``speed`` m/s, ``peclet`` (receiver name ->
    |v| a / D, the bead's Peclet number) and ``gap_peclet`` (``emitter -> receiver`` -> |v| d / D with d the gap:
    above ~1 the flow carries molecules across the gap faster than they diffuse). The lone captures and peak
    times of the pair table are those of a still fluid."""
    v = np.asarray(s.medium.flow, dtype=float)
    speed = float(np.linalg.norm(v))
    if speed == 0.0:
        return None
    dcoef = float(s.medium.diffusion)
    em, rc, radii = s.emitter_positions, s.receiver_centres, s.receiver_radii
    return {
        "velocity": [float(c) for c in v],
        "speed": speed,
        "peclet": {r.name: speed * float(radii[j]) / dcoef for j, r in enumerate(s.receivers)},
        "gap_peclet": {f"{e.name} -> {r.name}": speed * (float(np.linalg.norm(em[i] - rc[j])) - float(radii[j]))
                       / dcoef for i, e in enumerate(s.emitters) for j, r in enumerate(s.receivers)},
    }


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(h), *(len(r[c]) for r in rows)) for c, h in enumerate(header)]

    def line(cells: list[str]) -> str:
        padded = (x.rjust(w) if c else x.ljust(w) for c, (x, w) in enumerate(zip(cells, widths, strict=True)))
        return "  ".join(padded)

    return [line(header), line(["-" * w for w in widths])] + [line(r) for r in rows]


def _num(x, scale=1.0, fmt=".4g") -> str:
    return "-" if x is None else format(x * scale, fmt)


def format_summary(d: dict) -> str:
    """A compact text rendering of :func:`summarise` output (lengths in µm, times in ms).

    The "lone capture" column (absorbing pairs) and the "peak fraction" column (passive pairs: the largest
    expected fraction inside) are left out when no pair has a value for them.
    """
    out = [
        f"scenario: {d['name']}",
        f"{d['n_emitters']} emitter(s), {d['n_receivers']} receiver(s); D = {d['diffusion'] * 1e12:.4g} µm²/s, "
        f"degradation = {d['degradation']:.4g} 1/s, symbol interval = {d['symbol_interval'] * 1e3:.4g} ms",
        "",
    ]
    rows = [
        [
            p["emitter"] + " -> " + p["receiver"],
            p["kind"],
            _num(p["centre_distance"], 1e6),
            _num(p["gap"], 1e6),
            _num(p["lone_capture"]),
            _num(p["peak_fraction"]),
            _num(p["peak_time"], 1e3),
            _num(p["peak_time_slots"], fmt=".3g"),
        ]
        for p in d["pairs"]
    ]
    header = ["pair", "kind", "distance µm", "gap µm", "lone capture", "peak fraction", "peak ms", "peak slots"]
    for col in (5, 4):  # drop the capture / fraction column when no pair has one (all absorbing or all passive)
        if all(r[col] == "-" for r in rows):
            header.pop(col)
            rows = [r[:col] + r[col + 1 :] for r in rows]
    out += _table(header, rows)
    if d["receiver_gaps"]:
        out.append("")
        rows = [
            [g["a"] + " - " + g["b"], _num(g["centre_distance"], 1e6), _num(g["gap"], 1e6)]
            for g in d["receiver_gaps"]
        ]
        out += _table(["receivers", "distance µm", "gap µm"], rows)
    if d.get("walls"):
        out.append("")
        rows = [[f"wall[{w['wall']}] ({w['kind']})", "emitter " + name, _num(dist, 1e6)]
                for w in d["walls"] for name, dist in w["emitter_distances"].items()]
        rows += [[f"wall[{w['wall']}] ({w['kind']})", "receiver " + name, _num(gap, 1e6)]
                 for w in d["walls"] for name, gap in w["receiver_gaps"].items()]
        out += _table(["wall", "to", "distance µm (receivers: to the surface)"], rows)
    if d.get("pulses"):
        out.append("")
        out.append("release pulses: " + ", ".join(f"{n} {p * 1e3:.4g} ms" for n, p in d["pulses"].items()))
    if d.get("flow"):
        f = d["flow"]
        out.append("")
        out.append("flow: v = (" + ", ".join(_num(c, 1e6) for c in f["velocity"]) + f") µm/s, |v| = "
                   f"{f['speed'] * 1e6:.4g} µm/s; lone captures and peak times above are for a still fluid")
        rows = [[name, "receiver (|v| a / D)", _num(pe, fmt=".3g")] for name, pe in f["peclet"].items()]
        rows += [[name, "gap (|v| d / D)", _num(pe, fmt=".3g")] for name, pe in f["gap_peclet"].items()]
        out += _table(["Peclet number", "length", "value"], rows)
    out.append("")
    if d["warnings"]:
        out += ["warnings:"] + [f"  - {w}" for w in d["warnings"]]
    else:
        out.append("warnings: none")
    return "\n".join(out)
