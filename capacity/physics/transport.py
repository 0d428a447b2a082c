"""Response-layer routing for uniform flow and reactive (partially absorbing) receivers.

:func:`lone_arrays` is the ``lone`` model when the layout has a flow or a reactive receiver: every receiver as if
alone, by closed forms where they exist (passive sphere in a flow: exact; reactive sphere without flow:
:mod:`capacity.physics.reactive`) and the Laplace-domain series of :mod:`capacity.physics.flow` otherwise (exact for
absorbing spheres in a flow, an approximation for reactive spheres in a flow). :func:`validity_notes` says where
these models were measured against the particle simulator.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from capacity.errors import InputError

#: validated ranges of the flow and reactive models (studies/validate_flow_walls.py, results/validation/)
VALIDATED = {
    "max_peclet": 8.5,  # |v| a / D of a lone absorbing sphere: flow toward, away from, across and oblique
    "max_peclet_reactive": 1.7,  # reactive spheres in a flow (drift-coupled Robin series)
    "max_peclet_renewal": 1.8,  # several absorbing beads, or a bead near a wall, in a flow (renewal model)
}


def has_transport(lay) -> bool:
    """True when the layout has a flow or a reactive receiver (fields ``flow`` and ``rates`` of the Layout)."""
    flow = getattr(lay, "flow", None)
    rates = getattr(lay, "rates", None)
    moving = flow is not None and bool(np.any(np.asarray(flow) != 0.0))
    reactive = rates is not None and bool(np.any(np.isfinite(rates) & ~lay.passive))
    return moving or reactive


def _refuse_combinations(lay) -> None:
    pulses = getattr(lay, "pulses", None)
    if pulses is not None and np.any(np.asarray(pulses) > 0.0):
        raise InputError("emitter.pulse", np.asarray(pulses).tolist(),
                         "the closed-form models do not combine release pulses with a flow or reactive receivers "
                         "yet", 'use channel.response = "particles" for this layout, or impulse releases')


def _images(lay, memory: int):
    """Receivers replaced by their mirror images across the walls (``copies`` per receiver, cell-major), as in
    :mod:`capacity.physics.walled`: a flow parallel to the walls is mirror symmetric, so the image layout in free
    space with the same flow is the walled problem (the validator refuses a flow across a wall)."""
    walls = getattr(lay, "walls", None)
    rates = np.where(lay.passive, np.inf, np.asarray(lay.rates, dtype=float))
    if walls is None:
        return lay.centres, lay.radii, lay.passive, lay.offsets, rates, 1
    from capacity.physics import images
    from capacity.physics.walled import LONE_MAX_DEPTH, _depth

    depth = _depth(lay, memory, LONE_MAX_DEPTH)[0]
    centres, copies = images.mirror_spheres(lay.centres, walls, depth)
    return (centres,) + tuple(np.tile(a, copies) for a in (lay.radii, lay.passive, lay.offsets, rates)) + (copies,)


def lone_arrays(lay, memory: int):
    """``(hits (E, R, L+1), tail (E, R))`` of every receiver as if alone, with flow and reactive receivers (and
    reflecting walls parallel to the flow, by images)."""
    from capacity.physics import images
    from capacity.physics.flow import flow_hits
    from capacity.physics.lone import lone_hits
    from capacity.physics.reactive import reactive_hits

    _refuse_combinations(lay)
    centres, radii, passive, offsets, rates, copies = _images(lay, memory)
    flow = np.asarray(lay.flow, dtype=float)
    if np.any(flow != 0.0):
        from capacity.physics.flow import MAX_PECLET, peclet_numbers

        pe = np.where(lay.passive, 0.0, peclet_numbers(lay.radii, flow, lay.diffusion))
        if pe.max() > MAX_PECLET:
            j = int(np.argmax(pe))
            raise InputError("medium.flow", flow.tolist(),
                             f"gives receiver {lay.receiver_names[j]} a Peclet number |v| a / D = {pe[j]:.3g} above "
                             f"{MAX_PECLET:g}, beyond the precision of the flow series",
                             'use channel.response = "particles", or a slower flow')
        hits, tail = flow_hits(lay.emitters, centres, radii, passive, rates, offsets, lay.diffusion,
                               lay.degradation, flow, lay.symbol_interval, memory=memory)
        return images.fold(hits, copies), images.fold(tail, copies)
    hits, tail = lone_hits(lay.emitters, centres, radii, passive, offsets, lay.diffusion, lay.degradation,
                           lay.symbol_interval, memory=memory)
    hits, tail = np.array(hits, dtype=np.float64), np.array(tail, dtype=np.float64)
    reactive = np.flatnonzero(np.isfinite(rates))
    if reactive.size:
        rh, rt = reactive_hits(lay.emitters, centres[reactive], radii[reactive], rates[reactive], lay.diffusion,
                               lay.degradation, lay.symbol_interval, memory=memory)
        hits[:, reactive], tail[:, reactive] = np.asarray(rh), np.asarray(rt)
    return images.fold(hits, copies), images.fold(tail, copies)


def validity_notes(lay) -> list[str]:
    """Sentences for layouts outside the measured range of the flow / reactive models (empty inside it)."""
    from capacity.physics.flow import MAX_PECLET, peclet_numbers

    notes: list[str] = []
    flow = np.asarray(getattr(lay, "flow", np.zeros(3)), dtype=float)
    if not np.any(flow != 0.0):
        return notes
    rates = np.where(lay.passive, np.inf, np.asarray(lay.rates, dtype=float))
    pe = peclet_numbers(lay.radii, flow, lay.diffusion)
    several = np.count_nonzero(~lay.passive) > 1 or getattr(lay, "walls", None) is not None
    for j in np.flatnonzero(~lay.passive):
        reactive = np.isfinite(rates[j])
        limit = VALIDATED["max_peclet_reactive" if reactive else ("max_peclet_renewal" if several
                                                                   else "max_peclet")]
        if pe[j] > MAX_PECLET:
            notes.append(f"receiver {lay.receiver_names[j]}: Peclet number {pe[j]:.3g} is above {MAX_PECLET:g}, "
                         "where the flow series loses precision; use the particles model")
        elif pe[j] > limit:
            kind = "reactive" if reactive else "absorbing"
            notes.append(f"receiver {lay.receiver_names[j]} ({kind}): Peclet number {pe[j]:.3g} is above the "
                         f"validated {limit:g}")
    return notes


#: largest number of absorbing spheres (receivers and wall images) handed to the renewal model with flow
FLOW_SHADOWED_MAX_SPHERES = 8


def shadowed_arrays(lay, memory: int, options: dict, lone, particles):
    """The ``shadowed`` model with a flow or reactive receivers: ``(hits, tail, stderr, notes)``.

    * at most one absorbing or reactive receiver and no wall: nothing shadows it, the lone model is exact
      (passive receivers never perturb the field);
    * absorbing receivers only (no reactive one), impulse releases, no wall or one wall: the renewal model in the
      flow (:mod:`capacity.physics.flow_shadowed`), a wall by the mirror image of every sphere (at most
      :data:`FLOW_SHADOWED_MAX_SPHERES` spheres); passive receivers from the lone model;
    * otherwise (reactive receivers with other beads or walls, a channel, pulses): the particle simulator
      (``particles``, the response layer's model function), with a note.
    """
    notes = validity_notes(lay)
    walls = getattr(lay, "walls", None)
    pulses = getattr(lay, "pulses", None)
    absorbing = np.flatnonzero(~lay.passive)
    rates = np.where(lay.passive, np.inf, np.asarray(lay.rates, dtype=float))
    if absorbing.size <= 1 and walls is None:
        hits, tail = lone(memory)
        return hits, tail, None, ["shadowed model: at most one absorbing or reactive receiver, so the lone model "
                                  "(flow / reactive closed forms) is exact for it"] + notes
    reactive = bool(np.any(np.isfinite(rates[absorbing])))
    pulsed = pulses is not None and bool(np.any(np.asarray(pulses) > 0.0))
    if not reactive and not pulsed:
        renewal = _renewal_with_flow(lay, memory, absorbing)
        if renewal is not None:
            hits, tail = lone(memory) if lay.passive.any() else (None, None)
            out_h = np.zeros((lay.emitters.shape[0], lay.centres.shape[0], memory + 1))
            out_t = np.zeros(out_h.shape[:2])
            if hits is not None:
                out_h[:, lay.passive], out_t[:, lay.passive] = hits[:, lay.passive], tail[:, lay.passive]
            out_h[:, absorbing], out_t[:, absorbing] = renewal[0], renewal[1]
            extra = ["passive receivers use the lone closed form: their counts ignore absorption by the absorbing "
                     "spheres"] if lay.passive.any() else []
            return out_h, out_t, None, ["shadowed model in the flow: absorbing receivers (and their wall images) "
                                        "take molecules from each other"] + extra + notes
    hits, tail, stderr, more = particles(lay, memory, options, lone)
    return hits, tail, stderr, ["shadowed model: reactive receivers with other beads or walls, a channel, or release "
                                "pulses are not covered by the renewal model: switched to the particle simulator"] \
        + more + notes


def _renewal_with_flow(lay, memory: int, absorbing):
    """Renewal model in the flow for the absorbing receivers (image spheres folded back), or None when the image
    layout would exceed FLOW_SHADOWED_MAX_SPHERES."""
    from capacity.physics import images
    from capacity.physics.flow_shadowed import shadowed_flow_arrays

    centres, radii, copies = lay.centres[absorbing], lay.radii[absorbing], 1
    walls = getattr(lay, "walls", None)
    if walls is not None:
        if walls.channel or 2 * absorbing.size > FLOW_SHADOWED_MAX_SPHERES:
            return None  # a channel needs many images: left to the particle simulator
        centres, copies = images.mirror_spheres(centres, walls, 0)  # one wall: each sphere and its mirror image
        radii = np.tile(radii, copies)
    hits, tail = shadowed_flow_arrays(lay.emitters, centres, radii, lay.diffusion, lay.degradation,
                                      np.asarray(lay.flow, dtype=float), lay.symbol_interval, memory)
    return images.fold(hits, copies), images.fold(tail, copies)


class Transport(NamedTuple):
    """Hashable flow / reaction settings of a design problem: rates (R,) m/s (inf: absorbing, 0: passive) and
    flow (3,) m/s, as tuples of floats."""

    rates: tuple
    flow: tuple


def transport_spec(scenario) -> Transport | None:
    """The scenario's :class:`Transport`, or None when it has neither a flow nor a reactive receiver."""
    rates = tuple(float(x) for x in scenario.reaction_rates)
    flow = tuple(float(x) for x in scenario.medium.flow)
    reactive = any(r.kind == "reactive" for r in scenario.receivers)
    return Transport(rates, flow) if reactive or any(v != 0.0 for v in flow) else None


def design_hits(spec: Transport, emitters, centres, radii, passive, offsets, diffusion, degradation,
                symbol_interval, memory: int, walls=None, depth: int = 0):
    """Differentiable ``(hits (E, R, L+1), tail (E, R))`` for the design stage (JAX arrays; ``passive`` a
    concrete bool mask): the flow series of :mod:`capacity.physics.flow` with a flow, else the lone closed forms
    with the reactive columns from :mod:`capacity.physics.reactive`. ``walls`` (a
    :class:`capacity.physics.images.WallGeometry`) with image ``depth``: every receiver is replaced by its images
    (cells ``|m| <= depth``) and the copies are summed back, as in the response layer."""
    import jax.numpy as jnp

    from capacity.physics.flow import flow_hits_traced
    from capacity.physics.lone import lone_hits
    from capacity.physics.reactive import reactive_hits

    passive = np.asarray(passive, dtype=bool)
    rates = np.where(passive, np.inf, np.asarray(spec.rates, dtype=float))
    flow = np.asarray(spec.flow, dtype=float)
    copies = 1
    if walls is not None:
        from capacity.physics import images

        cells = images.image_cells(walls, int(depth))
        centres = jnp.concatenate([images.image_points_jax(centres, walls, m) for m in cells])
        copies = len(cells)
        radii, offsets = jnp.tile(radii, copies), jnp.tile(offsets, copies)
        passive, rates = np.tile(passive, copies), np.tile(rates, copies)
    if np.any(flow != 0.0):
        hits, tail = flow_hits_traced(emitters, centres, radii, passive, rates, offsets, diffusion, degradation,
                                      jnp.asarray(flow), symbol_interval, memory)
    else:
        hits, tail = lone_hits(emitters, centres, radii, jnp.asarray(passive), offsets, diffusion, degradation,
                               symbol_interval, memory)
        reactive = np.flatnonzero(np.isfinite(rates))
        if reactive.size:
            rh, rt = reactive_hits(emitters, centres[reactive], radii[reactive], jnp.asarray(rates[reactive]),
                                   diffusion, degradation, symbol_interval, memory)
            hits, tail = hits.at[:, reactive].set(rh), tail.at[:, reactive].set(rt)
    n_e, n_r = hits.shape[0], hits.shape[1] // copies
    return (hits.reshape(n_e, copies, n_r, -1).sum(axis=1), tail.reshape(n_e, copies, n_r).sum(axis=1))


def growing_lone(lay, tolerance: float, cap: int, lone, start: int = 32):
    """Lone ``(hits, tail)`` at the smallest L in ``start, 2 start, ...`` (at most ``cap``) whose last slot above
    ``tolerance`` x the pair's peak lies in the first 3/4 of the slots (the responses decay after their peak), so
    that ``memory = "auto"`` does not evaluate ``cap`` lags of the flow series. ``lone(lay, L)`` computes them."""
    lags = min(start, cap)
    while True:
        hits, tail = lone(lay, lags)
        above = hits > tolerance * hits.max(axis=-1, keepdims=True)
        last = int(np.where(above, np.arange(hits.shape[-1]), 0).max())
        if last < 0.75 * lags or lags >= cap:
            return hits, tail
        lags = min(2 * lags, cap)
