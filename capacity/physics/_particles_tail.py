"""Private: passive-sphere tail of the particle simulator, from the survivors' final positions.

After the horizon ``T = (L+1) Ts`` a surviving molecule at ``x`` is, in free space, inside a transparent sphere
(centre ``c``, radius ``a``, ``rho = |x - c|``) at time ``T + t`` with probability (reference sheet erfc form;
Noel, Cheung & Schober, ICC 2013 workshops, for the setting)

    P(rho, t) = 1/2 [erfc((rho-a)/s) - erfc((rho+a)/s)]
                - sqrt(Dt/pi)/rho [e^(-(rho-a)^2/s^2) - e^(-(rho+a)^2/s^2)],      s = sqrt(4 D t),

and is still undegraded with probability ``e^(-k t)``. The passive tail of one molecule is the sum over the later
sampling instants ``t_m = offset + (m-1) Ts``, ``m = 1, 2, ...``: the first ``n_terms`` exactly, the rest by the
far-field form ``V (4 pi D t)^(-3/2) e^(-k t)`` (``V = 4/3 pi a^3``) integrated from ``t_M + Ts/2``:
``V (4 pi D)^(-3/2) / Ts * [2 e^(-k t0)/sqrt(t0) - 2 sqrt(pi k) erfc(sqrt(k t0))]``.
Absorbing spheres are ignored after the horizon (no shadowing), so the estimate is high when they hide the
passive sphere.
"""

from __future__ import annotations

import numpy as np
from scipy.special import erfc


def occupancy(rho, radius, t, diffusion):
    """Free-space probability that a molecule at centre distance ``rho`` (m) is inside the sphere after ``t`` s."""
    rho = np.maximum(np.asarray(rho, dtype=np.float64), 1e-9 * radius)
    if t <= 0.0:
        return (rho < radius).astype(np.float64)
    s = np.sqrt(4.0 * diffusion * t)
    first = 0.5 * (erfc((rho - radius) / s) - erfc((rho + radius) / s))
    second = np.sqrt(diffusion * t / np.pi) / rho * (
        np.exp(-(((rho - radius) / s) ** 2)) - np.exp(-(((rho + radius) / s) ** 2))
    )
    return np.clip(first - second, 0.0, 1.0)


def passive_tail(positions, n_used, centre, radius, offset, symbol_interval, diffusion, degradation,
                 n_terms: int = 200):
    """Tail estimate and its standard error for one passive sphere.

    positions : (S, 3) m, final positions of the survivors among the first ``n_used`` molecules.
    Returns ``(mean, stderr)`` over the ``n_used`` molecules (non-survivors contribute 0).
    """
    if n_used == 0 or positions.shape[0] == 0:
        return 0.0, 0.0
    rho = np.linalg.norm(positions - centre, axis=1)
    per = np.zeros(rho.shape[0])
    for m in range(n_terms):
        t = offset + m * symbol_interval
        per += occupancy(rho, radius, t, diffusion) * np.exp(-degradation * t)
    t0 = offset + (n_terms - 0.5) * symbol_interval
    k = degradation
    integral = 2.0 * np.exp(-k * t0) / np.sqrt(t0) - 2.0 * np.sqrt(np.pi * k) * erfc(np.sqrt(k * t0))
    per += (4.0 / 3.0) * np.pi * radius**3 * (4.0 * np.pi * diffusion) ** -1.5 / symbol_interval * integral
    mean = float(np.sum(per) / n_used)
    var = max(float(np.sum(per * per) / n_used) - mean * mean, 0.0)
    return mean, float(np.sqrt(var / n_used))
