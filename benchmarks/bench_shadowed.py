"""Shadowed response model: forward and gradient time for a 4 x 4 layout.

Figures: compile time, time per evaluation (after compilation), time per gradient of the summed hits with respect
to every receiver centre, the gradient/forward ratio, and, as the plain baseline in the same process, the time
of the particle simulator for the same layout at 1e4 molecules per emitter.
"""

from __future__ import annotations

import time

import numpy as np


def _best(fn, repeats=5):
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def run() -> dict:
    import jax
    import jax.numpy as jnp

    import capacity  # noqa: F401  (float64)
    from capacity.physics.particles import simulate_hits
    from capacity.physics.shadowed import shadowed_hits

    # invented 4 x 4 layout: four emitters on a line, four 4-um receivers facing them 12 um away
    emitters = np.array([[0.0, 15e-6 * k, 0.0] for k in range(4)])
    centres = np.array([[12e-6, 15e-6 * k + 3e-6, 0.0] for k in range(4)])
    radii = np.full(4, 4e-6)
    D, k, ts, L = 1e-10, 0.0, 0.2, 10

    def forward(c):
        return shadowed_hits(emitters, c, radii, D, k, ts, L)[0]

    grad = jax.jit(jax.grad(lambda c: jnp.sum(forward(c))))
    t = time.perf_counter()
    jax.block_until_ready(forward(centres))
    compile_forward = time.perf_counter() - t
    t = time.perf_counter()
    jax.block_until_ready(grad(centres))
    compile_grad = time.perf_counter() - t
    t_fwd = _best(lambda: jax.block_until_ready(forward(centres)))
    t_grad = _best(lambda: jax.block_until_ready(grad(centres)))
    t = time.perf_counter()
    simulate_hits(emitters, centres, radii, np.zeros(4, bool), np.full(4, ts), D, k, ts, L, particles=10_000,
                  seed=0)
    t_particles = time.perf_counter() - t
    out = {
        "layout": "4 emitters x 4 absorbing receivers, L = 10",
        "compile_forward_s": compile_forward,
        "compile_gradient_s": compile_grad,
        "forward_s": t_fwd,
        "gradient_s": t_grad,
        "gradient_over_forward": t_grad / t_fwd,
        "particles_1e4_per_emitter_s": t_particles,
        "particles_over_forward": t_particles / t_fwd,
    }
    for key, value in out.items():
        print(f"{key:>30}: {value:.4g}" if isinstance(value, float) else f"{key:>30}: {value}")
    return out


if __name__ == "__main__":
    run()
