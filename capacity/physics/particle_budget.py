"""Refuse particle runs that would take more than an hour, from a short timed pilot.

The simulator's cost grows linearly with the number of molecules (each is advanced independently), so the time
of a warm pilot of :data:`PILOT` molecules per emitter, scaled, estimates the whole run. The pilot runs twice:
the first call compiles the kernel, the second is timed. Runs of at most ``SMALL x PILOT`` molecules are not
checked (they finish in seconds to minutes on the build machine).
"""

from __future__ import annotations

import time

from capacity.errors import InputError

#: longest particle run started without ``force``, seconds
MAX_SECONDS = 3600.0
#: molecules per emitter in the timed pilot
PILOT = 2048
#: runs of at most SMALL * PILOT molecules per emitter skip the pilot
SMALL = 50


def estimated_seconds(run, particles: int) -> float:
    """Seconds a run of ``particles`` molecules per emitter should take; ``run(n)`` simulates n molecules."""
    run(PILOT)  # compile
    start = time.perf_counter()
    run(PILOT)
    return (time.perf_counter() - start) * particles / PILOT


def check_run_time(run, particles: int, *, force: bool = False, limit: float = MAX_SECONDS) -> float | None:
    """Raise :class:`InputError` (field ``channel.particle_count``) when the estimated time exceeds ``limit`` and
    ``force`` is not set; returns the estimate (None when the run is small enough not to be checked)."""
    if force or particles <= SMALL * PILOT:
        return None
    seconds = estimated_seconds(run, particles)
    if seconds > limit:
        raise InputError("channel.particle_count", particles,
                         f"the particle run is estimated at {seconds / 3600:.3g} hours (from a timed pilot of "
                         f"{PILOT} molecules per emitter), above the {limit / 3600:.3g} h limit",
                         "simulate fewer molecules (--particle-count or channel.particle_count), keep fewer lags, "
                         "or pass --force to run it anyway")
    return seconds
