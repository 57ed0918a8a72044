"""Quantities with units at the edges, SI floats inside.

Design files, widgets and the review sheet write quantities as text (``"35 mm"``,
``"0.6 N*m"``, ``"3000 rpm"``).  :func:`parse_quantity` turns such a text into an SI float
after checking its dimension; :func:`format_quantity` writes an SI float back as text that
parses to exactly the same float.

Text is parsed by pint's own tokenizer, never by Python's ``eval``.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

__all__ = [
    "DIMENSIONS",
    "UnitError",
    "parse_quantity",
    "parse_vector",
    "format_quantity",
    "format_vector",
    "to_unit",
    "unit_factor",
    "unit_text_problem",
]

# One spelling per dimension: the SI unit we write back, and the pint dimensionality.
# name -> (SI unit text used when saving, pint dimensionality string)
DIMENSIONS: dict[str, tuple[str, str]] = {
    "length": ("m", "[length]"),
    "mass": ("kg", "[mass]"),
    "force": ("N", "[mass] * [length] / [time] ** 2"),
    "torque": ("N*m", "[mass] * [length] ** 2 / [time] ** 2"),
    "angle": ("rad", ""),
    "angular_speed": ("rad/s", "1 / [time]"),
    "speed": ("m/s", "[length] / [time]"),
    "acceleration": ("m/s**2", "[length] / [time] ** 2"),
    "time": ("s", "[time]"),
    "frequency": ("Hz", "1 / [time]"),
    "mass_per_length": ("kg/m", "[mass] / [length]"),
    "stiffness": ("N/m", "[mass] / [time] ** 2"),
    "pressure": ("Pa", "[mass] / [length] / [time] ** 2"),
    "area": ("m**2", "[length] ** 2"),
    "inertia": ("kg*m**2", "[mass] * [length] ** 2"),
    "power": ("W", "[mass] * [length] ** 2 / [time] ** 3"),
    "dimensionless": ("", ""),
}

_MAX_TEXT = 120
# ASCII digits only: Python's \d and float() also take Arabic-Indic or full-width digits
_NUMBER = r"[-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
_VECTOR_TEXT = re.compile(rf"^\s*\[?\s*((?:{_NUMBER}\s*,\s*)+{_NUMBER})\s*\]?\s*(.*?)\s*$")


class UnitError(ValueError):
    """A quantity text that cannot be turned into the expected SI float."""


@lru_cache(maxsize=1)
def _registry():
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def _pint_dimensionality(dimension: str):
    ureg = _registry()
    unit = DIMENSIONS[dimension][0]
    return ureg.Quantity(1.0, unit or "dimensionless").dimensionality


def _clean(text: str) -> str:
    return text.replace("·", "*").replace("⋅", "*").replace("²", "**2").replace("³", "**3").replace("°", " deg").replace("µ", "u").strip()


def parse_quantity(text, dimension: str, *, field: str = "value") -> float:
    """Parse ``"35 mm"``-style text into an SI float of the given dimension.

    Parameters
    ----------
    text : str
        A number followed by a unit, e.g. ``"2.4 m"``, ``"0.6 N*m"``, ``"3000 rpm"``.
        A bare number is accepted only for ``dimension="dimensionless"``.
    dimension : str
        A key of :data:`DIMENSIONS`.
    field : str
        Name used in error messages (the field path in a design file).

    Returns
    -------
    float
        The value in the SI unit of ``DIMENSIONS[dimension]`` (rad for angles, rad/s for
        ``rpm``).

    Raises
    ------
    UnitError
        Missing unit, unknown unit, wrong dimension, not a number, or not finite.
    """
    if dimension not in DIMENSIONS:
        raise KeyError(f"unknown dimension {dimension!r}")
    if isinstance(text, bool):
        raise UnitError(f"{field}: expected a quantity text such as '{_example(dimension)}', got {text!r}")
    if isinstance(text, (int, float)):
        if dimension == "dimensionless":
            value = float(text)
            if not math.isfinite(value):
                raise UnitError(f"{field}: expected a finite number, got {text!r}")
            return value
        raise UnitError(f"{field}: missing unit in {text!r}; write it as text with a unit, e.g. '{_example(dimension)}'")
    if not isinstance(text, str):
        raise UnitError(f"{field}: expected a quantity text such as '{_example(dimension)}', got {type(text).__name__} {text!r}")
    if len(text) > _MAX_TEXT:
        raise UnitError(f"{field}: quantity text longer than {_MAX_TEXT} characters")
    cleaned = _clean(text)
    _refuse_foreign_digits(text, field)
    if not cleaned:
        raise UnitError(f"{field}: empty quantity; expected e.g. '{_example(dimension)}'")
    match = re.match(rf"^\s*({_NUMBER})\s*(.*)$", cleaned)
    if match is None:
        raise UnitError(f"{field}: {text!r} does not start with a number; expected e.g. '{_example(dimension)}'")
    number_text, unit_text = match.group(1), match.group(2).strip()
    try:
        number = float(number_text)
    except ValueError:  # pragma: no cover - the regex only admits floats
        raise UnitError(f"{field}: bad number in {text!r}") from None
    if not math.isfinite(number):
        raise UnitError(f"{field}: {text!r} is not a finite number")
    if not unit_text:
        if dimension == "dimensionless":
            return _in_range(number, dimension, field, text)
        raise UnitError(f"{field}: missing unit in {text!r}; expected e.g. '{_example(dimension)}'")
    if dimension == "dimensionless":
        raise UnitError(f"{field}: {text!r} takes no unit; write a plain number such as '{_example(dimension)}'")
    problem = unit_text_problem(unit_text)
    if problem is not None:
        raise UnitError(f"{field}: {problem} in {text!r}")
    factor, problem = _unit_factor_for(unit_text, dimension)
    if problem is not None:
        raise UnitError(f"{field}: " + problem.replace("{text}", repr(text)))
    value = number * factor
    if not math.isfinite(value):
        raise UnitError(f"{field}: {text!r} overflows to a non-finite value")
    return _in_range(value, dimension, field, text)


def _in_range(value: float, dimension: str, field: str, text) -> float:
    """``value`` if its size is within the largest of :data:`cablekit.limits.MAGNITUDE`.

    (The smallest applies to sizes only, see ``design._Collector.quantity``: a coordinate such
    as 2e-16 m is float noise around zero, not a slip.)
    """
    from .limits import MAGNITUDE

    high = MAGNITUDE[dimension][1]
    if abs(value) > high:
        si = DIMENSIONS[dimension][0]
        raise UnitError(f"{field}: {text!r} is larger than any {dimension.replace('_', ' ')} cablekit accepts "
                        f"({high:g}{(' ' + si) if si else ''} in size, cablekit.limits.MAGNITUDE; a unit slip?)")
    return value


def _refuse_foreign_digits(text: str, field: str) -> None:
    import unicodedata

    for ch in text:
        if not ch.isascii() and unicodedata.category(ch) == "Nd":
            raise UnitError(f"{field}: {text!r} contains the digit {ch!r} ({unicodedata.name(ch, 'non-ASCII')}); "
                            "write numbers with the digits 0-9")


_UNIT_TOKEN = re.compile(r"\s*(?:([A-Za-z_][A-Za-z_0-9]*)|([0-9]+(?:\.[0-9]*)?)|(\*\*|\^|\*|/|\(|\)|-))", re.ASCII)


def unit_text_problem(unit_text: str) -> str | None:
    """Why a unit text is refused before pint sees it, or ``None`` when it may be parsed.

    Only names, ``*``, ``/``, parentheses and powers by a small whole number are accepted, within
    the size limits of :mod:`cablekit.limits` (pint evaluates ``m**9**9**9`` exactly, which takes
    minutes).
    """
    from .limits import MAX_UNIT_DEPTH, MAX_UNIT_EXPONENT, MAX_UNIT_TEXT, MAX_UNIT_TOKENS

    if len(unit_text) > MAX_UNIT_TEXT:
        return f"unit text longer than {MAX_UNIT_TEXT} characters"
    if "__" in unit_text:
        return f"unknown unit {unit_text!r}"
    tokens: list[tuple[str, str]] = []
    pos, end = 0, len(unit_text.rstrip())
    while pos < end:
        m = _UNIT_TOKEN.match(unit_text, pos)
        if m is None or m.end() == pos:
            return f"unknown unit {unit_text!r}"
        kind = "name" if m.group(1) else "number" if m.group(2) else m.group(3)
        tokens.append((kind, m.group(m.lastindex)))
        pos = m.end()
    if len(tokens) > MAX_UNIT_TOKENS:
        return f"unit {unit_text!r} has more than {MAX_UNIT_TOKENS} parts"
    depth = 0
    powered = [False]  # per open group: does it contain a power already?
    k = 0
    while k < len(tokens):
        kind, tok = tokens[k]
        if kind == "(":
            depth += 1
            if depth > MAX_UNIT_DEPTH:
                return f"unit {unit_text!r} nests parentheses deeper than {MAX_UNIT_DEPTH}"
            powered.append(False)
        elif kind == ")":
            if depth == 0:
                return f"unbalanced parentheses in unit {unit_text!r}"
            depth -= 1
            inner = powered.pop()
            if k + 1 < len(tokens) and tokens[k + 1][0] in ("**", "^") and inner:
                return f"unit {unit_text!r} raises a power to a power; write one exponent per unit"
        elif kind in ("**", "^"):
            if k == 0 or tokens[k - 1][0] not in ("name", ")"):
                return f"misplaced power in unit {unit_text!r}"
            k += 1
            if k < len(tokens) and tokens[k][0] == "-":
                k += 1
            if k >= len(tokens) or tokens[k][0] != "number" or "." in tokens[k][1]:
                return f"unit {unit_text!r}: an exponent must be a whole number such as 2"
            if k + 1 < len(tokens) and tokens[k + 1][0] in ("**", "^"):
                return f"unit {unit_text!r} chains exponents; write one exponent per unit"
            if int(tokens[k][1]) > MAX_UNIT_EXPONENT:
                return f"unit {unit_text!r}: exponent {tokens[k][1]} is larger than {MAX_UNIT_EXPONENT}"
            powered[-1] = True
        elif kind == "-":
            return f"unknown unit {unit_text!r} ('-' only as the sign of an exponent)"
        k += 1
    if depth:
        return f"unbalanced parentheses in unit {unit_text!r}"
    return None


@lru_cache(maxsize=1024)
def _unit_factor_for(unit_text: str, dimension: str) -> tuple[float, str | None]:
    """(SI factor, None) for a unit of the right dimension, else (nan, problem text)."""
    ureg = _registry()
    try:
        unit = ureg.parse_units(unit_text.replace("^", "**"))
    except Exception as exc:  # pint raises many kinds; all mean "not a unit we know"
        return math.nan, f"unknown unit {unit_text!r} in {{text}} ({type(exc).__name__})"
    quantity = ureg.Quantity(1.0, unit)
    want = _pint_dimensionality(dimension)
    # pint counts radians as dimensionless, so "5 deg" would pass as a ratio and "50 Hz" as a
    # rotational speed; the power of radian tells angles and turns from plain ratios and rates
    turns = dict(quantity.to_base_units()._units).get("radian", 0)
    want_turns = 1 if dimension in ("angle", "angular_speed") else 0
    if quantity.dimensionality != want or turns != want_turns:
        got = str(quantity.dimensionality) if quantity.dimensionality else "dimensionless"
        if turns != want_turns:
            got = f"{got} ({'an angle or turns' if turns else 'no angle'}, unit {unit_text!r})"
        return math.nan, (f"{{text}} has the wrong dimension: expected {dimension.replace('_', ' ')} "
                          f"(e.g. '{_example(dimension)}'), got {got}")
    si = DIMENSIONS[dimension][0] or "dimensionless"
    return float(quantity.to(si).magnitude), None


def parse_vector(value, dimension: str, *, length: int = 3, field: str = "value") -> tuple[float, ...]:
    """Parse a vector quantity.

    Two spellings are accepted: a list of quantity texts (``["1.2 m", "0.7 m", "2.4 m"]``) or
    one text with comma-separated numbers and a single unit (``"1.2, 0.7, 2.4 m"``).
    """
    if isinstance(value, str):
        match = _VECTOR_TEXT.match(_clean(value))
        if match is None:
            raise UnitError(f"{field}: expected {length} numbers and a unit such as '{_vector_example(dimension, length)}', got {value!r}")
        numbers = [s.strip() for s in match.group(1).split(",")]
        unit = match.group(2)
        if "," in unit:
            raise UnitError(f"{field}: expected {length} numbers and a unit such as '{_vector_example(dimension, length)}', got {value!r}")
        items = [f"{n} {unit}".strip() for n in numbers]
    elif isinstance(value, (list, tuple)):
        items = list(value)
    else:
        raise UnitError(f"{field}: expected {length} quantities such as '{_vector_example(dimension, length)}', got {type(value).__name__} {value!r}")
    if len(items) != length:
        raise UnitError(f"{field}: expected {length} components, got {len(items)} in {value!r}")
    return tuple(parse_quantity(item, dimension, field=f"{field}[{k}]") for k, item in enumerate(items))


def format_quantity(value: float, dimension: str) -> str:
    """Write an SI float as text that :func:`parse_quantity` reads back to the same float."""
    unit = DIMENSIONS[dimension][0]
    text = repr(float(value))
    return f"{text} {unit}".strip() if unit else text


def format_vector(values, dimension: str) -> str:
    unit = DIMENSIONS[dimension][0]
    body = ", ".join(repr(float(v)) for v in values)
    return f"{body} {unit}".strip()


def to_unit(value, unit: str):
    """Convert SI float(s) to a display unit, e.g. ``to_unit(0.035, "mm") == 35.0``."""
    return value / unit_factor(unit)


@lru_cache(maxsize=64)
def unit_factor(unit: str) -> float:
    """SI value of one ``unit`` (``unit_factor("mm") == 0.001``, ``unit_factor("rpm")`` in rad/s)."""
    ureg = _registry()
    text = _clean(unit)
    problem = unit_text_problem(text)
    if problem is not None:
        raise UnitError(problem)
    return float(ureg.Quantity(1.0, ureg.parse_units(text.replace("^", "**"))).to_base_units().magnitude)


_EXAMPLES = {
    "length": "35 mm",
    "mass": "1.8 kg",
    "force": "2.2 kN",
    "torque": "0.6 N*m",
    "angle": "5 deg",
    "angular_speed": "3000 rpm",
    "speed": "0.5 m/s",
    "acceleration": "9.81 m/s^2",
    "time": "2 s",
    "frequency": "200 kHz",
    "mass_per_length": "0.06 kg/m",
    "stiffness": "50 kN/m",
    "pressure": "100 GPa",
    "area": "8 mm^2",
    "inertia": "0.02 kg*m^2",
    "power": "200 W",
    "dimensionless": "0.9",
}


def _example(dimension: str) -> str:
    return _EXAMPLES.get(dimension, "1")


def _vector_example(dimension: str, length: int) -> str:
    ex = _example(dimension)
    num, _, unit = ex.partition(" ")
    return ", ".join(["0"] * (length - 1) + [num]) + (f" {unit}" if unit else "")
