"""Private JAX kernel of the particle simulator: one buffer of molecules advanced by adaptive Brownian steps.

Time is counted in integer *ticks* of length ``dt`` (the base step). Slot boundaries (``n_slot`` ticks apart),
passive sampling instants and the horizon ``(L+1) * n_slot`` are all whole ticks, so every step can be made to land
on them exactly. One iteration advances every molecule of the buffer by one step of its own length:

* **Step length.** ``m = clip(floor(d_min^2 / (c * D * dt)), 1, n_slot)`` ticks, ``d_min`` the distance to the
  nearest absorbing surface (adaptive mode; ``m = 1`` in fixed mode), cut so that the step ends no later than the
  next slot boundary, the next passive sampling instant or the molecule's death tick.
* **Move.** ``x <- x + sqrt(2 D h) z``, ``z ~ N(0, I_3)``, ``h = m * dt`` (exact for free diffusion).
* **Absorption.** An end inside absorbing sphere ``j`` means absorbed in this step. If both ends are outside
  (surface distances ``d1, d2``, centre distances ``r1 = a + d1, r2 = a + d2``) sphere ``j`` is touched with the
  Brownian-bridge probability of the radial process (exact for one sphere)
  ``p = [exp(-d1 d2/(D h)) - exp(-r1 r2/(D h))] / [1 - exp(-r1 r2/(D h))]``, which is the sheet's
  ``[e^(-(d1+d2)^2/4Dh) - e^(-(r1+r2)^2/4Dh)] / [e^(-(r2-r1)^2/4Dh) - e^(-(r1+r2)^2/4Dh)]`` divided through by
  ``e^(-(r2-r1)^2/4Dh)``; or the planar ``exp(-d1 d2/(D h))`` (Lamm & Schulten, J. Chem. Phys. 78, 1983; Andrews &
  Bray, Phys. Biol. 1, 2004); or none (naive step-and-check). Spheres are tested independently; if several are
  touched in one step the one with the largest ``p`` takes the molecule. The contact is credited to the slot that
  holds the step (steps never straddle a slot boundary, so the slot is exact).
* **Degradation.** Each molecule carries an exponential lifetime (rate ``k``) in ticks; steps stop at the whole
  tick ``floor(life)`` and the last step has the fractional length ``life - floor(life)``, after which the molecule
  is gone. Absorption in that last step counts (it happened before death). This is exact, not ``O(dt)``.
* **Passive spheres** do not interact; a molecule whose step ends on a sampling instant of passive sphere ``j``
  adds one count to ``(j, slot)`` if it is inside.
* **Reflecting walls** (``_reflect``). Absorption is tested on the unfolded step (free Gaussian end point), against
  the spheres AND their mirror images across the walls (passed in as extra absorbing spheres by the caller), then
  the end point is folded back into the fluid (``z -> lower + |z - lower|``; in a channel the periodic fold).
  The folded free step is exactly the reflected Brownian step, and the unfolded path touches an image iff the
  reflected path touches the sphere, so one wall is exact; in a channel, images beyond two bounces are not tested
  and the step rule's distance is capped at the width.
* **Release pulses.** A molecule released at ``u * pulse`` ticks starts at the whole tick below and its first
  step is shorter by the fraction (``head``); its lifetime counts from the release.
* **Finish.** Absorbed, dead, or alive at the horizon (then its lone eventual-capture probabilities are added to
  the tail accumulators and, for the first ``store`` molecules, its position is stored). Freed buffer places
  take the next molecules.

Randomness: a counter-based SplitMix64 hash (Steele, Lea & Flood, "Fast splittable pseudorandom number
generators", OOPSLA 2014). Emitter ``i`` has the key ``base = mix64(mix64(seed) + golden * (i + 1))``; molecule
``n`` owns the stream ``mix64(base + golden * (n + 1))`` and draws its numbers as the SplitMix64 sequence of that
stream (index 0: lifetime; then a fixed number of words per step). A molecule's path therefore does not depend on
the buffer size or on which other molecules share the buffer. (jax.random's threefry was used first; its XLA
compilation took tens of seconds per kernel on the 2-core build machine, this hash compiles in well under one.)
"""

from __future__ import annotations

from functools import partial
from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from capacity import _jax  # noqa: F401  (float64)

CORRECTIONS = ("radial", "planar", "none")


class Config(NamedTuple):
    """Static (hashable) settings of one compiled kernel (everything else is traced, so a new layout, step,
    molecule count or seed does not recompile)."""

    buffer: int  # molecules advanced together
    memory: int  # L
    store: int  # survivors among molecules 0..store-1 have their final positions stored


class Geometry(NamedTuple):
    """Traced layout arrays (SI)."""

    emitter: jax.Array  # (3,)
    centres: jax.Array  # (R, 3)
    radii: jax.Array  # (R,)
    absorbing: jax.Array  # (R,) bool
    passive: jax.Array  # (R,) bool (a padding sphere is neither absorbing nor passive)
    offsets: jax.Array  # (R,) int64 ticks, sampling offset of passive spheres
    diffusion: jax.Array  # scalar
    degradation: jax.Array  # scalar
    dt: jax.Array  # scalar, seconds per tick
    base_key: jax.Array  # () uint64, mix64 of the seed and emitter index
    n_slot: jax.Array  # int64 ticks per slot
    horizon: jax.Array  # int64 ticks, (L+1) * n_slot
    n_total: jax.Array  # int64 molecules of this emitter
    adapt: jax.Array  # c in m = d^2/(c D dt); 0 means fixed steps of one tick
    correction: jax.Array  # int: index into CORRECTIONS
    # uniform flow and reactive spheres (see _drift, _reaction); the defaults give still fluid, no reactive sphere
    flow: jax.Array | tuple = (0.0, 0.0, 0.0)  # (3,) m/s
    reactive: jax.Array | bool = False  # (R,) bool: absorbing sphere with a finite surface reaction rate
    reactivity: jax.Array | float = 0.0  # (R,) kappa / D, 1/m (reactive spheres)
    capture: jax.Array | float = 1.0  # (R,) eventual-capture factor of a survivor (reactive: kappa a / (...))
    # reflecting walls (see _reflect) and the release pulse; the defaults give none of either
    n_walls: jax.Array | int = 0  # 0, 1 (fluid where z > wall_lower) or 2 (wall_lower < z < wall_upper)
    wall_normal: jax.Array | tuple = (0.0, 0.0, 1.0)  # (3,) unit normal of the first wall, z = normal . x
    wall_lower: jax.Array | float = 0.0  # z of the first wall, m
    wall_upper: jax.Array | float = 0.0  # z of the second wall, m (channel only)
    wall_scale: jax.Array | float = float("inf")  # d_min of the step rule is capped at this (channel width)
    pulse: jax.Array | float = 0.0  # release window in ticks: each molecule starts at a uniform time in it


class State(NamedTuple):
    x: jax.Array  # (C, 3) positions
    t: jax.Array  # (C,) int64 ticks
    life: jax.Array  # (C,) float64 lifetime in ticks (inf without degradation)
    key: jax.Array  # (C,) uint64 per-molecule stream
    mid: jax.Array  # (C,) int64 molecule id, -1 for an empty place
    nstep: jax.Array  # (C,) int64 steps taken
    next_id: jax.Array  # () int64 next molecule to load
    counts: jax.Array  # (R, L+1) int64 absorbed / sampled counts
    tail: jax.Array  # (R,) float64 sum of lone eventual-capture probabilities of survivors
    survivors: jax.Array  # () int64 molecules alive at the horizon
    steps: jax.Array  # () int64 steps taken by real molecules
    ticks: jax.Array  # () float64 simulated time of real molecules, in ticks (= steps a fixed-step run needs)
    iterations: jax.Array  # () int64 kernel iterations (buffer occupancy = steps / (iterations * buffer))
    tail_sq: jax.Array  # (R,) float64 sum of squares of the survivors' lone capture probabilities
    positions: jax.Array  # (store, 3) final positions of stored survivors (NaN otherwise)
    head: jax.Array  # (C,) float64 fraction of a tick by which the release follows the start tick (first step)


def initial_state(cfg: Config, geom: Geometry, n_spheres: int) -> State:
    c = cfg.buffer
    return State(
        x=jnp.broadcast_to(geom.emitter, (c, 3)),
        t=jnp.zeros(c, jnp.int64),
        life=jnp.full(c, jnp.inf),
        key=jnp.zeros(c, jnp.uint64),
        mid=jnp.full(c, -1, jnp.int64),
        nstep=jnp.zeros(c, jnp.int64),
        next_id=jnp.zeros((), jnp.int64),
        counts=jnp.zeros((n_spheres, cfg.memory + 1), jnp.int64),
        tail=jnp.zeros(n_spheres),
        survivors=jnp.zeros((), jnp.int64),
        steps=jnp.zeros((), jnp.int64),
        ticks=jnp.zeros(()),
        iterations=jnp.zeros((), jnp.int64),
        tail_sq=jnp.zeros(n_spheres),
        positions=jnp.full((cfg.store, 3), jnp.nan),
        head=jnp.zeros(c),
    )


def _crossing(d1, d2, r1, r2, d_h, correction):
    """Probability that the bridge of one step touched the sphere, both ends outside (see module docstring).

    ``correction`` is 0 (radial), 1 (planar) or 2 (none)."""
    planar = jnp.exp(-d1 * d2 / d_h)
    b = r1 * r2 / d_h
    radial = (planar - jnp.exp(-b)) / (-jnp.expm1(-b))
    return jnp.where(correction == 0, radial, jnp.where(correction == 1, planar, 0.0))


_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)


def mix64(z):
    """SplitMix64 finaliser (Steele, Lea & Flood, OOPSLA 2014): a bijective 64-bit hash; numpy or jax uint64."""
    z = (z ^ (z >> 30)) * _M1
    z = (z ^ (z >> 27)) * _M2
    return z ^ (z >> 31)


def _unit(words):
    """uint64 words -> uniforms in (0, 1) with 53-bit resolution."""
    return ((words >> 11).astype(jnp.float64) + 0.5) * 2.0**-53


def _gaussian_and_uniform(stream, nstep, n_uniform):
    """Per molecule: 3 standard normals (Box-Muller) and ``n_uniform`` uniforms for step ``nstep``.

    Word ``w`` of step ``s`` is ``mix64(stream + golden * (s * W + w + 1))`` with ``W = 4 + n_uniform`` words per
    step: the SplitMix64 sequence of the molecule's own stream, indices 1, 2, ... (index 0 is its lifetime).
    """
    n_words = 4 + n_uniform
    lane = jnp.arange(1, n_words + 1, dtype=jnp.uint64)
    index = nstep.astype(jnp.uint64)[:, None] * np.uint64(n_words) + lane[None, :]
    u = _unit(mix64(stream[:, None] + _GOLDEN * index))
    rad = jnp.sqrt(-2.0 * jnp.log(u[:, 0:2]))
    ang = (2.0 * jnp.pi) * u[:, 2:4]
    z = jnp.concatenate([rad * jnp.cos(ang), rad[:, :1] * jnp.sin(ang[:, :1])], axis=1)
    return z, u[:, 4:]


_RELEASE_SALT = np.uint64(0xD1B54A32D192ED03)


def _refill(geom: Geometry, new_id):
    """Streams, lifetimes (absolute ticks), start ticks and release fractions of newly loaded molecules.

    The release time is ``u * pulse`` ticks (u uniform, from its own word ``mix64(stream ^ salt)``, so a pulse
    leaves the lifetime and step words unchanged); the molecule starts at the whole tick below it and its first
    step is shorter by the fraction ``head``. Lifetimes count from the release.
    """
    stream = mix64(geom.base_key + _GOLDEN * (new_id.astype(jnp.uint64) + np.uint64(1)))
    e = -jnp.log(_unit(mix64(stream)))
    k_pos = geom.degradation > 0.0
    release = jnp.asarray(geom.pulse, jnp.float64) * _unit(mix64(stream ^ _RELEASE_SALT))
    release = jnp.where(geom.pulse > 0.0, release, 0.0)
    start = jnp.floor(release)
    life = release + jnp.where(k_pos, e / jnp.where(k_pos, geom.degradation * geom.dt, 1.0), jnp.inf)
    return stream, life, start.astype(jnp.int64), release - start


def _reflect(x, geom: Geometry):
    """Fold end points (C, 3) back into the fluid across reflecting walls (exact for the reflected Brownian
    motion: the folded free Gaussian step is the walled transition law). One wall: ``z -> lower + |z - lower|``;
    channel of width W: ``z -> lower + W - |((z - lower) mod 2W) - W|``; no walls: unchanged."""
    normal = jnp.asarray(geom.wall_normal, jnp.float64)
    lower = jnp.asarray(geom.wall_lower, jnp.float64)
    z = x @ normal
    chan = geom.n_walls == 2
    width = jnp.where(chan, jnp.asarray(geom.wall_upper, jnp.float64) - lower, 1.0)
    z_chan = lower + width - jnp.abs(jnp.mod(z - lower, 2.0 * width) - width)
    z_one = lower + jnp.abs(z - lower)
    z_new = jnp.where(chan, z_chan, jnp.where(geom.n_walls == 1, z_one, z))
    return x + (z_new - z)[:, None] * normal[None, :]


_REACTION_SALT = np.uint64(0x8CB92BA72F3D8DD7)
#: a step's drift displacement |v| h is kept below this fraction of the distance to the nearest absorbing surface
DRIFT_FRACTION = 0.25


def _drift(geom: Geometry, h):
    """Drift displacement ``v h`` (C, 3) of a step of ``h`` (C,) seconds: exact for a uniform flow (the free step
    is ``x + v h + sqrt(2 D h) z``). Conditioned on both end points the path is the driftless Brownian bridge (the
    Girsanov density depends on the end points only), so the crossing probabilities below keep their meaning."""
    return h[:, None] * jnp.asarray(geom.flow, jnp.float64)[None, :]


def _drift_cap(m, dmin, geom: Geometry):
    """Shorten a step (m ticks) so that the drift moves a molecule at most DRIFT_FRACTION of its distance to the
    nearest absorbing surface (the radial crossing formula is exact without drift; with drift it is exact in the
    planar limit, i.e. for steps short against the distance)."""
    speed = jnp.sqrt(jnp.sum(jnp.square(jnp.asarray(geom.flow, jnp.float64))))
    limit = jnp.floor(DRIFT_FRACTION * dmin / jnp.maximum(speed * geom.dt, 1e-300))
    return jnp.where(speed > 0.0, jnp.maximum(jnp.minimum(m, limit.astype(jnp.int64)), 1), m)


def _reaction(geom: Geometry, s: State, d1, d2, d_h, u):
    """Reactive spheres: ``(reacted (C, R) bool, push (C, R) m)`` for one step (zeros when none is reactive).

    The surface is treated as a plane (steps are short against the radius near a surface). Skorokhod reflection
    of the free path with the Robin condition ``D dc/dn = kappa c``: given the free end points at surface
    distances ``y1 >= 0`` and ``y2`` (signed), the path is a driftless Brownian bridge whatever the flow; its
    lowest point is drawn from ``P(min < m) = exp(-(y1 - m)(y2 - m)/(D h))`` (``m <= min(y1, y2)``), the
    reflection pushes the path by ``L = max(0, -min)`` along the normal, and the molecule reacts with probability
    ``1 - exp(-(kappa/D) L)``; otherwise its end point is pushed out by ``L``. Integrated over the bridge this
    reproduces the half-space Robin Green's function ``G(y2-y1) + G(y2+y1) - 2 lam int_0^inf e^(-lam l)
    G(y1+y2+l) dl`` (Carslaw & Jaeger 1959, Sec. 14.2 [memory]; the reactive-boundary particle scheme of Erban &
    Chapman, Phys. Biol. 4, 16, 2007, takes instead a fixed probability ``kappa sqrt(pi dt / D)`` per crossing,
    correct to first order in sqrt(dt); the bridge form here has no step-size error for a plane).
    """

    def react():
        n_words = u.shape[1]
        lane = jnp.arange(1, n_words + 1, dtype=jnp.uint64)
        index = s.nstep.astype(jnp.uint64)[:, None] * np.uint64(n_words) + lane[None, :]
        u2 = _unit(mix64((s.key ^ _REACTION_SALT)[:, None] + _GOLDEN * index))
        y1 = jnp.maximum(d1, 0.0)
        lowest = 0.5 * ((y1 + d2) - jnp.sqrt((y1 - d2) ** 2 - 4.0 * d_h * jnp.log(u)))
        reactive = jnp.broadcast_to(jnp.asarray(geom.reactive, bool), d2.shape[-1:])
        push = jnp.where(reactive[None, :], jnp.maximum(-lowest, 0.0), 0.0)
        lam = jnp.asarray(geom.reactivity, jnp.float64)
        reacted = (push > 0.0) & (u2 < -jnp.expm1(-lam * push))
        return reacted, jnp.where(reacted, 0.0, push)

    def none():
        return jnp.zeros(d2.shape, bool), jnp.zeros(d2.shape)

    return lax.cond(jnp.any(geom.reactive), react, none)


def _push_out(x2, r2, d2, push, rel2, geom: Geometry):
    """Move end points out of reactive spheres along the radial direction by the reflection ``push`` (C, R)."""

    def moved():
        unit = rel2 / jnp.maximum(r2, 1e-300)[..., None]
        x = x2 + jnp.sum(push[..., None] * unit, axis=1)
        rel = x[:, None, :] - geom.centres[None, :, :]
        r = jnp.sqrt(jnp.sum(rel * rel, axis=-1))
        return x, r, r - geom.radii

    return lax.cond(jnp.any(push > 0.0), moved, lambda: (x2, r2, d2))


def _iteration(cfg: Config, geom: Geometry, s: State) -> State:
    big = jnp.int64(2**62)
    n_sph = geom.radii.shape[0]
    n_slot, horizon = geom.n_slot, geom.horizon
    active = s.mid >= 0
    rel1 = s.x[:, None, :] - geom.centres[None, :, :]
    r1 = jnp.sqrt(jnp.sum(rel1 * rel1, axis=-1))  # (C, R)
    d1 = r1 - geom.radii

    # step length in ticks
    dmin = jnp.minimum(jnp.min(jnp.where(geom.absorbing, d1, jnp.inf), axis=1), geom.wall_scale)
    scale = jnp.where(geom.adapt > 0.0, geom.adapt * geom.diffusion * geom.dt, 1.0)
    m_f = jnp.where(geom.adapt > 0.0, jnp.floor(dmin * dmin / scale), 1.0)
    m = jnp.clip(m_f, 1.0, n_slot.astype(jnp.float64)).astype(jnp.int64)
    m = _drift_cap(m, dmin, geom)
    next_bound = (s.t // n_slot + 1) * n_slot
    passive = geom.passive
    after = s.t[:, None] >= geom.offsets[None, :]
    lag = jnp.where(after, (s.t[:, None] - geom.offsets[None, :]) // n_slot + 1, 0)  # (C, R)
    sample = lag * n_slot + geom.offsets[None, :]
    sample_ok = passive[None, :] & (lag <= cfg.memory)
    next_sample = jnp.min(jnp.where(sample_ok, sample, big), axis=1)
    life_floor = jnp.floor(jnp.minimum(s.life, (horizon + 1).astype(jnp.float64))).astype(jnp.int64)
    death_step = life_floor <= s.t
    cap = jnp.minimum(jnp.minimum(next_bound, next_sample), jnp.where(death_step, big, life_floor))
    m = jnp.minimum(m, cap - s.t)
    head = jnp.where(s.nstep == 0, s.head, 0.0)  # a pulsed release starts between ticks
    h_ticks = jnp.where(death_step, s.life - s.t.astype(jnp.float64) - head, m.astype(jnp.float64) - head)
    h = h_ticks * geom.dt

    z, u = _gaussian_and_uniform(s.key, s.nstep, n_sph)
    x2 = s.x + jnp.sqrt(2.0 * geom.diffusion * h)[:, None] * z + _drift(geom, h)
    rel2 = x2[:, None, :] - geom.centres[None, :, :]
    r2 = jnp.sqrt(jnp.sum(rel2 * rel2, axis=-1))
    d2 = r2 - geom.radii
    d_h = jnp.maximum(geom.diffusion * h, 1e-300)[:, None]
    p = _crossing(jnp.maximum(d1, 0.0), jnp.maximum(d2, 0.0), r1, r2, d_h, geom.correction)
    reacted, push = _reaction(geom, s, d1, d2, d_h, u)
    perfect = geom.absorbing & ~jnp.asarray(geom.reactive, bool)
    inside_end = perfect[None, :] & (d2 <= 0.0)
    touched = perfect[None, :] & (d2 > 0.0) & (u < p) | reacted
    score = jnp.where(inside_end, 2.0, jnp.where(reacted, 1.5, jnp.where(touched, p, -1.0)))
    which = jnp.argmax(score, axis=1)
    absorbed = active & jnp.any(inside_end | touched, axis=1)
    slot = jnp.clip(s.t // n_slot, 0, cfg.memory)
    counts = s.counts.at[which, slot].add(absorbed.astype(jnp.int64))
    x2, r2, d2 = _push_out(x2, r2, d2, push, rel2, geom)

    # absorption was tested on the unfolded path (image spheres included); the rest sees the folded end point
    x2, r2, d2 = lax.cond(geom.n_walls > 0, lambda: _folded(x2, geom), lambda: (x2, r2, d2))
    died = active & death_step & ~absorbed
    alive = active & ~absorbed & ~died
    t2 = s.t + m
    hit_sample = alive[:, None] & sample_ok & (sample == t2[:, None]) & (d2 < 0.0)
    lag_idx = jnp.clip(lag, 0, cfg.memory)
    sph_idx = jnp.broadcast_to(jnp.arange(n_sph), lag.shape)
    counts = counts.at[sph_idx, lag_idx].add(hit_sample.astype(jnp.int64))

    at_horizon = alive & (t2 >= horizon)
    root = jnp.sqrt(geom.degradation / geom.diffusion)
    lone = geom.capture * geom.radii / r2 * jnp.exp(-jnp.maximum(d2, 0.0) * root)
    lone = jnp.where(geom.absorbing[None, :] & at_horizon[:, None], lone, 0.0)
    idx = jnp.where(at_horizon & (s.mid < cfg.store), s.mid, cfg.store)
    positions = s.positions.at[idx].set(x2, mode="drop")
    keep = alive & ~at_horizon

    # refill freed places with the next molecules (skipped when nothing is waiting)
    free = ~keep
    rank = jnp.cumsum(free.astype(jnp.int64)) - 1
    new_id = s.next_id + rank
    take = free & (new_id < geom.n_total)
    mol_key, new_life, new_start, new_head = lax.cond(
        jnp.any(take),
        lambda: _refill(geom, new_id),
        lambda: (s.key, s.life, jnp.zeros_like(s.t), s.head),
    )
    n_free = jnp.sum(free.astype(jnp.int64))
    return State(
        x=jnp.where(take[:, None], geom.emitter[None, :], x2),
        t=jnp.where(take, new_start, t2),
        life=jnp.where(take, new_life, s.life),
        key=jnp.where(take, mol_key, s.key),
        mid=jnp.where(take, new_id, jnp.where(keep, s.mid, -1)),
        nstep=jnp.where(take, 0, s.nstep + 1),
        next_id=jnp.minimum(s.next_id + n_free, geom.n_total),
        counts=counts,
        tail=s.tail + jnp.sum(lone, axis=0),
        tail_sq=s.tail_sq + jnp.sum(lone * lone, axis=0),
        survivors=s.survivors + jnp.sum(at_horizon.astype(jnp.int64)),
        steps=s.steps + jnp.sum(active.astype(jnp.int64)),
        ticks=s.ticks + jnp.sum(jnp.where(active, h_ticks, 0.0)),
        iterations=s.iterations + 1,
        positions=positions,
        head=jnp.where(take, new_head, s.head),
    )


def _folded(x2, geom: Geometry):
    x = _reflect(x2, geom)
    rel = x[:, None, :] - geom.centres[None, :, :]
    r = jnp.sqrt(jnp.sum(rel * rel, axis=-1))
    return x, r, r - geom.radii


@partial(jax.jit, static_argnums=0)
def advance(cfg: Config, geom: Geometry, state: State, n_iter) -> State:
    """Run at most ``n_iter`` (traced int) iterations, stopping early when every molecule is finished."""

    def cond(carry):
        i, s = carry
        busy = jnp.any(s.mid >= 0) | (s.next_id < geom.n_total)
        return (i < n_iter) & busy

    def body(carry):
        i, s = carry
        return i + 1, _iteration(cfg, geom, s)

    _, out = lax.while_loop(cond, body, (jnp.zeros((), jnp.int64), state))
    return out


def finished(n_total: int, state: State) -> bool:
    """True when no molecule is in flight and none is waiting."""
    return bool((int(state.next_id) >= n_total) and not bool(jnp.any(state.mid >= 0)))
