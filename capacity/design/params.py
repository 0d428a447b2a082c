"""Design parameters: what each tunable moves, and how constraints are built into the parametrisation.

The optimiser works on unconstrained real numbers ``u`` (a dict of JAX arrays); :func:`constrain` maps them to
physical design values, and :func:`layout` turns physical values into the arrays the response models take. Every
constraint is a reparametrisation, never a clip, so gradients stay finite everywhere:

================== ================================= ===================================================
tunable            physical value (SI)               map from u, and what it moves
================== ================================= ===================================================
``symbol_interval`` Ts, seconds                      Ts = exp(u) (positivity through the log). Passive
                                                     receivers keep their sampling instant at the same
                                                     fraction of the slot.
``levels``         the M−1 non-zero release levels,  a_k = peak·sigmoid(u_k): each level stays in
                   molecules, shape (M−1,)           (0, peak). The zero level stays. Every symbol of the
                                                     scheme is rebuilt from the levels it used.
``split``          w, shape (E,), sums to 1          w = softmax(u). Amplitude scheme: every emitter
                                                     releases w_e times the symbol's molecules (the
                                                     total is unchanged). Other schemes: emitter e's
                                                     releases are scaled by E·w_e (w uniform = as given).
``gap``            the gap from the closest          g = g_min + g0·softplus(u) (g0 the
                                                     given gap). Each receiver moves along
                   receiver's surface to its nearest  the line from its nearest emitter (nearest in the
                   emitter, metres                    given layout); every receiver's gap changes by the
                                                     same amount, so their differences are kept.
``spacing``        s, dimensionless scale of the      s = s_min + softplus(u): receiver centres move to
                   receiver offsets from their        centroid + s·(centre − centroid); s_min keeps every
                   centroid (1 = as given)            pair of receivers at least g_min apart.
``radius``         ρ, dimensionless scale of all      ρ = exp(u): every radius is multiplied by ρ and each
                   radii (1 = as given)               centre moves along its emitter line so that the
                                                     surface gap stays as it was.
================== ================================= ===================================================

User bounds ``(lo, hi)`` (in the physical units of the table) replace the map by lo + (hi − lo)·sigmoid(u)
(in the log for ``symbol_interval``, ``spacing`` and ``radius``). Geometry applies in the order spacing, then
gap and radius. Joint feasibility of several geometric tunables (an emitter inside a receiver, two receivers
touching) is checked by :func:`feasible`; the optimiser backtracks from infeasible steps.
"""

from __future__ import annotations

from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError

TUNABLES = ("symbol_interval", "levels", "split", "gap", "spacing", "radius")
LOG_SCALED = ("symbol_interval", "spacing", "radius")


class DesignSpace(NamedTuple):
    """Everything fixed about a design problem (numpy arrays, SI units).

    tune : names of the tuned parameters (a subset of :data:`TUNABLES`).
    emitters : (E, 3) m.  centres : (R, 3) m.  radii : (R,) m.  passive : (R,) bool.
    sample_fraction : (R,) sampling instant of passive receivers as a fraction of Ts (1 = end of slot).
    nearest : (R,) int, index of each receiver's nearest emitter in the given layout.
    levels : (M−1,) the non-zero release levels of the given scheme, molecules.
    level_index : (S, E) int, which level each entry of the symbol matrix uses (0 = no release).
    scheme : scheme name.  peak : molecules.  symbol_interval : s.  min_gap : m.
    bounds : name -> (lo, hi) user bounds in physical units, or absent.
    """

    tune: tuple
    emitters: np.ndarray
    centres: np.ndarray
    radii: np.ndarray
    passive: np.ndarray
    sample_fraction: np.ndarray
    nearest: np.ndarray
    levels: np.ndarray
    level_index: np.ndarray
    scheme: str
    peak: float
    symbol_interval: float
    min_gap: float
    bounds: dict

    @property
    def base_gap(self) -> float:
        """Smallest surface gap from a receiver to its nearest emitter in the given layout, m."""
        return float(np.min(_gaps(self.emitters, self.centres, self.radii, self.nearest)))


def _gaps(emitters, centres, radii, nearest):
    return np.linalg.norm(centres - emitters[nearest], axis=1) - radii


def make_space(scenario, symbols, tune, *, bounds=None, min_gap=None) -> DesignSpace:
    """Build the :class:`DesignSpace` of ``scenario`` with base alphabet ``symbols`` (S, E) molecules.

    min_gap : smallest allowed surface gap (receiver to any emitter, and receiver to receiver), m; default a
        tenth of the smallest radius.
    Raises InputError for unknown tunables, tunables that mean nothing for the layout, or bad bounds.
    """
    tune = tuple(tune)
    if not tune:
        raise InputError("tune", tune, "nothing to tune", f"name one or more of {', '.join(TUNABLES)}")
    for name in tune:
        if name not in TUNABLES:
            raise InputError("tune", name, "is not a tunable parameter", f"use one of {', '.join(TUNABLES)}")
    if len(set(tune)) != len(tune):
        raise InputError("tune", tune, "names a parameter twice", "name each parameter once")
    emitters = np.asarray(scenario.emitter_positions, dtype=float)
    centres = np.asarray(scenario.receiver_centres, dtype=float)
    radii = np.asarray(scenario.receiver_radii, dtype=float)
    ts = float(scenario.channel.symbol_interval)
    passive = np.array([r.kind == "passive" for r in scenario.receivers])
    frac = np.array([1.0 if r.sample_offset is None else float(r.sample_offset) / ts for r in scenario.receivers])
    d = np.linalg.norm(centres[:, None, :] - emitters[None, :, :], axis=2)
    nearest = np.argmin(d, axis=1)
    symbols = np.asarray(symbols, dtype=float)
    levels = np.unique(symbols[symbols > 0])
    level_index = np.searchsorted(levels, symbols) + 1
    level_index = np.where(symbols > 0, level_index, 0)
    if "spacing" in tune and len(radii) < 2:
        raise InputError("tune", "spacing", "needs at least two receivers", "tune gap or radius instead")
    if "split" in tune and len(emitters) < 2:
        raise InputError("tune", "split", "needs at least two emitters", "tune levels instead")
    if "levels" in tune and levels.size == 0:
        raise InputError("tune", "levels", "the alphabet releases nothing", "give a positive peak")
    min_gap = 0.1 * float(np.min(radii)) if min_gap is None else float(min_gap)
    bounds = dict(bounds or {})
    for name, b in bounds.items():
        if name not in tune:
            raise InputError(f"bounds[{name!r}]", b, "bounds a parameter that is not tuned", "tune it or drop it")
        lo, hi = (float(v) for v in b)
        if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo) or (name in LOG_SCALED and lo <= 0):
            raise InputError(f"bounds[{name!r}]", b, "needs finite lo < hi (lo > 0 for scales and times)",
                             "give e.g. (0.01, 1.0)")
        bounds[name] = (lo, hi)
    space = DesignSpace(tune, emitters, centres, radii, passive, frac, nearest, levels, level_index,
                        scenario.signalling.scheme, float(scenario.signalling.peak), ts, min_gap, bounds)
    if not feasible(space, base_physical(space)):
        raise InputError("receivers", tuple(map(tuple, centres)),
                         f"the given layout already has a gap below the minimum {min_gap:.3g} m",
                         "move receivers apart from each other and from the emitters")
    return space


def spacing_floor(space: DesignSpace) -> float:
    """Smallest receiver-offset scale that keeps every receiver pair ``min_gap`` apart (linear in the scale)."""
    c, r = space.centres, space.radii
    centroid = c.mean(axis=0)
    off = c - centroid
    floor = 0.0
    for i in range(len(r)):
        for j in range(i + 1, len(r)):
            dist = np.linalg.norm(off[i] - off[j])
            floor = max(floor, (r[i] + r[j] + space.min_gap) / dist)
    return floor


def base_physical(space: DesignSpace) -> dict:
    """Physical values of the tuned parameters in the given layout."""
    out = {}
    for name in space.tune:
        out[name] = {
            "symbol_interval": lambda: jnp.asarray(space.symbol_interval),
            "levels": lambda: jnp.asarray(space.levels),
            "split": lambda: jnp.full(len(space.emitters), 1.0 / len(space.emitters)),
            "gap": lambda: jnp.asarray(space.base_gap),
            "spacing": lambda: jnp.asarray(1.0),
            "radius": lambda: jnp.asarray(1.0),
        }[name]()
    return out


def _lower(space, name):
    if name == "gap":
        return space.min_gap
    if name == "spacing":
        return spacing_floor(space)
    return 0.0


def _unit(space, name):
    return space.base_gap if name == "gap" else 1.0


def constrain(space: DesignSpace, u: dict) -> dict:
    """Unconstrained ``u`` -> physical design values (see the module table). Pure JAX, differentiable."""
    out = {}
    for name in space.tune:
        x = u[name]
        if name in space.bounds:
            lo, hi = space.bounds[name]
            if name in LOG_SCALED:
                out[name] = jnp.exp(np.log(lo) + (np.log(hi) - np.log(lo)) * jax.nn.sigmoid(x))
            else:
                out[name] = lo + (hi - lo) * jax.nn.sigmoid(x)
        elif name in ("symbol_interval", "radius"):
            out[name] = jnp.exp(x)
        elif name == "levels":
            out[name] = space.peak * jax.nn.sigmoid(x)
        elif name == "split":
            out[name] = jax.nn.softmax(x)
        else:  # gap, spacing: a floor plus a softplus offset (in units of the given gap / of 1)
            out[name] = _lower(space, name) + _unit(space, name) * jax.nn.softplus(x)
    return out


def unconstrain(space: DesignSpace, phys: dict) -> dict:
    """Inverse of :func:`constrain` (numpy in, JAX out).

    Values on a bound are nudged inside by 1e-3 of the range, so that the sigmoid is not saturated.
    """
    out = {}
    for name in space.tune:
        x = np.asarray(phys[name], dtype=float)
        if name in space.bounds:
            lo, hi = space.bounds[name]
            if name in LOG_SCALED:
                t = (np.log(x) - np.log(lo)) / (np.log(hi) - np.log(lo))
            else:
                t = (x - lo) / (hi - lo)
            t = np.clip(t, 1e-3, 1 - 1e-3)
            out[name] = jnp.asarray(np.log(t) - np.log1p(-t))
        elif name in ("symbol_interval", "radius"):
            out[name] = jnp.asarray(np.log(x))
        elif name == "levels":
            t = np.clip(x / space.peak, 1e-3, 1 - 1e-3)
            out[name] = jnp.asarray(np.log(t) - np.log1p(-t))
        elif name == "split":
            out[name] = jnp.asarray(np.log(np.maximum(x, 1e-300)))
        else:
            z = np.maximum((x - _lower(space, name)) / _unit(space, name), 1e-12)
            out[name] = jnp.asarray(np.where(z > 30, z, np.log(np.expm1(np.minimum(z, 30)))))
    return out


class Layout(NamedTuple):
    """A concrete design as arrays (JAX or numpy), SI units: what the response models and the channel need."""

    symbol_interval: jnp.ndarray  # s, scalar
    emitters: jnp.ndarray  # (E, 3) m
    centres: jnp.ndarray  # (R, 3) m
    radii: jnp.ndarray  # (R,) m
    symbols: jnp.ndarray  # (S, E) molecules


def layout(space: DesignSpace, phys: dict, base_symbols) -> Layout:
    """Physical design values -> :class:`Layout` (pure JAX; tunables not in ``phys`` keep their given values)."""
    c = jnp.asarray(space.centres)
    r = jnp.asarray(space.radii)
    e = jnp.asarray(space.emitters)
    if "spacing" in phys:
        centroid = jnp.mean(c, axis=0)
        c = centroid + phys["spacing"] * (c - centroid)
    if "gap" in phys or "radius" in phys:
        en = e[space.nearest]
        v = c - en
        dist = jnp.sqrt(jnp.sum(v * v, axis=1))
        g = dist - r
        if "gap" in phys:
            g = g + (phys["gap"] - space.base_gap)
        if "radius" in phys:
            r = r * phys["radius"]
        c = en + v / dist[:, None] * (r + g)[:, None]
    sym = jnp.asarray(base_symbols, dtype=float)
    if "levels" in phys:
        table = jnp.concatenate([jnp.zeros(1), phys["levels"]])
        sym = table[jnp.asarray(space.level_index)]
    if "split" in phys:
        w = phys["split"]
        if space.scheme == "amplitude":
            sym = jnp.sum(sym, axis=1, keepdims=True) * w[None, :]
        else:
            sym = sym * (float(len(space.emitters)) * w)[None, :]
    ts = phys.get("symbol_interval", jnp.asarray(space.symbol_interval))
    return Layout(ts, e, c, r, sym)


def feasible(space: DesignSpace, phys: dict) -> bool:
    """Whether every receiver surface is at least ``min_gap`` from every emitter and every other receiver."""
    lay = layout(space, phys, np.zeros((1, len(space.emitters))))
    c, r, e = np.asarray(lay.centres), np.asarray(lay.radii), np.asarray(lay.emitters)
    d_er = np.linalg.norm(c[:, None, :] - e[None, :, :], axis=2) - r[:, None]
    ok = bool(np.all(d_er >= space.min_gap * (1 - 1e-9)))
    if len(r) > 1:
        d_rr = np.linalg.norm(c[:, None, :] - c[None, :, :], axis=2) - r[:, None] - r[None, :]
        d_rr = d_rr[~np.eye(len(r), dtype=bool)]
        ok = ok and bool(np.all(d_rr >= space.min_gap * (1 - 1e-9)))
    return ok and bool(np.all(np.isfinite(c)))


def describe(space: DesignSpace, phys: dict) -> dict:
    """Plain-float SI values of the tuned parameters (units as in the module table)."""
    out = {}
    for name in space.tune:
        v = np.asarray(phys[name], dtype=float)
        out[name] = [float(x) for x in v] if v.ndim else float(v)
    return out


def geometry(space: DesignSpace, phys: dict) -> dict:
    """The resulting layout: receiver centres (R, 3) m, radii (R,) m, surface gaps to the nearest emitter (R,) m,
    and the smallest receiver centre-to-centre distance in m (``None`` with one receiver)."""
    lay = layout(space, phys, np.zeros((1, len(space.emitters))))
    c, r, e = np.asarray(lay.centres), np.asarray(lay.radii), np.asarray(lay.emitters)
    d = np.linalg.norm(c[:, None, :] - c[None, :, :], axis=2)
    off = d[~np.eye(len(r), dtype=bool)]
    return {"centres": c.tolist(), "radii": r.tolist(), "gaps": _gaps(e, c, r, space.nearest).tolist(),
            "receiver_distance": float(off.min()) if off.size else None}
