"""Independent reference: eventual capture split between absorbing spheres by alternating Kelvin images.

Source: classical electrostatics of grounded spheres (method of images; see references.md, "Several absorbing
spheres"). The probability that a Brownian molecule from ``x0`` is eventually absorbed by sphere ``j`` (before any
other sphere) equals minus the charge induced on grounded sphere ``j`` by a unit point charge at ``x0`` (Green's
reciprocity). A charge ``q`` at ``p`` has the image ``-q a_j/|p - c_j|`` at ``c_j + a_j^2 (p - c_j)/|p - c_j|^2``
in sphere ``j``; imaging every new image in every *other* sphere and summing the images inside each sphere
converges geometrically. Plain numpy, no code shared with the package (no degradation: steady Laplace problem only).
"""

from __future__ import annotations

import numpy as np


def image_split(source, centres, radii, tol=1e-14, max_images=2_000_000):
    """Eventual capture probabilities (R,) of R grounded spheres for a unit charge at ``source``.

    Images whose charge falls below ``tol`` are dropped (the series is geometric, so the dropped remainder is of
    the order of ``tol`` times a constant); raises if more than ``max_images`` images would be needed.
    """
    source = np.asarray(source, dtype=float)
    centres = np.asarray(centres, dtype=float)
    radii = np.asarray(radii, dtype=float)
    num = len(radii)
    captured = np.zeros(num)
    # Stack of (charge, position, sphere it lies in (-1 for the source)).
    stack = [(1.0, source, -1)]
    count = 0
    while stack:
        q, p, inside = stack.pop()
        for j in range(num):
            if j == inside:
                continue
            offset = p - centres[j]
            dist = np.linalg.norm(offset)
            q_img = -q * radii[j] / dist
            if abs(q_img) < tol:
                continue
            p_img = centres[j] + radii[j] ** 2 * offset / dist**2
            captured[j] -= q_img
            count += 1
            if count > max_images:
                raise RuntimeError("image series did not reach the tolerance; raise max_images or tol")
            stack.append((q_img, p_img, j))
    return captured
