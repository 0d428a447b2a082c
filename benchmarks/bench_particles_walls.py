"""Speed of the particle simulator with reflecting walls against a plain NumPy step-and-check loop.

Layout: a channel 18 um wide (walls y = -9 um and y = +9 um), 2 emitters x 2 absorbing receivers (radius 5 um,
4 um from each wall), D = 79.4e-12 m^2/s, Ts = 0.1 s, 10 slots.

Counted as in ``bench_particles.py``: molecule-steps of the base step dt that the molecules need. The baseline takes
exactly those steps (vectorised over molecules, a Python loop over fixed steps): Gaussian move, radial crossing test
against every sphere and its mirror image across each wall, end point folded back into the channel, absorbed
molecules dropped. The simulator takes adaptive steps (capped near spheres and, in a channel, at the width).
Compilation excluded (one warm-up run); the two are timed interleaved, best of three.

Run: ``python benchmarks/bench_particles_walls.py``.
"""

from __future__ import annotations

import time

import numpy as np

import capacity  # noqa: F401  (float64 switch)
from capacity.physics.images import WallGeometry, image_points, reflect_into_fluid
from capacity.physics.particles import _simulate

UM = 1e-6
WALLS = WallGeometry(np.array([0.0, 1.0, 0.0]), -9.0 * UM, 9.0 * UM)
LAYOUT = dict(
    emitters=np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 20.0]]) * UM,
    centres=np.array([[12.0, 0.0, 0.0], [12.0, 0.0, 20.0]]) * UM,
    radii=np.array([5.0, 5.0]) * UM,
    passive=np.array([False, False]),
    sample_offsets=np.zeros(2),
    diffusion=79.4e-12,
    degradation=0.0,
    symbol_interval=0.1,
    memory=9,
)


def plain_numpy(emitters, centres, radii, diffusion, symbol_interval, memory, dt, particles, seed):
    """Plain fixed-step simulator with walls: hits (E, R, L+1) and the molecule-steps it took."""
    rng = np.random.default_rng(seed)
    n_slot = int(round(symbol_interval / dt))
    n_steps = n_slot * (memory + 1)
    n_rx = centres.shape[0]
    spheres = np.concatenate([centres, image_points(centres, WALLS, -1), image_points(centres, WALLS, 1)])
    rad = np.tile(radii, 3)
    hits = np.zeros((emitters.shape[0], n_rx, memory + 1))
    steps = 0
    sigma = np.sqrt(2.0 * diffusion * dt)
    d_dt = diffusion * dt
    for i, e in enumerate(emitters):
        x = np.repeat(e[None, :], particles, axis=0)
        r1 = np.linalg.norm(x[:, None, :] - spheres[None], axis=-1)
        for n in range(n_steps):
            if x.shape[0] == 0:
                break
            steps += x.shape[0]
            x = x + sigma * rng.standard_normal(x.shape)
            r2 = np.linalg.norm(x[:, None, :] - spheres[None], axis=-1)
            d1, d2 = r1 - rad, r2 - rad
            b = r1 * r2 / d_dt
            p = (np.exp(-np.maximum(d1, 0.0) * np.maximum(d2, 0.0) / d_dt) - np.exp(-b)) / -np.expm1(-b)
            hit = (d2 <= 0.0) | (rng.random(d2.shape) < p)
            taken = hit.any(axis=1)
            if taken.any():
                which = np.argmax(np.where(d2 <= 0.0, 2.0, np.where(hit, p, -1.0)), axis=1)[taken] % n_rx
                np.add.at(hits[i, :, n // n_slot], which, 1.0)
                x = x[~taken]
            x = reflect_into_fluid(x, WALLS)
            r1 = np.linalg.norm(x[:, None, :] - spheres[None], axis=-1)
    return hits / particles, steps


def run(fast_particles: int = 20_000, plain_particles: int = 1_500, seed: int = 0, repeats: int = 3) -> dict:
    """Time both simulators on the layout above (interleaved, best of ``repeats``); return the figures."""
    lay = LAYOUT
    args = tuple(lay[k] for k in ("emitters", "centres", "radii", "passive", "sample_offsets", "diffusion",
                                  "degradation", "symbol_interval", "memory"))
    _simulate(*args, particles=64, seed=seed, walls=WALLS)  # compile
    fast_s = plain_s = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        sim = _simulate(*args, particles=fast_particles, seed=seed, walls=WALLS)
        fast_s = min(fast_s, time.perf_counter() - t0)
        dt = sim.time_step
        t0 = time.perf_counter()
        plain_hits, plain_steps = plain_numpy(lay["emitters"], lay["centres"], lay["radii"], lay["diffusion"],
                                              lay["symbol_interval"], lay["memory"], dt, plain_particles, seed)
        plain_s = min(plain_s, time.perf_counter() - t0)
    fast_equiv = float(np.sum(sim.ticks))
    fast_rate = fast_equiv / fast_s
    plain_rate = plain_steps / plain_s
    p = np.maximum(sim.hits, 1.0 / fast_particles)
    se = np.sqrt(p * (1 - p) * (1.0 / plain_particles + 1.0 / fast_particles))
    return {
        "name": "particles_walls",
        "layout": "channel 18 um wide, 2 emitters x 2 absorbing spheres r=5um, D=79.4e-12, Ts=0.1 s, 10 slots",
        "time_step_s": dt,
        "fast_molecules": fast_particles * 2,
        "fast_seconds": fast_s,
        "fast_steps_taken": int(np.sum(sim.steps)),
        "fast_base_step_equivalents": fast_equiv,
        "fast_equiv_molecule_steps_per_s": fast_rate,
        "plain_molecules": plain_particles * 2,
        "plain_seconds": plain_s,
        "plain_molecule_steps": plain_steps,
        "plain_molecule_steps_per_s": plain_rate,
        "ratio": fast_rate / plain_rate,
        "max_slot_difference_in_plain_se": float(np.max(np.abs(sim.hits - plain_hits) / se)),
    }


if __name__ == "__main__":
    res = run()
    for key, value in res.items():
        print(f"{key:38s} {value}")
