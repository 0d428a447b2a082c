"""Quantity strings such as ``"5 um"``, ``"79.4 um^2/s"`` or ``"500 ms"`` turned into SI floats.

Plain numbers are taken to be SI already. Strings are split into a decimal number and a unit expression; the unit
expression is parsed by ``pint`` (one registry, created on first use) and checked against the expected dimension.
The conversion is done in decimal arithmetic whenever the unit's SI factor is a short decimal (every metric prefix,
minutes, hours), so ``"5 um"`` gives exactly the float ``5e-6`` and ``"79.4 um^2/s"`` exactly ``7.94e-11``: the
result is the correctly rounded value of the decimal quantity the user wrote.

Dimensions
----------
========== ============= =====================================================
name       SI unit       examples
========== ============= =====================================================
length     m             ``"5 um"``, ``"5 µm"``, ``"0.5 mm"``, ``5e-6``
time       s             ``"500 ms"``, ``"2 min"``, ``0.2``
diffusion  m^2/s         ``"79.4 um^2/s"``, ``"7.94e-11 m^2/s"``
rate       1/s           ``"0.1 1/s"``, ``"0.1 /s"``, ``"3 Hz"``
velocity   m/s           ``"10 um/s"``, ``"1e-5 m/s"`` (flow, surface reaction rates)
count      molecules     ``1000``, ``"1e4"``, ``"1e4 molecules"``
========== ============= =====================================================
"""

from __future__ import annotations

import math
import numbers
import re
from decimal import Decimal, DecimalException, localcontext
from functools import lru_cache

from capacity.errors import InputError

__all__ = ["DIMENSIONS", "to_si"]

#: dimension name -> (SI unit understood by pint, readable SI unit, example string, example SI number)
DIMENSIONS: dict[str, tuple[str, str, str, str]] = {
    "length": ("meter", "metres", '"5 um"', "5e-6"),
    "time": ("second", "seconds", '"500 ms"', "0.5"),
    "diffusion": ("meter**2/second", "m^2/s", '"79.4 um^2/s"', "7.94e-11"),
    "rate": ("1/second", "1/s", '"0.1 /s"', "0.1"),
    "velocity": ("meter/second", "m/s", '"10 um/s"', "1e-5"),
    "count": ("dimensionless", "molecules", '"1e4"', "10000"),
}

#: how each dimension is named in messages
_WHAT = {
    "length": "a length",
    "time": "a time",
    "diffusion": "a diffusion coefficient",
    "rate": "a rate",
    "velocity": "a velocity",
    "count": "a molecule count",
}

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$", re.DOTALL)
# a unit expression: unit names with optional small integer powers, joined by "*", "/" or spaces, optionally
# "1/..." or "/..." in front (e.g. "um^2/s", "1/s", "/s", "m^2 s^-1", "m**2/s"); no numbers, brackets or
# arithmetic, so pint never evaluates anything costly such as "um*9**9**9"
_UNIT_NAME = r"[^\W\d_]+"
_UNIT_TERM = _UNIT_NAME + r"(?:\s*(?:\^|\*\*)\s*[+-]?\d{1,2})?"
_UNIT_EXPRESSION = re.compile(
    rf"^(?:1\s*/\s*|/\s*)?{_UNIT_TERM}(?:(?:\s*[*/]\s*|\s+){_UNIT_TERM})*$"
)
_MOLECULE_WORDS = {"", "molecule", "molecules", "molec", "particle", "particles"}


@lru_cache(maxsize=1)
def _registry():
    """The one pint registry, built on first use (building it takes ~0.3 s)."""
    import pint

    return pint.UnitRegistry()


@lru_cache(maxsize=256)
def _si_factor(unit_text: str, dimension: str) -> Decimal:
    """Exact-as-written SI factor of a unit expression, or raise ``ValueError``/pint errors.

    The float factor from pint is replaced by its 12-significant-digit decimal form when that form is equal to
    it to within 1e-14 (true for metric prefixes and whole multiples such as 60 s); otherwise the float's exact
    binary value is used (e.g. 1/min).
    """
    ureg = _registry()
    quantity = ureg.Quantity("1 " + unit_text)
    factor = float(quantity.to(DIMENSIONS[dimension][0]).magnitude)
    if not math.isfinite(factor) or factor == 0.0:
        raise ValueError("unit factor is not a finite non-zero number")
    short = Decimal(format(factor, ".12g"))
    if abs(float(short) - factor) <= 1e-14 * abs(factor):
        return short
    return Decimal(factor)


def _fix_text(dimension: str) -> str:
    _, si_name, example, example_si = DIMENSIONS[dimension]
    return f"give {_WHAT[dimension]} such as {example} or {example_si} ({si_name})"


def to_si(value: object, dimension: str, field: str) -> float:
    """Convert ``value`` to a float in SI units of ``dimension``.

    Parameters
    ----------
    value : int, float or str
        A plain number (already SI) or a string ``"<number> <unit>"`` such as ``"5 um"`` or ``"79.4 um^2/s"``.
        For ``"count"`` a string may be a bare number or end in ``molecules``.
    dimension : str
        One of ``"length"`` (m), ``"time"`` (s), ``"diffusion"`` (m^2/s), ``"rate"`` (1/s), ``"velocity"`` (m/s),
        ``"count"``.
    field : str
        Dotted name of the entry, used in error messages (e.g. ``"receiver[1].radius"``).

    Returns
    -------
    float
        The value in SI units. Finite, but not range-checked (signs are checked by the validator).

    Raises
    ------
    InputError
        Booleans, other types, malformed strings, unknown units, the wrong dimension, NaN or infinity.
    """
    if dimension not in DIMENSIONS:
        raise ValueError(f"unknown dimension {dimension!r}; expected one of {sorted(DIMENSIONS)}")
    fix = _fix_text(dimension)
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        raise InputError(field, value, f"must be {_WHAT[dimension]}, not a {type(value).__name__}", fix)
    if isinstance(value, numbers.Real):
        try:
            result = float(value)
        except OverflowError:
            raise InputError(field, value, "is too large: it must be a finite number", fix) from None
    else:
        result = _parse_string(value, dimension, field, fix)
    if not math.isfinite(result):
        raise InputError(field, value, "must be a finite number (NaN and infinity are not allowed)", fix)
    return result


def _parse_string(text: str, dimension: str, field: str, fix: str) -> float:
    match = _NUMBER.match(text)
    if match is None:
        raise InputError(field, text, "is not a number followed by a unit", fix)
    number, unit_text = match.group(1), match.group(2)
    if dimension == "count":
        if unit_text.lower() not in _MOLECULE_WORDS:
            raise InputError(field, text, f'has the unit "{unit_text}", but a molecule count has none', fix)
        return _decimal_to_float(number, None, field, text, fix)
    if not unit_text:
        raise InputError(field, text, "is a string without a unit", fix + "; plain numbers need no quotes")
    if not _UNIT_EXPRESSION.match(unit_text):
        raise InputError(
            field,
            text,
            f'has a unit "{unit_text}" that is not a unit expression (unit names with whole powers joined by '
            '"*", "/" or spaces, such as um^2/s, 1/s or m^2 s^-1; no arithmetic)',
            fix,
        )
    try:
        factor = _si_factor(unit_text, dimension)
    except Exception as err:  # noqa: BLE001  (pint raises several unrelated types)
        name = type(err).__name__
        if name == "DimensionalityError":
            problem = f'has the unit "{unit_text}", which is not {_WHAT[dimension]}'
        else:
            problem = f'has a unit "{unit_text}" that cannot be read ({name})'
        raise InputError(field, text, problem, fix) from None
    return _decimal_to_float(number, factor, field, text, fix)


def _decimal_to_float(number: str, factor: Decimal | None, field: str, text: str, fix: str) -> float:
    """``number * factor`` correctly rounded to a float; exponents beyond the decimal range raise InputError."""
    try:
        if factor is None:  # a bare count: exactly as written
            return float(Decimal(number))
        with localcontext() as ctx:
            ctx.prec = 60
            return float(Decimal(number) * factor)
    except DecimalException:
        raise InputError(field, text, "is too large or too small: it must be a finite number", fix) from None
