"""``channel_response``: choose a response model and the memory, and return a :class:`ChannelResponse`.

Models (a small table, name -> function; each is imported only when used):

* ``lone`` -- :func:`capacity.physics.lone.lone_hits`, every receiver as if alone (closed forms);
* ``shadowed`` -- :func:`capacity.physics.shadowed.shadowed_hits` for the absorbing receivers (they take molecules
  from each other), lone closed forms for the passive ones (a passive sphere does not perturb the field);
* ``particles`` -- :func:`capacity.physics.particles.simulate_hits`, Brownian simulation of the whole layout.

Every response is checked before it is returned (:func:`broken_invariants`): probabilities in [0, 1], capture
totals <= 1 (per receiver, and for the shadowing models over all receivers). Where the shadowed model breaks
them (an emitter very close to a bead) the particle simulator is used instead, with a note; any other breach
raises :class:`InputError` naming the layout and the invariant. Round-off below :data:`ROUND_OFF` is clipped.

Memory ``"auto"``: the smallest L such that, for every emitter-receiver pair, every slot after L has a hit
probability of at most ``memory_tolerance`` times the pair's largest slot. It is decided from the ``lone`` model
(cheap) with up to :data:`MEMORY_CAP` lags, whichever model then computes the response; lone responses are
unimodal in the lag, so no later slot rises above the threshold again.
"""

from __future__ import annotations

import numbers
import warnings
from typing import NamedTuple

import numpy as np

from capacity.errors import InputError
from capacity.physics.result import ChannelResponse

#: largest memory "auto" may choose, in lags
MEMORY_CAP = 2000
#: largest number of particle time steps ((L+1) Ts / particle_step) the particle model is asked to take
PARTICLE_STEP_LIMIT = 1e6


class Layout(NamedTuple):
    """The scenario as arrays, SI units (built and validated by :func:`layout_arrays`)."""

    emitters: np.ndarray  # (E, 3) m
    centres: np.ndarray  # (R, 3) m
    radii: np.ndarray  # (R,) m
    passive: np.ndarray  # (R,) bool
    offsets: np.ndarray  # (R,) s, passive sampling instant within the slot
    diffusion: float  # m^2/s
    degradation: float  # 1/s
    symbol_interval: float  # s
    emitter_names: tuple[str, ...]
    receiver_names: tuple[str, ...]
    walls: object = None  # capacity.physics.images.WallGeometry, or None without walls
    pulses: np.ndarray | None = None  # (E,) s, release durations (None or 0: impulses)
    rates: np.ndarray | None = None  # (R,) m/s surface reaction rates (inf: absorbing), None: all absorbing
    flow: np.ndarray | None = None  # (3,) m/s uniform flow, None: still fluid


def _positive(field, value):
    if not (np.isfinite(value) and value > 0):
        raise InputError(field, value, "must be a finite positive number", "give a value > 0 in SI units")


def layout_arrays(scenario) -> Layout:
    """Validate what the response models need and return the layout as arrays (raises InputError)."""
    if len(scenario.emitters) == 0:
        raise InputError("emitters", (), "at least one emitter is needed", "add an emitter")
    if len(scenario.receivers) == 0:
        raise InputError("receivers", (), "at least one receiver is needed", "add a receiver")
    medium, ch = scenario.medium, scenario.channel
    _positive("medium.diffusion", medium.diffusion)
    if not (np.isfinite(medium.degradation) and medium.degradation >= 0):
        raise InputError("medium.degradation", medium.degradation, "must be finite and >= 0", "use 0 for none")
    _positive("channel.symbol_interval", ch.symbol_interval)
    ts = float(ch.symbol_interval)
    emitters, centres, radii = scenario.emitter_positions, scenario.receiver_centres, scenario.receiver_radii
    if not (np.all(np.isfinite(emitters)) and np.all(np.isfinite(centres))):
        raise InputError("positions", "non-finite", "every position must be finite", "give coordinates in metres")
    offsets = np.empty(len(scenario.receivers))
    passive = np.empty(len(scenario.receivers), dtype=bool)
    for j, rec in enumerate(scenario.receivers):
        _positive(f"receiver[{j}].radius", rec.radius)
        if rec.kind not in ("absorbing", "passive", "reactive"):
            raise InputError(f"receiver[{j}].kind", rec.kind, "unknown receiver kind",
                             "use 'absorbing', 'reactive' or 'passive'")
        passive[j] = rec.kind == "passive"
        off = ts if rec.sample_offset is None else float(rec.sample_offset)
        if not (0.0 < off <= ts):
            raise InputError(f"receiver[{j}].sample_offset", rec.sample_offset, f"must lie in (0, Ts = {ts:g} s]",
                             "give a sampling instant within the slot, or leave it out for the slot's end")
        offsets[j] = off
    gaps = np.linalg.norm(emitters[:, None, :] - centres[None, :, :], axis=-1) - radii[None, :]
    bad = np.argwhere((gaps <= 0.0) & ~passive[None, :])
    if bad.size:
        i, j = bad[0]
        raise InputError(f"emitter[{i}].position", emitters[i].tolist(),
                         f"lies in or on absorbing receiver {j} (gap {gaps[i, j]:.3g} m)",
                         "move the emitter outside the sphere")
    from capacity.physics.images import wall_geometry

    return Layout(emitters, centres, radii, passive, offsets, float(medium.diffusion), float(medium.degradation),
                  ts, tuple(e.name for e in scenario.emitters), tuple(r.name for r in scenario.receivers),
                  wall_geometry(getattr(scenario, "walls", ())), scenario.emitter_pulses)


def _lone_arrays(lay: Layout, memory: int):
    from capacity.physics.lone import lone_hits
    from capacity.physics.transport import has_transport

    if has_transport(lay):
        from capacity.physics.transport import lone_arrays as transport_arrays

        return transport_arrays(lay, memory)

    if lay.walls is not None or np.any(lay.pulses > 0.0):
        from capacity.physics.walled import lone_arrays

        return lone_arrays(lay, memory)
    hits, tail = lone_hits(lay.emitters, lay.centres, lay.radii, lay.passive, lay.offsets, lay.diffusion,
                           lay.degradation, lay.symbol_interval, memory=memory)
    return np.asarray(hits, dtype=np.float64), np.asarray(tail, dtype=np.float64)


def auto_memory(lay: Layout, tolerance: float):
    """Smallest L such that every slot after L is <= tolerance x the pair's peak slot (lone model, <= MEMORY_CAP).

    Returns ``(L, hits, tail)`` with the lone hits (E, R, MEMORY_CAP+1) and tail (E, R) it was decided from.
    """
    from capacity.physics.transport import growing_lone, has_transport

    if has_transport(lay):  # the flow series costs per lag: L doubles until the later slots are below tolerance
        hits, tail = growing_lone(lay, tolerance, MEMORY_CAP, _lone_arrays)
    else:
        hits, tail = _lone_arrays(lay, MEMORY_CAP)
    peak = hits.max(axis=-1, keepdims=True)
    above = hits > tolerance * peak
    lags = np.arange(hits.shape[-1])
    last = np.where(above, lags, 0).max(axis=-1)  # (E, R) last lag above the threshold
    if np.any(last >= MEMORY_CAP):
        i, j = np.argwhere(last >= MEMORY_CAP)[0]
        raise InputError("channel.memory", "auto",
                         f"emitter {i} -> receiver {j} is still above {tolerance:g} x its peak after "
                         f"{MEMORY_CAP} lags",
                         "lengthen channel.symbol_interval, raise channel.memory_tolerance, or give memory "
                         "explicitly")
    return int(last.max()), hits, tail


def _truncate(hits, tail, memory: int):
    """Lone response at a shorter memory from a longer one; the dropped slots join the tail (sum of positives)."""
    return hits[..., : memory + 1].copy(), tail + hits[..., memory + 1:].sum(axis=-1)


class _Lone:
    """Lone hits at a given memory, computed once (or cut from the MEMORY_CAP run of memory "auto")."""

    def __init__(self, lay: Layout, longer=None):
        self.lay, self.longer = lay, longer

    def __call__(self, memory: int):
        if self.longer is None or memory >= self.longer[0].shape[-1]:
            self.longer = _lone_arrays(self.lay, memory)
        return _truncate(*self.longer, memory)


# ------------------------------------------------------------------------------------------- the models
def _lone(lay: Layout, memory: int, options: dict, lone):
    hits, tail = lone(memory)
    return hits, tail, None, ["lone model: every receiver treated as if alone (no shadowing between receivers)"]


def _shadowed(lay: Layout, memory: int, options: dict, lone):
    from capacity.physics.shadowed import shadowed_hits, validity_notes
    from capacity.physics.transport import has_transport

    if has_transport(lay):
        from capacity.physics.transport import shadowed_arrays

        return shadowed_arrays(lay, memory, options, lone, _particles)

    shape = (lay.emitters.shape[0], lay.centres.shape[0])
    hits, tail = np.zeros(shape + (memory + 1,)), np.zeros(shape)
    if lay.passive.any():
        lone_hits_, lone_tail = lone(memory)
        hits[:, lay.passive], tail[:, lay.passive] = lone_hits_[:, lay.passive], lone_tail[:, lay.passive]
    notes = []
    absorbing = np.flatnonzero(~lay.passive)
    if absorbing.size:
        if lay.walls is not None or np.any(lay.pulses > 0.0):
            from capacity.physics.walled import shadowed_arrays

            sh, st = shadowed_arrays(lay, absorbing, memory)
        else:
            sh, st = shadowed_hits(lay.emitters, lay.centres[absorbing], lay.radii[absorbing], lay.diffusion,
                                   lay.degradation, lay.symbol_interval, memory)
        hits[:, absorbing, :] = np.asarray(sh, dtype=np.float64)
        tail[:, absorbing] = np.asarray(st, dtype=np.float64)
        checks = list(validity_notes(lay.emitters, lay.centres[absorbing], lay.radii[absorbing], lay.diffusion,
                                     lay.degradation))
        if checks:
            warnings.warn("shadowed model outside its validated range: " + "; ".join(checks), stacklevel=3)
        notes += checks
    if lay.passive.any() and absorbing.size:
        notes.append("passive receivers use the lone closed form: their counts ignore absorption by the absorbing "
                     "spheres")
    return hits, tail, None, ["shadowed model: absorbing receivers take molecules from each other"] + notes


def particle_step_count(lay: Layout, memory: int, particle_step: float | None) -> float:
    """Base time steps ((L+1) Ts / dt) of the particle model, dt = ``particle_step`` (s) or, for None, the
    simulator's own automatic step."""
    from capacity.physics._particles_checks import auto_time_step, check_inputs

    dt = particle_step
    if dt is None:
        inputs = check_inputs(lay.emitters, lay.centres, lay.radii, lay.passive, lay.offsets, lay.diffusion,
                              lay.degradation, lay.symbol_interval, memory, 1, 0, None)
        dt = auto_time_step(inputs)
    return (memory + 1) * lay.symbol_interval / dt


def _particles(lay: Layout, memory: int, options: dict, lone):
    from capacity.physics.particles import simulate_hits

    steps = particle_step_count(lay, memory, options["particle_step"])
    if steps > PARTICLE_STEP_LIMIT:
        raise InputError("channel.memory", memory,
                         f"the particle model would take {steps:.3g} time steps ((L+1) Ts / particle_step), above "
                         f"{PARTICLE_STEP_LIMIT:.0e}",
                         "keep fewer lags (smaller memory or larger memory_tolerance), set a longer "
                         "channel.particle_step, or use the lone or shadowed model")
    from capacity.physics.particle_budget import check_run_time

    def run(n, progress=False):
        return simulate_hits(lay.emitters, lay.centres, lay.radii, lay.passive, lay.offsets, lay.diffusion,
                             lay.degradation, lay.symbol_interval, memory, particles=int(n), seed=int(options["seed"]),
                             time_step=options["particle_step"], progress=progress, walls=lay.walls, pulses=lay.pulses,
                             reaction_rates=lay.rates, flow=lay.flow)

    check_run_time(run, int(options["particle_count"]), force=bool(options.get("force")))
    hits, tail, stderr = run(options["particle_count"], options["progress"])
    hits, tail = np.array(hits, dtype=np.float64), np.array(tail, dtype=np.float64)
    notes = [f"particles model: {int(options['particle_count'])} molecules per emitter, seed {int(options['seed'])}"]
    if lay.passive.any():
        _, lone_tail = lone(memory)
        tail[:, lay.passive] = lone_tail[:, lay.passive]
        notes.append("passive tails (samples after lag L) from the lone closed form")
    return hits, tail, np.asarray(stderr, dtype=np.float64), notes


MODELS = {"lone": _lone, "shadowed": _shadowed, "particles": _particles}
#: slack for round-off in the invariants a response must hold
ROUND_OFF = 1e-9


def _shared_totals(hits, tail, passive) -> np.ndarray:
    """(E,) share of each emitter's molecules captured by all absorbing receivers together."""
    return (hits.sum(axis=-1) + tail)[:, ~passive].sum(axis=1)


#: the shadowed model is used only where every emitter is at least this many radii from every absorbing bead's
#: surface (when there are two or more): measured against particles (studies/validate_near_bead.py,
#: results/validation/near_bead.csv) it holds from 0.1 radius up, and at 0.05 radius it breaks no invariant but
#: puts 3.5 times too much on the far bead
NEAR_BEAD = 0.1


def near_bead(lay: Layout) -> str | None:
    """Why the shadowed model must not be used for this layout (an emitter closer than :data:`NEAR_BEAD` radii to
    an absorbing bead while another absorbing bead shares the fluid), or None."""
    absorbing = np.flatnonzero(~lay.passive)
    if absorbing.size < 2:
        return None  # one absorbing bead: the shadowed model is its exact lone closed form
    d = np.linalg.norm(lay.emitters[:, None, :] - lay.centres[None, absorbing, :], axis=-1)
    ratio = (d - lay.radii[absorbing][None, :]) / lay.radii[absorbing][None, :]
    i, j = np.unravel_index(int(np.argmin(ratio)), ratio.shape)
    if ratio[i, j] >= NEAR_BEAD:
        return None
    return (f"is outside its measured range here: emitter {lay.emitter_names[i]} is {ratio[i, j]:.3g} radii from "
            f"the surface of {lay.receiver_names[absorbing[j]]} (it holds from {NEAR_BEAD:g} radius; closer, the "
            "other beads' counts are wrong)")


def broken_invariants(hits, tail, passive, *, shared: bool) -> list[str]:
    """What a response breaks, beyond round-off: finite values, slot probabilities in [0, 1], non-negative tails,
    each absorbing pair's total capture <= 1, and (``shared``: models in which receivers shadow each other) all
    absorbing receivers together <= 1 per emitter. Empty when everything holds."""
    hits, tail = np.asarray(hits, dtype=float), np.asarray(tail, dtype=float)
    if not (np.all(np.isfinite(hits)) and np.all(np.isfinite(tail))):
        return ["non-finite hit probabilities"]
    out = []
    if hits.min() < -ROUND_OFF:
        out.append(f"a slot probability {hits.min():.3g} < 0")
    if hits.max() > 1.0 + ROUND_OFF:
        out.append(f"a slot probability {hits.max():.3g} > 1")
    if tail.min() < -ROUND_OFF:
        out.append(f"a tail {tail.min():.3g} < 0")
    totals = (hits.sum(axis=-1) + tail)[:, ~passive]
    if totals.size and totals.max() > 1.0 + ROUND_OFF:
        out.append(f"a receiver capturing {totals.max():.4g} > 1 of an emitter's molecules")
    if shared and totals.size and _shared_totals(hits, tail, passive).max() > 1.0 + ROUND_OFF:
        out.append(f"receivers together capturing {_shared_totals(hits, tail, passive).max():.4g} > 1")
    return out


def channel_response(scenario, model=None, *, memory=None, particle_count=None, seed=None, particle_step=None,
                     progress=False, force=False, particles=None, time_step=None) -> ChannelResponse:
    """Hit probabilities ``p[i, j, l]`` of a scenario with the chosen response model.

    scenario : :class:`capacity.Scenario`. model : ``"lone"`` | ``"shadowed"`` | ``"particles"`` (default
    ``scenario.channel.response``). memory : int L >= 0 or ``"auto"`` (default ``scenario.channel.memory``).
    particle_count (molecules per emitter), seed, particle_step (s) : particle-model settings overriding
    ``scenario.channel``. progress : show a progress bar (particles). force : start a particle run even when a
    timed pilot estimates it at more than an hour (:mod:`capacity.physics.particle_budget`; otherwise
    InputError). particles, time_step : deprecated spellings of particle_count and particle_step, still accepted
    with a ``DeprecationWarning`` for one release (giving both spellings is an InputError).

    Returns a :class:`ChannelResponse` with float64 numpy arrays: hits (E, R, L+1), tail (E, R), stderr
    (E, R, L+1) for ``particles`` else None, slot_edges ``Ts * arange(L+2)`` (s), and notes (model remarks, the
    memory, its tolerance and the largest tail mass). Raises :class:`InputError` for an unknown model, bad
    memory, or a layout the model cannot take.
    """
    particle_count = _renamed_keyword("particles", particles, "particle_count", particle_count)
    particle_step = _renamed_keyword("time_step", time_step, "particle_step", particle_step)
    ch = scenario.channel
    _check_particle_settings(particle_count, particle_step, ch.symbol_interval)
    name = ch.response if model is None else model
    if name not in MODELS:
        raise InputError("channel.response", name, "unknown response model", f"use one of {sorted(MODELS)}")
    lay = layout_arrays(scenario)._replace(rates=scenario.reaction_rates, flow=scenario.flow)
    setting = ch.memory if memory is None else memory
    notes = []
    if isinstance(setting, str):
        if setting != "auto":
            raise InputError("channel.memory", setting, "must be a whole number of lags or 'auto'",
                             "give e.g. memory = 10, or 'auto'")
        tol = float(ch.memory_tolerance)
        if not (0.0 < tol < 1.0):
            raise InputError("channel.memory_tolerance", ch.memory_tolerance, "must lie in (0, 1)",
                             "give e.g. 0.01")
        lags, cap_hits, cap_tail = auto_memory(lay, tol)
        lone = _Lone(lay, (cap_hits, cap_tail))
        notes.append(f"memory auto: L = {lags} lags (smallest with every later slot <= {tol:g} x the pair's "
                     f"largest slot, decided from the lone model)")
    else:
        if isinstance(setting, bool) or int(setting) != setting or setting < 0:
            raise InputError("channel.memory", setting, "must be a whole number >= 0 or 'auto'",
                             "give e.g. memory = 10")
        lags = int(setting)
        lone = _Lone(lay)
        notes.append(f"memory: L = {lags} lags (given)")
    options = {"particle_count": ch.particle_count if particle_count is None else particle_count,
               "seed": ch.seed if seed is None else seed,
               "particle_step": ch.particle_step if particle_step is None else particle_step,
               "progress": progress, "force": force}
    too_near = near_bead(lay) if name == "shadowed" else None
    if too_near:  # outside the measured range: do not compute what would be silently wrong
        hits = tail = stderr = None
        problems, model_notes = [too_near], []
    else:
        hits, tail, stderr, model_notes = MODELS[name](lay, lags, options, lone)
        if lay.walls is not None:
            from capacity.physics.walled import recurrent_tail

            tail = recurrent_tail(lay, hits, tail, name)
        problems = broken_invariants(hits, tail, lay.passive, shared=name != "lone")
    if problems and name == "shadowed":
        why = too_near or f"broke {'; '.join(problems)} on this layout"
        model_notes = [f"the shadowed model {why}: switched to the particle simulator"]
        fallback = dict(options)
        if options["particle_step"] is None and particle_step_count(lay, lags, None) > PARTICLE_STEP_LIMIT:
            # the automatic step near a very close emitter is tiny; the exact radial crossing correction keeps
            # coarser steps accurate (tests/test_particles.py), so cap the number of steps instead of refusing
            fallback["particle_step"] = (lags + 1) * lay.symbol_interval / PARTICLE_STEP_LIMIT
        hits, tail, stderr, more = _particles(lay, lags, fallback, lone)
        if lay.walls is not None:
            tail = recurrent_tail(lay, hits, tail, "particles")
        model_notes += more
        name = "particles"
        problems = broken_invariants(hits, tail, lay.passive, shared=True)
    if problems:
        fix = "move emitters further from the receivers, or use channel.response = 'particles'"
        if name == "lone" and lay.walls is not None:
            fix = ("use channel.response = 'shadowed' or 'particles': with walls the lone model does not treat an "
                   "absorbing receiver's own mirror images as absorbers, so near a wall or in a channel it over-counts")
        raise InputError("layout", scenario.name, f"the {name} response model gives {'; '.join(problems)}", fix)
    hits, tail = np.clip(hits, 0.0, None), np.clip(tail, 0.0, None)  # round-off below ROUND_OFF only
    if name == "lone":
        over = _shared_totals(hits, tail, lay.passive)
        if over.max() > 1.0 + ROUND_OFF:
            i = int(np.argmax(over))
            model_notes.append(f"the lone model lets the absorbing receivers together capture {over[i]:.3g} > 1 "
                               f"of {lay.emitter_names[i]}'s molecules (it ignores that they shadow each other): "
                               "use the shadowed or particles model for this layout")
    if lay.walls is not None or np.any(lay.pulses > 0.0):
        from capacity.physics.walled import notes as wall_notes

        model_notes += wall_notes(lay, lags, name)
    i, j = np.unravel_index(int(np.argmax(tail)), tail.shape)
    notes.append(f"largest tail mass beyond lag {lags}: {tail[i, j]:.3g} ({lay.emitter_names[i]} -> "
                 f"{lay.receiver_names[j]})")
    return ChannelResponse(hits=hits, tail=tail, stderr=stderr, model=name,
                           slot_edges=lay.symbol_interval * np.arange(lags + 2, dtype=np.float64),
                           notes=tuple(model_notes + notes))


def _renamed_keyword(old: str, old_value, new: str, new_value):
    """The value of a keyword argument of :func:`channel_response` given under its deprecated name ``old`` (with a
    ``DeprecationWarning``) or its new name ``new``; both at once is an :class:`InputError`."""
    if old_value is None:
        return new_value
    if new_value is not None:
        raise InputError(old, old_value, f"is the old name of {new}, which is also given ({new_value!r})",
                         f"pass only {new}=")
    warnings.warn(f"channel_response({old}=...) is deprecated: pass {new}=... instead (same meaning and units)",
                  DeprecationWarning, stacklevel=3)
    return old_value


def _check_particle_settings(particle_count, particle_step, symbol_interval: float) -> None:
    """The particle-model overrides of :func:`channel_response`, named as its keywords (None: not given)."""
    if particle_count is not None and (isinstance(particle_count, bool)
                                       or not isinstance(particle_count, numbers.Integral) or particle_count < 1):
        raise InputError("particle_count", particle_count, "must be a whole number of molecules >= 1",
                         "pass e.g. particle_count=20000")
    if particle_step is not None and (isinstance(particle_step, bool) or not isinstance(particle_step, numbers.Real)
                                      or not 0.0 < float(particle_step) < float("inf")):
        raise InputError("particle_step", particle_step, "must be a finite time step > 0 in seconds",
                         "pass e.g. particle_step=1e-3, or leave it out for the automatic step")
    if particle_step is not None and particle_step > symbol_interval:
        raise InputError("particle_step", particle_step, f"is longer than the symbol_interval ({symbol_interval:g} s)",
                         "pass a step well below the slot length, or leave it out for the automatic step")
