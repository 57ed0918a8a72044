"""Unit parsing: every supported unit and every error path."""

import math

import pytest

from cablekit.units import (DIMENSIONS, UnitError, format_quantity, format_vector, parse_quantity, parse_vector,
                            to_unit, unit_factor)

# Conversion factors: BIPM, The International System of Units (SI Brochure), 9th ed., 2019
# (prefixes, rad, min); NIST SP 811 (2008) Appendix B.8 for inch (0.0254 m exactly), foot
# (0.3048 m), pound (0.45359237 kg exactly), pound-force (4.4482216152605 N), degree (pi/180 rad).
CASES = [
    ("35 mm", "length", 0.035),
    ("2.4 m", "length", 2.4),
    ("12 cm", "length", 0.12),
    ("0.125 in", "length", 0.125 * 0.0254),
    ("3 ft", "length", 3 * 0.3048),
    ("1.8 kg", "mass", 1.8),
    ("500 g", "mass", 0.5),
    ("2 lb", "mass", 2 * 0.45359237),
    ("2.2 kN", "force", 2200.0),
    ("15 N", "force", 15.0),
    ("2000 lbf", "force", 2000 * 4.4482216152605),
    ("0.6 N*m", "torque", 0.6),
    ("0.6 N·m", "torque", 0.6),
    ("600 N*mm", "torque", 0.6),
    ("3000 rpm", "angular_speed", 3000 * 2 * math.pi / 60),
    ("10 rad/s", "angular_speed", 10.0),
    ("5 deg", "angle", 5 * math.pi / 180),
    ("5°", "angle", 5 * math.pi / 180),
    ("0.1 rad", "angle", 0.1),
    ("0.5 m/s", "speed", 0.5),
    ("9.81 m/s^2", "acceleration", 9.81),
    ("9.81 m/s**2", "acceleration", 9.81),
    ("9.81 m/s²", "acceleration", 9.81),
    ("200 kHz", "frequency", 200e3),
    ("1 MHz", "frequency", 1e6),
    ("0.016 kg/m", "mass_per_length", 0.016),
    ("16 g/m", "mass_per_length", 0.016),
    ("50 kN/m", "stiffness", 50e3),
    ("100 GPa", "pressure", 100e9),
    ("8 mm^2", "area", 8e-6),
    ("0.02 kg*m^2", "inertia", 0.02),
    ("200 W", "power", 200.0),
    ("2 s", "time", 2.0),
    ("250 ms", "time", 0.25),
    ("0.85", "dimensionless", 0.85),
    ("1e-3 m", "length", 1e-3),
    ("-0.5 m", "length", -0.5),
    (".5 m", "length", 0.5),
]


@pytest.mark.parametrize("text, dim, expected", CASES)
def test_supported_units(text, dim, expected):
    assert parse_quantity(text, dim) == pytest.approx(expected, rel=1e-12)  # exact definitions: float rounding only


def test_every_dimension_has_a_case():
    assert {d for _, d, _ in CASES} == set(DIMENSIONS)


@pytest.mark.parametrize("text, dim, fragment", [
    ("35", "length", "missing unit"),
    (35, "length", "missing unit"),
    (2.5, "mass", "missing unit"),
    ("35 kg", "length", "wrong dimension"),
    ("3000 rpm", "torque", "wrong dimension"),
    ("1 N", "torque", "wrong dimension"),
    ("35 furlongz", "length", "unknown unit"),
    ("35 m; import os", "length", "unknown unit"),
    ("35 __class__", "length", "unknown unit"),
    ("abc m", "length", "does not start with a number"),
    ("", "length", "empty"),
    ("   ", "length", "empty"),
    ("1e999 m", "length", "not a finite"),
    ("nan m", "length", "does not start with a number"),
    ("inf m", "length", "does not start with a number"),
    (True, "length", "expected a quantity"),
    (None, "length", "expected a quantity"),
    ([1, 2], "length", "expected a quantity"),
    ("1" * 200 + " m", "length", "longer than"),
    ("1e308 km", "length", "overflows"),
    (float("nan"), "dimensionless", "finite"),
])
def test_error_paths(text, dim, fragment):
    with pytest.raises(UnitError) as info:
        parse_quantity(text, dim, field="cable.diameter")
    msg = str(info.value)
    assert msg.startswith("cable.diameter:")
    assert fragment in msg


def test_unknown_dimension_is_a_programming_error():
    with pytest.raises(KeyError):
        parse_quantity("1 m", "lengthh")


def test_vectors_both_spellings():
    assert parse_vector("0, 0.5, 2.4 m", "length") == (0.0, 0.5, 2.4)
    assert parse_vector("[0, 500, 2400] mm", "length") == pytest.approx((0.0, 0.5, 2.4))
    assert parse_vector(["0 m", "50 cm", "2400 mm"], "length") == pytest.approx((0.0, 0.5, 2.4))
    assert parse_vector("0, 0, -1", "dimensionless") == (0.0, 0.0, -1.0)


@pytest.mark.parametrize("value, fragment", [
    ("0, 0 m", "3 components"),
    (["1 m", "2 m"], "3 components"),
    ("0, 0, x m", "expected 3 numbers"),
    ("0, 0, 1 kg", "wrong dimension"),
    (["1 m", "2", "3 m"], "missing unit"),
    (42, "expected 3 quantities"),
])
def test_vector_errors(value, fragment):
    with pytest.raises(UnitError) as info:
        parse_vector(value, "length", field="frame.exits[0].position")
    assert fragment in str(info.value)


@pytest.mark.parametrize("value", [0.035, 2.4, 1e-9, 9876.54321, 0.1 + 0.2, math.pi])  # within limits.MAGNITUDE
@pytest.mark.parametrize("dim", ["length", "force", "angle", "angular_speed", "mass_per_length"])
def test_format_round_trips_exactly(value, dim):
    assert parse_quantity(format_quantity(value, dim), dim) == value
    assert parse_vector(format_vector((value, -value, 0.0), dim), dim) == (value, -value, 0.0)


def test_display_conversions():
    assert to_unit(0.035, "mm") == pytest.approx(35.0)
    assert to_unit(3000 * 2 * math.pi / 60, "rpm") == pytest.approx(3000.0)
    assert unit_factor("deg") == pytest.approx(math.pi / 180)
