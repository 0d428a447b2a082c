"""Special functions shared by the closed forms, with guards where JAX's float64 versions fail.

``erfcx``: ``jax.scipy.special.erfcx`` returns exactly 0 for arguments in about [26.5433, 26.6417] in float64
(seen with JAX 0.10; scipy.special.erfcx is right there), so above :data:`ERFCX_ASYMPTOTIC` the asymptotic series
is used instead (Abramowitz & Stegun 7.1.23).
"""

from __future__ import annotations

import math

import jax.numpy as jnp
from jax.scipy.special import erfcx as _jax_erfcx

from capacity import _jax  # noqa: F401  (float64)

#: above this argument erfcx comes from its asymptotic series (16 terms: next term < 1e-21 relative at x >= 12)
ERFCX_ASYMPTOTIC = 12.0


def erfcx(x):
    """erfcx(x) = exp(x^2) erfc(x) for real x: JAX's below :data:`ERFCX_ASYMPTOTIC`, else the asymptotic series
    ``1/(sqrt(pi) x) sum_n (-1)^n (2n-1)!! / (2 x^2)^n`` to n = 16."""
    big = x > ERFCX_ASYMPTOTIC
    xb = jnp.where(big, x, ERFCX_ASYMPTOTIC + 1.0)
    u = 1.0 / (2.0 * xb * xb)
    series, term = jnp.ones_like(xb), jnp.ones_like(xb)
    for n in range(1, 17):
        term = -term * (2 * n - 1) * u
        series = series + term
    return jnp.where(big, series / (math.sqrt(math.pi) * xb), _jax_erfcx(jnp.where(big, 0.0, x)))
