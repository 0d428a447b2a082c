"""Reflecting walls as image layouts (the method of images).

A flat reflecting wall (zero normal flux) turns the half-space problem into a full-space one: mirror the layout
across the plane and the mirrored problem is symmetric, so its normal flux through the plane is zero and its
restriction to the fluid side solves the walled problem. For a point source ``x0`` and spheres ``S_j`` (any mix of
absorbing and passive) this gives, exactly:

* the probability that a molecule from ``x0`` is counted by ``S_j`` in the walled medium equals the sum, over the
  images ``S_j^(m)`` of ``S_j`` (``S_j`` itself included), of the probability that a molecule from ``x0`` in free
  space, with EVERY image sphere present as an absorber (or as a transparent counter), is counted by
  ``S_j^(m)``. (Equivalently: the sum over the images of the source, with the receiver and its images present.)
  Passive spheres do not perturb the field, so for them each term is the free-space closed form and the sum is
  the classical image-source formula (e.g. Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed. 1959,
  Sec. 10.10; Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, Sec. 3.5).

One wall gives one image per sphere (no truncation). Two parallel walls at ``z = lo`` and ``z = hi`` (``z`` the
coordinate along the first wall's normal, ``W = hi - lo``) give an infinite lattice of images: the slab is
copied into cells ``m`` (``[lo + m W, lo + (m+1) W]``), mirrored in odd cells; cell ``m`` holds
``z -> z + m W`` (even ``m``) or ``z -> 2 lo - z + (m+1) W`` (odd ``m``). We keep the cells ``|m| <= depth``.

Truncation bound (our derivation). Follow the free-space path from ``x0``. On every path that never enters a
dropped image sphere before ``T``, the kept and the full image problems agree up to ``T``. All dropped spheres lie
beyond the planes ``z = lo + (depth+1) W`` and ``z = lo - depth W``, at normal distances ``d+``, ``d-`` from
``x0``; reaching either is an excursion of the 1-D normal coordinate, whose maximum over ``[0, T]`` exceeds ``d``
with probability ``erfc(d / sqrt(4 D T))`` (reflection principle). So every slot probability up to ``T``, and
every partial sum of slots, is off by at most ``erfc(d+/sqrt(4DT)) + erfc(d-/sqrt(4DT))`` (degradation only lowers
it). After ``T`` (the tail) the bound is ``exp(-d+ sqrt(k/D)) + exp(-d- sqrt(k/D))`` with degradation ``k > 0``
(the Laplace transform of the 1-D first-passage time), and there is NO bound when ``k = 0``: a channel is two
dimensional at long times, every molecule meets an absorbing receiver eventually and the sum of a passive
receiver's samples diverges; the reported tail is then that of the kept images, and the notes say so.

These statements hold for the exact problem; a response model applied to the image layout keeps its own
approximation on top (the ``lone`` model ignores that image spheres shadow each other, the ``shadowed`` model uses
its renewal approximation).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from scipy.special import erfc

__all__ = [
    "IMAGE_TOLERANCE",
    "WallGeometry",
    "choose_depth",
    "fold",
    "image_cells",
    "image_points",
    "image_points_jax",
    "mirror_spheres",
    "reflect_into_fluid",
    "truncation_bounds",
    "wall_distances",
    "wall_geometry",
]

#: truncation bound aimed at when the image depth of a channel is chosen (probability per slot)
IMAGE_TOLERANCE = 1e-7


class WallGeometry(NamedTuple):
    """One wall or a channel, as the coordinate ``z = normal . x``: fluid where ``lower < z < upper``.

    normal : (3,) unit vector, the first wall's normal (into the fluid). lower : z of the first wall, m.
    upper : z of the second wall, m, or ``inf`` for a single wall.
    """

    normal: np.ndarray
    lower: float
    upper: float

    @property
    def width(self) -> float:
        """Channel width ``upper - lower`` (m), ``inf`` for one wall."""
        return self.upper - self.lower

    @property
    def channel(self) -> bool:
        return math.isfinite(self.upper)


def wall_geometry(walls) -> WallGeometry | None:
    """The :class:`WallGeometry` of a validated scenario's ``walls`` (None when there are none)."""
    if not walls:
        return None
    n = np.asarray(walls[0].normal, dtype=float)
    n = n / np.linalg.norm(n)
    lower = float(np.dot(n, np.asarray(walls[0].point, dtype=float)))
    upper = float(np.dot(n, np.asarray(walls[1].point, dtype=float))) if len(walls) == 2 else math.inf
    return WallGeometry(n, lower, upper)


def wall_distances(points, geom: WallGeometry) -> np.ndarray:
    """Distances (m) from points (N, 3) to each wall, shape (N, number of walls)."""
    z = np.asarray(points, dtype=float).reshape(-1, 3) @ geom.normal
    out = [z - geom.lower]
    if geom.channel:
        out.append(geom.upper - z)
    return np.stack(out, axis=1)


def image_cells(geom: WallGeometry, depth: int) -> list[int]:
    """Cells kept: ``[0, -1]`` for one wall; ``0, -1, 1, -2, 2, ...`` up to ``|m| <= depth`` for a channel."""
    if not geom.channel:
        return [0, -1]
    cells = [0]
    for m in range(1, int(depth) + 1):
        cells += [-m, m]
    return cells


def image_points(points, geom: WallGeometry, cell: int) -> np.ndarray:
    """Images (N, 3) of points (N, 3) in ``cell`` (module docstring; cell 0 is the identity)."""
    x = np.asarray(points, dtype=float).reshape(-1, 3)
    z = x @ geom.normal
    if cell % 2 == 0:
        shift = cell * geom.width if cell else 0.0
        z_new = z + shift
    else:
        z_new = 2.0 * geom.lower - z + ((cell + 1) * geom.width if cell != -1 else 0.0)
    return x + (z_new - z)[:, None] * geom.normal[None, :]


def image_points_jax(points, geom: WallGeometry, cell: int):
    """:func:`image_points` in JAX (differentiable in ``points``; the wall geometry and cell are constants)."""
    import jax.numpy as jnp

    normal = jnp.asarray(np.asarray(geom.normal, dtype=float))
    x = jnp.reshape(points, (-1, 3))
    z = x @ normal
    if cell % 2 == 0:
        z_new = z + (cell * geom.width if cell else 0.0)
    else:
        z_new = 2.0 * geom.lower - z + ((cell + 1) * geom.width if cell != -1 else 0.0)
    return x + (z_new - z)[:, None] * normal[None, :]


def mirror_spheres(centres, geom: WallGeometry, depth: int) -> tuple[np.ndarray, int]:
    """Centres of every kept image, (M*R, 3), cell-major (all R spheres of cell 0 first), and M."""
    cells = image_cells(geom, depth)
    return np.concatenate([image_points(centres, geom, m) for m in cells]), len(cells)


def fold(values, copies: int):
    """Sum the image copies of an (..., M*R, ...) response back onto the R real receivers: ``values`` has the
    receiver axis at position 1 (E, M*R, ...) and the result (E, R, ...)."""
    v = np.asarray(values)
    e, mr = v.shape[:2]
    return v.reshape((e, copies, mr // copies) + v.shape[2:]).sum(axis=1)


def truncation_bounds(geom: WallGeometry, sources, depth: int, horizon: float, diffusion: float,
                      degradation: float) -> tuple[float, float]:
    """(slot bound up to ``horizon``, tail bound after it) of keeping the cells ``|m| <= depth``, largest over
    the sources (module docstring). Both 0 for one wall; the tail bound is ``inf`` in a channel without
    degradation (no bound exists)."""
    if not geom.channel:
        return 0.0, 0.0
    z = np.asarray(sources, dtype=float).reshape(-1, 3) @ geom.normal
    up = geom.lower + (depth + 1) * geom.width - z
    down = z - geom.lower + depth * geom.width
    spread = math.sqrt(4.0 * diffusion * horizon)
    slot = float(np.max(erfc(up / spread) + erfc(down / spread)))
    if degradation > 0.0:
        root = math.sqrt(degradation / diffusion)
        tail = float(np.max(np.exp(-up * root) + np.exp(-down * root)))
    else:
        tail = math.inf
    return slot, tail


def choose_depth(geom: WallGeometry, sources, horizon: float, diffusion: float, degradation: float, *,
                 tolerance: float = IMAGE_TOLERANCE, max_depth: int = 400) -> tuple[int, float, float]:
    """Smallest depth whose slot bound (and, with degradation, tail bound) is at most ``tolerance``, capped at
    ``max_depth``. Returns ``(depth, slot_bound, tail_bound)``; at the cap the bounds say what was reached."""
    if not geom.channel:
        return 0, 0.0, 0.0
    depth = 0
    while True:
        slot, tail = truncation_bounds(geom, sources, depth, horizon, diffusion, degradation)
        done = slot <= tolerance and (degradation <= 0.0 or tail <= tolerance)
        if done or depth >= max_depth:
            return depth, slot, tail
        depth += 1


def reflect_into_fluid(points, geom: WallGeometry) -> np.ndarray:
    """Fold points (N, 3) back into the fluid (NumPy reference of the particle kernel's reflection): one wall
    ``z -> lower + |z - lower|``; a channel ``z -> lower + W - |((z - lower) mod 2W) - W|``."""
    x = np.asarray(points, dtype=float).reshape(-1, 3)
    z = x @ geom.normal
    if geom.channel:
        w = geom.width
        z_new = geom.lower + w - np.abs(np.mod(z - geom.lower, 2.0 * w) - w)
    else:
        z_new = geom.lower + np.abs(z - geom.lower)
    return x + (z_new - z)[:, None] * geom.normal[None, :]
