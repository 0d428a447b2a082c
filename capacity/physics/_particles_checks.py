"""Private input checks and the automatic base step of the particle simulator."""

from __future__ import annotations

import math
import numbers
from typing import NamedTuple

import numpy as np

from capacity.errors import InputError


class Inputs(NamedTuple):
    emitters: np.ndarray  # (E, 3)
    centres: np.ndarray  # (R, 3)
    radii: np.ndarray  # (R,)
    passive: np.ndarray  # (R,) bool
    sample_offsets: np.ndarray  # (R,)
    diffusion: float
    degradation: float
    symbol_interval: float
    memory: int
    particles: int
    seed: int
    time_step: float | None


def _array(name, value, shape_text, ndim, last=None):
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as err:
        raise InputError(name, value, f"must be a numeric array of shape {shape_text}", "pass numbers") from err
    if arr.ndim != ndim or (last is not None and arr.shape[-1] != last):
        raise InputError(name, np.shape(value), f"must have shape {shape_text}", f"pass an array of {shape_text}")
    if not np.all(np.isfinite(arr)):
        raise InputError(name, value, "must be finite", "remove NaN/inf entries")
    return arr


def _positive(name, value, allow_zero=False):
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise InputError(name, value, "must be a real number", "pass a float in SI units")
    v = float(value)
    if not math.isfinite(v) or v < 0.0 or (v == 0.0 and not allow_zero):
        raise InputError(name, value, "must be finite and " + (">= 0" if allow_zero else "> 0"), "pass e.g. 1.0")
    return v


def _integer(name, value, minimum):
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise InputError(name, value, "must be an integer", f"pass an int >= {minimum}")
    if int(value) < minimum:
        raise InputError(name, value, f"must be >= {minimum}", f"pass an int >= {minimum}")
    return int(value)


def check_inputs(
    emitters, centres, radii, passive, sample_offsets, diffusion, degradation, symbol_interval, memory, particles,
    seed, time_step,
) -> Inputs:
    """Validate and convert every argument of ``simulate_hits``; raise :class:`InputError` on the first problem."""
    em = _array("emitters", emitters, "(E, 3)", 2, 3)
    ce = _array("centres", centres, "(R, 3)", 2, 3)
    n_sph = ce.shape[0]
    if em.shape[0] < 1:
        raise InputError("emitters", em.shape, "needs at least one emitter", "pass an (E, 3) array with E >= 1")
    if n_sph < 1:
        raise InputError("centres", ce.shape, "needs at least one sphere", "pass an (R, 3) array with R >= 1")
    ra = _array("radii", radii, "(R,)", 1)
    if ra.shape[0] != n_sph:
        raise InputError("radii", ra.shape, f"must have one radius per sphere ({n_sph})", "match centres")
    if np.any(ra <= 0.0):
        raise InputError("radii", radii, "must be > 0", "give positive radii in metres")
    pa = np.asarray(passive)
    if pa.shape != (n_sph,) or pa.dtype != np.bool_:
        raise InputError("passive", passive, f"must be a bool array of shape ({n_sph},)", "one flag per sphere")
    so = _array("sample_offsets", sample_offsets, "(R,)", 1)
    if so.shape[0] != n_sph:
        raise InputError("sample_offsets", so.shape, f"must have one entry per sphere ({n_sph})", "match centres")
    d = _positive("diffusion", diffusion)
    k = _positive("degradation", degradation, allow_zero=True)
    ts = _positive("symbol_interval", symbol_interval)
    if np.any(pa & ((so < 0.0) | (so > ts))):
        raise InputError("sample_offsets", sample_offsets, "passive offsets must lie in [0, symbol_interval]",
                         "give the sampling instant within the slot")
    mem = _integer("memory", memory, 0)
    n = _integer("particles", particles, 1)
    sd = _integer("seed", seed, 0)
    dt = None
    if time_step is not None:
        dt = _positive("time_step", time_step)
        if dt > ts:
            raise InputError("time_step", time_step, "must not exceed symbol_interval",
                             "use a smaller step or None")
    absorb = ~pa
    ac, ar = ce[absorb], ra[absorb]
    if ac.shape[0] > 1:
        sep = np.linalg.norm(ac[:, None, :] - ac[None, :, :], axis=-1) - ar[:, None] - ar[None, :]
        np.fill_diagonal(sep, np.inf)
        if np.any(sep <= 0.0):
            raise InputError("centres", centres, "absorbing spheres overlap or touch", "move them apart")
    if ac.shape[0] > 0:
        gap = np.linalg.norm(em[:, None, :] - ac[None, :, :], axis=-1) - ar[None, :]
        if np.any(gap <= 0.0):
            raise InputError("emitters", emitters, "an emitter lies in or on an absorbing sphere",
                             "place every emitter outside the absorbing spheres")
    return Inputs(em, ce, ra, pa, so, d, k, ts, mem, n, sd, dt)


def auto_time_step(inp: Inputs) -> float:
    """``min(l^2/(100 D), Ts/200)``, ``l`` the smallest absorbing radius, emitter gap or surface-surface gap."""
    absorb = ~inp.passive
    lengths = [np.inf]
    ac, ar = inp.centres[absorb], inp.radii[absorb]
    if ac.shape[0] > 0:
        lengths.append(float(np.min(ar)))
        gap = np.linalg.norm(inp.emitters[:, None, :] - ac[None, :, :], axis=-1) - ar[None, :]
        lengths.append(float(np.min(gap)))
    if ac.shape[0] > 1:
        sep = np.linalg.norm(ac[:, None, :] - ac[None, :, :], axis=-1) - ar[:, None] - ar[None, :]
        np.fill_diagonal(sep, np.inf)
        lengths.append(float(np.min(sep)))
    ell = min(lengths)
    return float(min(ell * ell / (100.0 * inp.diffusion), inp.symbol_interval / 200.0))
