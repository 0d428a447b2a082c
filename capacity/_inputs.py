"""Argument checks shared by the library's entry points: anything that is not a real number (array) becomes an
:class:`~capacity.errors.InputError` naming the argument, instead of a numpy/JAX ValueError or TypeError."""

from __future__ import annotations

import math
import numbers

import numpy as np

from capacity.errors import InputError

__all__ = ["real_array", "real_number", "whole_number"]


def _shown(value):
    try:
        small = isinstance(value, str) or np.size(value) < 20
    except (ValueError, TypeError):  # ragged nesting
        small = False
    return value if small else f"{type(value).__name__} of {len(value)} entries"


def real_array(value, field: str, fix: str) -> np.ndarray:
    """``value`` as a float64 array; strings, ragged nesting, complex and other non-real entries raise."""
    try:
        raw = np.asarray(value)
    except (ValueError, TypeError):
        raise InputError(field, _shown(value), "is not a rectangular array of numbers (ragged rows?)", fix) from None
    if raw.dtype.kind not in "biufO":
        kind = "complex" if raw.dtype.kind == "c" else str(raw.dtype)
        raise InputError(field, _shown(value), f"must hold real numbers, not {kind} entries", fix)
    try:
        return np.asarray(raw, dtype=float)
    except (ValueError, TypeError, OverflowError):
        raise InputError(field, _shown(value), "must hold real numbers only", fix) from None


def real_number(value, field: str, fix: str) -> float:
    """A real scalar (no bool, string, list or complex) as a float; NaN/inf are left to the caller's range check."""
    if isinstance(value, (bool, str, bytes)):
        raise InputError(field, value, "must be a real number", fix)
    if isinstance(value, numbers.Real):
        try:
            return float(value)
        except OverflowError:
            raise InputError(field, value, "is too large for a float", fix) from None
    try:  # numpy / JAX scalars and 0-d arrays
        raw = np.asarray(value)
    except (ValueError, TypeError):
        raw = None
    if raw is None or raw.ndim != 0 or raw.dtype.kind not in "iuf":
        raise InputError(field, value, "must be a real number", fix)
    return float(raw)


def whole_number(value, field: str, fix: str, minimum: int = 1) -> int:
    """A whole number >= ``minimum`` (ints, or floats with an integral value); NaN, inf, fractions raise."""
    number = real_number(value, field, fix)
    if not math.isfinite(number) or number != math.floor(number) or number < minimum:
        raise InputError(field, value, f"must be a whole number >= {minimum}", fix)
    return int(value) if isinstance(value, numbers.Integral) else int(number)
