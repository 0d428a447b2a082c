"""The ``particles`` response model: Brownian simulation of the whole layout, every sphere present at once.

Public function: :func:`simulate_hits`. It is the ground truth against which the ``lone`` and ``shadowed`` models
are measured, so it is built to be exact where it can be:

* free diffusion between checks is sampled exactly (Gaussian increments), with adaptive step lengths;
* contacts between the two ends of a step are caught with the Brownian-bridge crossing probability of the radial
  process, which is exact for one sphere whatever the step (so a lone sphere is simulated with no time-step bias at
  all; with several spheres the remaining error comes from treating them one at a time inside a step) -- Lamm &
  Schulten, J. Chem. Phys. 78 (1983); Andrews & Bray, Phys. Biol. 1 (2004); Gobet, Stoch. Proc. Appl. 87 (2000);
* slot boundaries, passive sampling instants and the horizon are whole numbers of base steps and every step lands
  on them, so the slot of each contact is exact;
* degradation uses an exact exponential lifetime per molecule.

The kernel and its step rule are described in :mod:`capacity.physics._particles_kernel`; input checks live in
:mod:`capacity.physics._particles_checks`.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import jax.numpy as jnp
import numpy as np

from capacity import _jax  # noqa: F401  (float64)
from capacity.physics import _particles_kernel as _k
from capacity.physics._particles_checks import auto_time_step, check_inputs
from capacity.physics._particles_tail import passive_tail

#: Adaptive step constant c: a molecule at distance d from the nearest absorbing surface takes a step of about
#: d^2 / (c D), i.e. a displacement of about d * sqrt(6/c) (3-D rms). Measured against the exact two-sphere
#: split (Kelvin images, 4e5 molecules, spheres one behind the other): c = 16, 4, 1, 0.25 all agreed within
#: 0.6 standard errors (SE ~ 7e-4), i.e. no step bias was resolvable even at c = 0.25; 16 is kept as a margin
#: (it costs ~2x the steps of c = 4).
ADAPT = 16.0
#: Molecules advanced together (memory ~ a few hundred bytes each); fixed so that runs of any size share one
#: compilation (the kernel compiles once per (padded sphere count, memory L, position store)).
BUFFER = 2048
#: Kernel iterations per call (one progress-bar update per call).
BLOCK = 512
#: Survivors among the first STORE molecules of each emitter keep their final positions (passive tails, tests).
STORE = 1 << 15


class Simulation(NamedTuple):
    """Everything one run measures (private helper result, returned by :func:`_simulate`).

    hits, tail, stderr : as in :func:`simulate_hits`.
    time_step : base step dt (s); slot = ``n_slot`` steps.
    n_slot : steps per slot.
    offsets : (R,) sampling offsets actually used, seconds (rounded to whole steps).
    tail_stderr : (E, R) standard error of ``tail`` (sample standard deviation of the per-molecule terms over
        sqrt(n)).
    survivor_positions : list over emitters of (S_i, 3) arrays, metres: final positions of the molecules still
        free at the horizon among the first ``min(N, STORE)`` molecules.
    survivor_ids : list over emitters of (S_i,) int arrays: the molecule indices of those positions.
    steps : (E,) number of molecule-steps actually taken.
    ticks : (E,) simulated molecule-time in base steps: the molecule-steps a fixed-step run of the same
        molecules would need (absorbed and degraded molecules stop counting).
    survivors : (E,) molecules free at the horizon.
    occupancy : (E,) fraction of buffer places holding a molecule, averaged over kernel iterations.
    """

    hits: np.ndarray
    tail: np.ndarray
    stderr: np.ndarray
    time_step: float
    n_slot: int
    offsets: np.ndarray
    tail_stderr: np.ndarray
    survivor_positions: list
    survivor_ids: list
    steps: np.ndarray
    ticks: np.ndarray
    survivors: np.ndarray
    occupancy: np.ndarray


def simulate_hits(
    emitters,
    centres,
    radii,
    passive,
    sample_offsets,
    diffusion,
    degradation,
    symbol_interval,
    memory: int,
    *,
    particles: int,
    seed: int,
    time_step: float | None = None,
    progress: bool = False,
    walls=None,
    pulses=None,
    reaction_rates=None,
    flow=None,
):
    """Hit probabilities of every emitter-receiver pair by Brownian simulation of the whole layout.

    Parameters
    ----------
    emitters : (E, 3) m, point sources; each releases ``particles`` molecules at time 0.
    centres : (R, 3) m, sphere centres.
    radii : (R,) m, sphere radii (> 0). Absorbing spheres must not overlap each other and no emitter may lie in
        or on an absorbing sphere.
    passive : (R,) bool. ``False``: absorbing (a molecule is removed at first contact and counted in the slot of
        the contact). ``True``: passive (no interaction; counts the molecules inside at ``l*Ts + offset``).
    sample_offsets : (R,) s, sampling instant of each passive sphere within its slot, in ``[0, Ts]``; rounded to
        the nearest whole step (ignored for absorbing spheres).
    diffusion : D, m^2/s (> 0).
    degradation : k, 1/s (>= 0); each molecule has an exponential lifetime of mean ``1/k``.
    symbol_interval : Ts, s (> 0).
    memory : L >= 0; slots ``0..L`` are simulated, horizon ``(L+1) Ts``.
    particles : N molecules per emitter (> 0).
    seed : integer seed. Molecule ``n`` of emitter ``i`` uses its own random stream derived from
        ``(seed, i, n)``, so the counts do not depend on the buffer size or chunking (the tail sum may differ
        in the last bits because of summation order).
    time_step : base step dt in s, or ``None`` for automatic: ``min(l^2/(100 D), Ts/200)`` with ``l`` the
        smallest length of the layout (absorbing radii, emitter-surface gaps, surface-surface gaps), then
        shortened so that ``Ts/dt`` is a whole number. A given ``time_step`` is shortened the same way.
        Molecules far from every absorbing surface take longer steps (whole multiples of dt, about
        ``d^2/(16 D)``), always ending on slot boundaries and passive sampling instants.
    progress : show a tqdm progress bar (one update per kernel call).
    reaction_rates : (R,) m/s or None: surface reaction rate kappa of each sphere (Robin condition
        ``D dc/dn = kappa c``); ``inf`` (or None for all) is a perfectly absorbing sphere; ignored for passive ones.
        A reactive sphere reflects the path (Skorokhod reflection, planar near the surface) and takes the molecule
        with probability ``1 - exp(-kappa L / D)``, ``L`` the reflection's push (see
        :func:`capacity.physics._particles_kernel._reaction`).
    flow : (3,) m/s or None: uniform flow; each step moves by ``v h + sqrt(2 D h) z`` (exact), and the drift of a
        step is kept below a quarter of the distance to the nearest absorbing surface. Survivors' tails for
        absorbing and reactive spheres then come from the lone model in the flow (:mod:`capacity.physics.flow`)
        at their final positions (the first ``STORE`` molecules).
    walls : :class:`capacity.physics.images.WallGeometry` (one reflecting wall or a channel) or None. Every step's
        end point is folded back into the fluid (exact for reflected Brownian motion); each absorbing sphere is
        tested together with its mirror images (one per wall; in a channel also the two-bounce images), since a
        contact of the unfolded path with an image is a contact of the reflected path with the sphere. In a
        channel the step rule's distance is capped at the width, so steps stay well inside one bounce.
    pulses : (E,) s or None: release durations; molecule ``n`` of emitter ``i`` is released at a uniform random
        time in ``[0, pulses[i]]`` (a rectangular pulse; exact: its first step is shortened to the next tick).

    Returns
    -------
    hits : (E, R, L+1), fraction of the released molecules counted by receiver ``j`` in slot ``l``.
    tail : (E, R), absorbing spheres: estimated probability of capture after the horizon,
        ``(1/N) sum_{survivors} a_j/|x-c_j| * exp(-(|x-c_j| - a_j) sqrt(k/D))`` from each survivor's final
        position ``x`` (the lone eventual-capture probability). It ignores shadowing after the horizon (every
        sphere is treated as if alone), so it over-estimates the tail when spheres hide each other.
        Passive spheres: the expected sum of all later samples, ``sum_{l > L} P(inside at l Ts + offset)``,
        from the final positions of the survivors among the first ``STORE`` molecules, with the free-space
        occupancy law (absorbing spheres ignored after the horizon, far terms by the far-field form; see
        :mod:`capacity.physics._particles_tail`).
    stderr : (E, R, L+1), ``sqrt(p (1-p) / N)`` (each molecule is one Bernoulli trial per slot).

    Notes
    -----
    Accuracy: one sphere (with or without degradation, with passive spheres anywhere) has no time-step bias at
    all; several absorbing spheres are treated one at a time inside each step, an error not resolvable at 4e5
    molecules in the tests (two spheres one behind the other, or side by side 1 um apart). Contacts are credited
    to the slot of the step in which they happen; steps never straddle a slot boundary.
    Cost: about 25 steps per molecule for the 2 x 2 benchmark layout with 10 slots (instead of 2000 fixed steps);
    memory is bounded by the buffer (2048 molecules) and the position store (32768 x 3 floats per emitter),
    whatever ``particles``. Randomness: a counter-based SplitMix64 hash of (seed, emitter, molecule, step).

    Raises
    ------
    capacity.errors.InputError
        For bad shapes, non-finite or out-of-range values, overlapping absorbing spheres, emitters in or on an
        absorbing sphere.
    """
    sim = _simulate(
        emitters,
        centres,
        radii,
        passive,
        sample_offsets,
        diffusion,
        degradation,
        symbol_interval,
        memory,
        particles=particles,
        seed=seed,
        time_step=time_step,
        progress=progress,
        walls=walls,
        pulses=pulses,
        reaction_rates=reaction_rates,
        flow=flow,
    )
    return sim.hits, sim.tail, sim.stderr


def _simulate(
    emitters,
    centres,
    radii,
    passive,
    sample_offsets,
    diffusion,
    degradation,
    symbol_interval,
    memory,
    *,
    particles,
    seed,
    time_step=None,
    progress=False,
    adapt: float = ADAPT,
    correction: str = "radial",
    buffer: int = BUFFER,
    block: int = BLOCK,
    walls=None,
    pulses=None,
    reaction_rates=None,
    flow=None,
) -> Simulation:
    """:func:`simulate_hits` with the knobs tests and benchmarks need.

    adapt : c of the adaptive rule (step ~ d^2/(c D)); 0 gives fixed steps of ``dt`` everywhere.
    correction : ``"radial"`` (exact one-sphere bridge), ``"planar"`` (``exp(-d1 d2/(D h))``) or ``"none"``
        (naive step-and-check).
    buffer, block : molecules advanced together (static: a new value compiles a new kernel) and iterations per
        kernel call (traced).
    """
    n_real = np.shape(centres)[0] if np.ndim(centres) == 2 else 0
    centres, radii, passive, sample_offsets, owner = _with_wall_images(
        emitters, centres, radii, passive, sample_offsets, walls)
    inp = check_inputs(
        emitters, centres, radii, passive, sample_offsets, diffusion, degradation, symbol_interval, memory,
        particles, seed, time_step,
    )
    pulse_s = _pulse_array(pulses, inp.emitters.shape[0], inp.symbol_interval)
    react = _reaction_fields(reaction_rates, flow, inp, owner, n_real)
    wall_fields = _wall_fields(walls)
    if correction not in _k.CORRECTIONS:
        raise ValueError(f"correction must be one of {_k.CORRECTIONS}")
    dt_wanted = inp.time_step if inp.time_step is not None else _flow_step(auto_time_step(inp), inp, react)
    n_slot = max(1, int(math.ceil(inp.symbol_interval / dt_wanted - 1e-9)))
    dt = inp.symbol_interval / n_slot
    offsets = np.rint(inp.sample_offsets / dt).astype(np.int64)
    offsets = np.where(inp.passive, np.clip(offsets, 0, n_slot), 0)
    n_emit, n_sph, n_lag = inp.emitters.shape[0], inp.radii.shape[0], inp.memory + 1
    n_pad = max(2, _pow2_at_least(n_sph))  # spheres padded to a power of two >= 2: fewer compilations
    pad = n_pad - n_sph
    cfg = _k.Config(
        buffer=int(buffer),
        memory=inp.memory,
        store=STORE,
    )
    n_iter = jnp.asarray(int(block), jnp.int64)
    counts = np.zeros((n_emit, n_sph, n_lag))
    tail = np.zeros((n_emit, n_sph))
    tail_se = np.zeros((n_emit, n_sph))
    steps = np.zeros(n_emit, np.int64)
    ticks = np.zeros(n_emit)
    occupancy = np.zeros(n_emit)
    survivors = np.zeros(n_emit, np.int64)
    positions, ids = [], []
    bar = _progress_bar(progress, n_emit * inp.particles)
    with np.errstate(over="ignore"):  # uint64 arithmetic wraps on purpose
        root = _k.mix64(np.uint64(inp.seed))
        bases = [_k.mix64(root + _k._GOLDEN * np.uint64(i + 1)) for i in range(n_emit)]
    for i in range(n_emit):
        geom = _k.Geometry(
            emitter=jnp.asarray(inp.emitters[i]),
            centres=jnp.asarray(np.concatenate([inp.centres, np.zeros((pad, 3))])),
            radii=jnp.asarray(np.concatenate([inp.radii, np.ones(pad)])),
            absorbing=jnp.asarray(np.concatenate([~inp.passive, np.zeros(pad, bool)])),
            passive=jnp.asarray(np.concatenate([inp.passive, np.zeros(pad, bool)])),
            offsets=jnp.asarray(np.concatenate([offsets, np.zeros(pad, np.int64)])),
            diffusion=jnp.asarray(inp.diffusion),
            degradation=jnp.asarray(inp.degradation),
            dt=jnp.asarray(dt),
            base_key=jnp.asarray(bases[i], jnp.uint64),
            n_slot=jnp.asarray(n_slot, jnp.int64),
            horizon=jnp.asarray(n_lag * n_slot, jnp.int64),
            n_total=jnp.asarray(inp.particles, jnp.int64),
            adapt=jnp.asarray(float(adapt)),
            correction=jnp.asarray(_k.CORRECTIONS.index(correction)),
            pulse=jnp.asarray(pulse_s[i] / dt),
            **_padded(react, pad),
            **wall_fields,
        )
        state = _k.initial_state(cfg, geom, n_pad)
        done_before = 0
        while True:
            state = _k.advance(cfg, geom, state, n_iter)
            done_now = int(state.next_id) - int(jnp.sum(state.mid >= 0))
            if bar is not None:
                bar.update(done_now - done_before)
            done_before = done_now
            if _k.finished(inp.particles, state):
                break
        counts[i] = np.asarray(state.counts, dtype=np.float64)[:n_sph]
        n = float(inp.particles)
        tail[i] = np.asarray(state.tail)[:n_sph] / n
        second = np.asarray(state.tail_sq)[:n_sph] / n
        tail_se[i] = np.sqrt(np.maximum(second - tail[i] ** 2, 0.0) / n)
        steps[i] = int(state.steps)
        ticks[i] = float(state.ticks)
        occupancy[i] = float(state.steps) / max(1.0, float(state.iterations) * cfg.buffer)
        survivors[i] = int(state.survivors)
        pos = np.asarray(state.positions)
        ids.append(np.flatnonzero(np.isfinite(pos[:, 0])))
        positions.append(pos[ids[-1]])
        if react["moving"]:
            tail[i], tail_se[i] = _flow_tails(positions[-1], min(inp.particles, STORE), inp, react, tail[i],
                                              tail_se[i])
        for j in np.flatnonzero(inp.passive):
            tail[i, j], tail_se[i, j] = passive_tail(
                positions[-1], min(inp.particles, STORE), inp.centres[j], inp.radii[j], offsets[j] * dt,
                inp.symbol_interval, inp.diffusion, inp.degradation,
            )
    if bar is not None:
        bar.close()
    # passive spheres sampled at t = 0 (offset 0, slot 0): inside iff the emitter is inside
    for j in np.flatnonzero(inp.passive & (offsets == 0)):
        inside = np.linalg.norm(inp.emitters - inp.centres[j], axis=1) < inp.radii[j]
        counts[:, j, 0] = np.where(inside & (pulse_s == 0.0), float(inp.particles), 0.0)  # pulsed: none out yet
    n = float(inp.particles)
    if owner is not None:  # image spheres count for the sphere they mirror
        counts, tail = _fold_images(counts, owner, n_real), _fold_images(tail, owner, n_real)
        tail_se = np.sqrt(_fold_images(tail_se**2, owner, n_real))
        offsets = offsets[:n_real]
    hits = counts / n
    stderr = np.sqrt(hits * (1.0 - hits) / n)
    return Simulation(hits, tail, stderr, dt, n_slot, offsets * dt, tail_se, positions, ids, steps, ticks, survivors,
                      occupancy)


def _reaction_fields(reaction_rates, flow, inp, owner, n_real) -> dict:
    """Per-sphere reaction settings (image spheres take those of the sphere they mirror) and the flow."""
    from capacity.errors import InputError

    n_sph = inp.radii.shape[0]
    rates = np.full(n_real if owner is not None else n_sph, np.inf)
    if reaction_rates is not None:
        given = np.asarray(reaction_rates, dtype=float).reshape(-1)
        real_passive = inp.passive[: rates.shape[0]]
        if given.shape != rates.shape or np.any(np.isnan(given)) or np.any((given <= 0.0) & ~real_passive):
            raise InputError("reaction_rates", np.asarray(reaction_rates).tolist(),
                             f"must hold one rate > 0 per sphere ({rates.shape[0]}), inf for a perfect absorber",
                             "give e.g. [2e-5, inf] (m/s)")
        rates = given
    if owner is not None:
        rates = rates[owner]
    rates = np.where(inp.passive, np.inf, rates)
    velocity = np.zeros(3) if flow is None else np.asarray(flow, dtype=float).reshape(-1)
    if velocity.shape != (3,) or not np.all(np.isfinite(velocity)):
        raise InputError("flow", np.asarray(flow).tolist(), "must be a finite velocity vector of 3 components",
                         "give e.g. [1e-5, 0, 0] (m/s)")
    reactive = np.isfinite(rates) & ~inp.passive
    lam = np.where(reactive, rates / inp.diffusion, 0.0)
    root = np.sqrt(inp.degradation * inp.diffusion)
    finite = np.where(reactive, rates, 1.0)
    capture = np.where(reactive, finite * inp.radii / (finite * inp.radii + inp.diffusion + inp.radii * root), 1.0)
    return {"rates": rates, "reactive": reactive, "reactivity": lam, "capture": capture, "flow": velocity,
            "moving": bool(np.any(velocity != 0.0))}


def _padded(react: dict, pad: int) -> dict:
    """Kernel Geometry fields of :func:`_reaction_fields`, padded with inert spheres."""
    return dict(flow=jnp.asarray(react["flow"]),
                reactive=jnp.asarray(np.concatenate([react["reactive"], np.zeros(pad, bool)])),
                reactivity=jnp.asarray(np.concatenate([react["reactivity"], np.zeros(pad)])),
                capture=jnp.asarray(np.concatenate([react["capture"], np.ones(pad)])))


def _flow_step(dt: float, inp, react: dict) -> float:
    """The automatic base step, shortened in a flow so that one step drifts at most 0.1 of the smallest length
    (absorbing radius, emitter gap) the automatic rule uses."""
    speed = float(np.linalg.norm(react["flow"]))
    if speed == 0.0:
        return dt
    ell = math.sqrt(100.0 * inp.diffusion * dt)  # the length behind dt = l^2 / (100 D) (or longer, if Ts-bound)
    return min(dt, 0.1 * ell / speed)


def _flow_tails(positions, n_used: int, inp, react: dict, tail, tail_se):
    """Absorbing and reactive tails in a flow: mean over the first ``n_used`` molecules of the lone eventual
    capture in the flow from each survivor's final position (non-survivors contribute 0)."""
    from capacity.physics.flow import eventual_capture

    tail, tail_se = tail.copy(), tail_se.copy()
    if n_used == 0:
        return tail, tail_se
    for j in np.flatnonzero(~inp.passive):
        per = np.asarray(eventual_capture(positions, inp.centres[j], inp.radii[j], react["rates"][j],
                                          inp.diffusion, inp.degradation, react["flow"]))
        tail[j] = float(np.sum(per) / n_used)
        tail_se[j] = float(np.sqrt(max(np.sum(per * per) / n_used - tail[j] ** 2, 0.0) / n_used))
    return tail, tail_se


def _with_wall_images(emitters, centres, radii, passive, sample_offsets, walls):
    """Spheres with the mirror images of the absorbing ones appended (one per wall; in a channel also the
    two-bounce images), and ``owner`` (index of the real sphere of every sphere), or ``owner = None``."""
    if walls is None:
        return centres, radii, passive, sample_offsets, None
    from capacity.errors import InputError
    from capacity.physics.images import image_points, wall_distances

    c = np.asarray(centres, dtype=float).reshape(-1, 3)
    r = np.asarray(radii, dtype=float).reshape(-1)
    pa = np.asarray(passive, dtype=bool).reshape(-1)
    off = np.asarray(sample_offsets, dtype=float).reshape(-1)
    if np.any(wall_distances(emitters, walls) <= 0.0):
        raise InputError("emitters", np.asarray(emitters).tolist(), "an emitter lies on or behind a wall",
                         "place every emitter in the fluid")
    if np.any(wall_distances(c, walls) - r[:, None] <= 0.0):
        raise InputError("centres", c.tolist(), "a wall touches or cuts a sphere", "keep every sphere in the fluid")
    cells = [-1, 1, -2, 2] if walls.channel else [-1]
    absorbing = np.flatnonzero(~pa)
    extra = [image_points(c[absorbing], walls, m) for m in cells]
    owner = np.concatenate([np.arange(len(r))] + [absorbing] * len(cells))
    n_img = len(cells) * len(absorbing)
    return (np.concatenate([c] + extra), r[owner], np.concatenate([pa, np.zeros(n_img, bool)]),
            np.concatenate([off, np.zeros(n_img)]), owner)


def _fold_images(values, owner, n_real):
    out = np.zeros(values.shape[:1] + (n_real,) + values.shape[2:])
    for k, j in enumerate(owner):
        out[:, j] += values[:, k]
    return out


def _wall_fields(walls) -> dict:
    if walls is None:
        return dict(n_walls=jnp.asarray(0, jnp.int64), wall_normal=jnp.asarray([0.0, 0.0, 1.0]),
                    wall_lower=jnp.asarray(0.0), wall_upper=jnp.asarray(0.0), wall_scale=jnp.asarray(np.inf))
    return dict(n_walls=jnp.asarray(2 if walls.channel else 1, jnp.int64),
                wall_normal=jnp.asarray(np.asarray(walls.normal, dtype=float)),
                wall_lower=jnp.asarray(float(walls.lower)),
                wall_upper=jnp.asarray(float(walls.upper) if walls.channel else 0.0),
                wall_scale=jnp.asarray(float(walls.width) if walls.channel else np.inf))


def _pulse_array(pulses, n_emit: int, symbol_interval: float) -> np.ndarray:
    from capacity.errors import InputError

    if pulses is None:
        return np.zeros(n_emit)
    p = np.asarray(pulses, dtype=float).reshape(-1)
    if p.shape != (n_emit,) or not np.all(np.isfinite(p)) or np.any(p < 0.0) or np.any(p > symbol_interval):
        raise InputError("pulses", np.asarray(pulses).tolist(),
                         f"must hold one release duration per emitter in [0, symbol_interval = {symbol_interval:g}] s",
                         "give e.g. [0.005, 0.0]")
    return p


def _pow2_at_least(n: int) -> int:
    return 1 << max(0, int(n - 1).bit_length())


def _progress_bar(show: bool, total: int):
    import sys

    if not show or not sys.stderr.isatty():  # a bar only on a terminal
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, unit="molecule", desc="particles", file=sys.stderr)
