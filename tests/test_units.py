"""Unit strings -> SI floats. Expected values are the SI definitions of the units (common practice: BIPM SI
brochure prefixes, 1 min = 60 s, 1 Hz = 1/s), written here as decimal literals, not taken from the code."""

import math

import pytest

from capacity.errors import InputError
from capacity.units import to_si


@pytest.mark.parametrize(
    "text, dimension, expected",
    [
        ("5 um", "length", 5e-6),
        ("5 µm", "length", 5e-6),  # U+00B5 micro sign
        ("5 μm", "length", 5e-6),  # U+03BC Greek mu
        ("5um", "length", 5e-6),
        ("0.5 mm", "length", 5e-4),
        ("-3 nm", "length", -3e-9),
        ("79.4 um^2/s", "diffusion", 7.94e-11),
        ("7.94e-11 m^2/s", "diffusion", 7.94e-11),
        ("2 cm^2/s", "diffusion", 2e-4),
        ("500 ms", "time", 0.5),
        ("2 min", "time", 120.0),
        ("1.5 h", "time", 5400.0),
        ("0.1 1/s", "rate", 0.1),
        ("0.1 /s", "rate", 0.1),
        ("3 Hz", "rate", 3.0),
        ("1e4", "count", 1e4),
        ("2500 molecules", "count", 2500.0),
    ],
)
def test_strings_convert_to_si(text, dimension, expected):
    # SI definitions (common practice); decimal conversion makes the result the correctly rounded float
    assert to_si(text, dimension, "f") == pytest.approx(expected, rel=0, abs=1e-24 * max(1.0, abs(expected)))


def test_exact_decimal_results():
    # the float nearest the decimal quantity written, i.e. identical to the literal (SI prefix definitions)
    assert to_si("79.4 um^2/s", "diffusion", "f") == 7.94e-11
    assert to_si("5 um", "length", "f") == 5e-6
    assert to_si("500 ms", "time", "f") == 0.5


def test_non_decimal_factor():
    # 1/min = 1/60 per second (SI definition of the minute), not a short decimal
    assert to_si("3 1/min", "rate", "f") == pytest.approx(0.05, rel=1e-15)


@pytest.mark.parametrize("value", [5, 5.0, 7e-6, -2])
def test_plain_numbers_are_si(value):
    assert to_si(value, "length", "f") == float(value)
    assert isinstance(to_si(value, "length", "f"), float)


@pytest.mark.parametrize(
    "value, dimension, problem",
    [
        ("5 s", "length", 'unit "s", which is not a length'),
        ("5 um", "time", "which is not a time"),
        ("5 um", "diffusion", "not a diffusion coefficient"),
        ("3 m", "rate", "not a rate"),
        ("5 m", "count", "a molecule count has none"),
        ("abc", "length", "not a number followed by a unit"),
        ("um", "length", "not a number followed by a unit"),
        ("5 uum", "length", "cannot be read"),
        ("5", "length", "without a unit"),
        (True, "length", "not a bool"),
        (False, "count", "not a bool"),
        ([5, 6], "length", "not a list"),
        (None, "time", "not a NoneType"),
        (math.nan, "length", "finite"),
        (math.inf, "time", "finite"),
        ("1e400 m", "length", "finite"),
        ("nan um", "length", "not a number"),
    ],
)
def test_bad_values_name_field_and_fix(value, dimension, problem):
    with pytest.raises(InputError, match=r"receiver\[1\]\.radius") as info:
        to_si(value, dimension, "receiver[1].radius")
    err = info.value
    assert problem in err.problem
    assert err.field == "receiver[1].radius"
    assert err.fix.startswith("give ")


def test_fix_text_for_length():
    with pytest.raises(InputError, match=r'give a length such as "5 um" or 5e-6 \(metres\)'):
        to_si("5 s", "length", "receiver[1].radius")


def test_unknown_dimension_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown dimension"):
        to_si(1.0, "mass", "f")
