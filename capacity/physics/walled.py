"""The ``lone`` and ``shadowed`` models on layouts with reflecting walls and release pulses.

Walls: the receivers are replaced by their image layout (:mod:`capacity.physics.images`), the model runs on it
with the real emitters, and the image copies are summed back onto their receivers. Pulses: emitters with a
release duration > 0 use :mod:`capacity.physics.pulses`, the others the impulse models. The functions take the
``Layout`` of :mod:`capacity.physics.response` and return NumPy float64 arrays.
"""

from __future__ import annotations

import numpy as np

from capacity.physics import images as _img

#: largest image depth of the lone model in a channel (2 * depth + 1 copies of each receiver)
LONE_MAX_DEPTH = 400
#: largest number of absorbing spheres (receivers and their images) handed to the shadowed model in a channel
SHADOWED_MAX_SPHERES = 24


def _depth(lay, memory: int, max_depth: int):
    horizon = (memory + 1) * lay.symbol_interval
    return _img.choose_depth(lay.walls, lay.emitters, horizon, lay.diffusion, lay.degradation, max_depth=max_depth)


def _pulses(lay) -> np.ndarray:
    p = getattr(lay, "pulses", None)
    return np.zeros(lay.emitters.shape[0]) if p is None else np.asarray(p, dtype=float)


def _by_pulse(lay, impulse, pulsed):
    """Run ``impulse(emitters)`` for impulse emitters and ``pulsed(emitters, pulses)`` for the others."""
    pulses = _pulses(lay)
    spread = pulses > 0.0
    out_h, out_t = None, None
    for mask, run in ((~spread, lambda e: impulse(e)), (spread, lambda e: pulsed(e, pulses[spread]))):
        if not mask.any():
            continue
        h, t = run(lay.emitters[mask])
        h, t = np.asarray(h, dtype=np.float64), np.asarray(t, dtype=np.float64)
        if out_h is None:
            out_h = np.zeros((lay.emitters.shape[0],) + h.shape[1:])
            out_t = np.zeros((lay.emitters.shape[0],) + t.shape[1:])
        out_h[mask], out_t[mask] = h, t
    return out_h, out_t


def lone_arrays(lay, memory: int):
    """Lone hits (E, R, L+1) and tails (E, R) with walls (images, depth for the horizon (L+1) Ts) and pulses."""
    from capacity.physics.lone import lone_hits
    from capacity.physics.pulses import lone_pulse_hits

    centres, radii, passive, offsets, copies = lay.centres, lay.radii, lay.passive, lay.offsets, 1
    if lay.walls is not None:
        depth, _, _ = _depth(lay, memory, LONE_MAX_DEPTH)
        centres, copies = _img.mirror_spheres(lay.centres, lay.walls, depth)
        radii, passive, offsets = (np.tile(a, copies) for a in (lay.radii, lay.passive, lay.offsets))
    common = (lay.diffusion, lay.degradation, lay.symbol_interval)

    def impulse(e):
        return lone_hits(e, centres, radii, passive, offsets, *common, memory=memory)

    def pulsed(e, p):
        return lone_pulse_hits(e, centres, radii, passive, offsets, p, *common, memory=memory)

    hits, tail = _by_pulse(lay, impulse, pulsed)
    return _img.fold(hits, copies), _img.fold(tail, copies)


def shadowed_depth(lay, memory: int, n_absorbing: int) -> int:
    """Image depth of the shadowed model: the bound's choice, capped at :data:`SHADOWED_MAX_SPHERES` spheres."""
    cap = max(0, (SHADOWED_MAX_SPHERES // max(n_absorbing, 1) - 1) // 2)
    return _depth(lay, memory, cap)[0]


def shadowed_arrays(lay, absorbing, memory: int):
    """Shadowed hits (E, A, L+1) and tails (E, A) of the absorbing receivers ``absorbing`` (indices), with walls
    and pulses."""
    from capacity.physics.pulses import laplace_hits

    centres, radii, copies = lay.centres[absorbing], lay.radii[absorbing], 1
    if lay.walls is not None:
        depth = shadowed_depth(lay, memory, len(absorbing))
        centres, copies = _img.mirror_spheres(centres, lay.walls, depth)
        radii = np.tile(radii, copies)
    common = (lay.diffusion, lay.degradation, lay.symbol_interval)

    def impulse(e):
        return laplace_hits(e, centres, radii, *common, memory)

    def pulsed(e, p):
        return laplace_hits(e, centres, radii, *common, memory, p)

    hits, tail = _by_pulse(lay, impulse, pulsed)
    return _img.fold(hits, copies), _img.fold(tail, copies)


#: image depth of the design objectives in a channel (they differentiate through every copy)
DESIGN_MAX_DEPTH = 12


def design_depth(walls, emitters, horizon: float, diffusion: float, degradation: float, model: str,
                 n_receivers: int) -> tuple[int, float, float]:
    """(depth, slot bound, tail bound) of the image layout the design objectives use (capped for cost)."""
    if walls is None:
        return 0, 0.0, 0.0
    cap = DESIGN_MAX_DEPTH
    if model == "shadowed":
        cap = min(cap, max(0, (SHADOWED_MAX_SPHERES // max(n_receivers, 1) - 1) // 2))
    return _img.choose_depth(walls, emitters, horizon, diffusion, degradation, max_depth=cap)


def design_hits(model: str, walls, depth: int, pulses, emitters, centres, radii, passive, offsets, diffusion,
                degradation, symbol_interval, memory: int):
    """Differentiable ``(hits (E, R, L+1), tail (E, R))`` for the design objectives, with walls (images up to
    ``depth``; ``walls`` a :class:`~capacity.physics.images.WallGeometry` or None) and release ``pulses`` ((E,)
    seconds or None). ``model`` is "lone" or "shadowed"; ``passive`` a NumPy bool array (static)."""
    import jax.numpy as jnp

    from capacity.physics.lone import lone_hits
    from capacity.physics.pulses import laplace_hits, lone_pulse_hits
    from capacity.physics.shadowed import shadowed_hits

    n_rx = int(np.asarray(passive).shape[0])
    copies = 1
    if walls is not None:
        cells = _img.image_cells(walls, depth)
        copies = len(cells)
        centres = jnp.concatenate([_img.image_points_jax(centres, walls, m) for m in cells])
        radii, offsets = jnp.tile(radii, copies), jnp.tile(offsets, copies)
        passive = np.tile(np.asarray(passive), copies)
    common = (diffusion, degradation, symbol_interval)

    def impulse():
        if model == "shadowed":
            return shadowed_hits(emitters, centres, radii, *common, memory)
        return lone_hits(emitters, centres, radii, jnp.asarray(passive), offsets, *common, memory=memory)

    hits, tail = impulse()
    if pulses is not None:
        p = jnp.asarray(np.asarray(pulses, dtype=float))
        spread = p > 0.0
        safe = jnp.where(spread, p, symbol_interval)  # no division by 0 (and no NaN gradient) for impulses
        if model == "shadowed":
            hp, tp = laplace_hits(emitters, centres, radii, *common, memory, safe)
        else:
            hp, tp = lone_pulse_hits(emitters, centres, radii, jnp.asarray(passive), offsets, safe, *common,
                                     memory=memory)
        hits = jnp.where(spread[:, None, None], hp, hits)
        tail = jnp.where(spread[:, None], tp, tail)
    e = hits.shape[0]
    hits = hits.reshape(e, copies, n_rx, -1).sum(axis=1)
    tail = tail.reshape(e, copies, n_rx).sum(axis=1)
    return hits, tail


def recurrent_tail(lay, hits, tail, model: str):
    """Tails in a channel without degradation, where every molecule meets an absorbing receiver eventually.

    The image series of the eventual capture does not converge there, so the absorbing tails are set from
    conservation instead: ``lone`` (each receiver alone in the channel) ``tail_j = 1 - sum_l hits_j`` (exact for
    the model's slots); shared models: the absorbing tails sum to ``1 - sum_j sum_l hits_j`` (exact), split in
    proportion to the model's tails of the kept images (an approximation). Other layouts are returned unchanged.
    Both arrays are float64 numpy, (E, R, L+1) and (E, R).
    """
    if lay.walls is None or not lay.walls.channel or lay.degradation > 0.0 or not np.any(~lay.passive):
        return tail
    tail = np.array(tail, dtype=np.float64)
    absorbing = ~lay.passive
    kept = np.asarray(hits, dtype=np.float64).sum(axis=-1)[:, absorbing]  # (E, A)
    if model == "lone":
        tail[:, absorbing] = np.clip(1.0 - kept, 0.0, None)
        return tail
    rest = np.clip(1.0 - kept.sum(axis=1, keepdims=True), 0.0, None)  # (E, 1)
    share = np.clip(tail[:, absorbing], 0.0, None)
    total = share.sum(axis=1, keepdims=True)
    weights = np.where(total > 0.0, share / np.where(total > 0.0, total, 1.0), 1.0 / share.shape[1])
    tail[:, absorbing] = rest * weights
    return tail


def notes(lay, memory: int, model: str) -> list[str]:
    """What the walls and pulses did to this response, with the truncation bounds (empty without either)."""
    out = []
    pulses = _pulses(lay)
    if np.any(pulses > 0.0):
        spread = ", ".join(f"{n} {p * 1e3:.4g} ms" for n, p in zip(lay.emitter_names, pulses, strict=True) if p > 0)
        how = {"particles": "each molecule released at a uniform random time in the window",
               "lone": "closed form (absorbing) and 256-node quadrature over the window (passive)",
               "shadowed": "Talbot inversion of the renewal transforms divided by p^2"}[model]
        out.append(f"release pulses (rectangular): {spread}; {how}")
    if lay.walls is None:
        return out
    geom = lay.walls
    gaps = _img.wall_distances(lay.centres, geom) - lay.radii[:, None]
    nearest = int(np.argmin(gaps.min(axis=1)))
    walls = "two parallel reflecting walls (a channel" + f" {geom.width * 1e6:.4g} um wide)" if geom.channel \
        else "one reflecting wall"
    if model == "particles":
        if geom.channel and lay.degradation <= 0.0:
            out.append("channel without degradation: the absorbing tails are 1 minus the kept slots (every molecule "
                       "is taken eventually), shared between absorbing receivers in proportion to the survivors' "
                       "image-sum capture estimates")
        out.append(f"{walls}: exact reflection of every step's end point; absorbing spheres are tested together with "
                   "their mirror images across each wall (a contact with the image is a contact after a bounce)")
        if geom.channel:
            out.append("channel: images of absorbing spheres up to two reflections deep are tested, and steps are "
                       "limited to a displacement of about 0.6 channel widths, so a step bouncing three times is "
                       "not followed into a sphere (probability ~1e-8 per step)")
        return out
    if not geom.channel:
        exact = ("passive receivers exactly" if model == "lone" else
                 "no truncation; the shadowed model's renewal approximation applies to the image layout")
        out.append(f"{walls}: method of images, each receiver and its mirror image ({exact})")
    else:
        n_abs = int(np.sum(~lay.passive))
        depth = (shadowed_depth(lay, memory, n_abs) if model == "shadowed" and n_abs
                 else _depth(lay, memory, LONE_MAX_DEPTH)[0])
        slot, tail = _img.truncation_bounds(geom, lay.emitters, depth, (memory + 1) * lay.symbol_interval,
                                            lay.diffusion, lay.degradation)
        tail_text = (f"tail error <= {tail:.2g}" if np.isfinite(tail) else
                     "no degradation: at long times the channel is two-dimensional, so every molecule is taken by "
                     "an absorbing receiver eventually (the absorbing tails are 1 minus the kept slots; several "
                     "absorbing receivers share that rest in proportion to their kept-image tails, an "
                     "approximation) and a passive receiver's summed samples diverge (its tail is that of the "
                     "kept images, a lower bound)")
        out.append(f"{walls}: method of images, {2 * depth + 1} copies of each receiver (cells |m| <= {depth}); "
                   f"truncation error of every slot probability <= {slot:.2g}; {tail_text}")
    if model == "lone" and np.any(~lay.passive):
        out.append("lone model with walls: an absorbing receiver's own mirror images are not treated as absorbers "
                   "(it over-counts near a wall); use the shadowed model for absorbing receivers near walls")
    if model == "shadowed" and np.any(~lay.passive):
        rel = gaps[nearest].min() / lay.radii[nearest]
        if 2.0 * rel < 0.3:
            out.append(f"receiver {lay.receiver_names[nearest]} is {gaps[nearest].min() * 1e6:.3g} um from a wall: "
                       f"its image sphere is {2.0 * rel:.3g} radii away, closer than the shadowed model's validated "
                       "0.3 radius gap")
    return out
