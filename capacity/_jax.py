"""JAX set-up shared by every entry point: float64 everywhere.

Imported by ``capacity/__init__.py`` so that any use of the package computes in double precision.
"""

from __future__ import annotations

import jax

jax.config.update("jax_enable_x64", True)
