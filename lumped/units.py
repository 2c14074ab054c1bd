"""Quantities with units at the edges of the tool: parse to SI, format back exactly.

Inside lumped every number is SI (kg, m, s, N). Units live only in files and on
screens; this module is the one place that turns ``"22 kN/m"`` into ``22000.0`` and
back.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

from lumped.errors import LumpedError

__all__ = ["Dimension", "DIMENSIONS", "QuantityError", "parse_quantity", "format_quantity"]

#: Longest quantity string read; longer text is refused before pint sees it.
MAX_QUANTITY_TEXT = 120
#: An integer literal in quantity text: not part of a name, a decimal or an exponent.
_INTEGER_LITERAL = re.compile(r"(?<![\w.])(?<![eE][+-])(\d[\d_]*)(?![\w.])")


#: One number, then optionally a unit that starts with a letter and holds no further
#: bare numbers or sums: "22 kN/m", "1.6e3 N*s/m", "9.81 m/s**2", "-40 mm". Rejects
#: what pint would read too loosely ("2 3 kg" as 6 kg, "kg" as 1 kg, "2 kg + 3 kg").
_QUANTITY_SHAPE = re.compile(
    r"[-+]?((\d[\d_]*\.?\d*|\.\d+)([eE][-+]?\d+)?|[iI]nf(inity)?|[nN]a[nN])"
    r"(\s*[A-Za-z_%°µΩ][A-Za-z0-9_%°µΩ·*/^()]*(\s*[*/·]\s*[A-Za-z_%°µΩ(][A-Za-z0-9_%°µΩ·*/^()]*)*"
    r"(\*\*-?\d+)?)?"
)


class QuantityError(LumpedError):
    """A value that is not a finite quantity of the expected kind."""


@dataclass(frozen=True)
class Dimension:
    """A kind of quantity: its SI unit (pint spelling) and the unit shown to people."""

    name: str
    si_unit: str
    display_unit: str


DIMENSIONS = {
    d.name: d
    for d in (
        Dimension("mass", "kg", "kg"),
        Dimension("length", "m", "mm"),
        Dimension("velocity", "m/s", "m/s"),
        Dimension("acceleration", "m/s**2", "m/s**2"),
        Dimension("time", "s", "s"),
        Dimension("frequency", "Hz", "Hz"),
        Dimension("force", "N", "N"),
        Dimension("stiffness", "N/m", "kN/m"),
        Dimension("damping", "N*s/m", "N*s/m"),
        Dimension("dimensionless", "", ""),
        # ISO 8608 displacement PSD G_d(n), m^2/(cycle/m) = m^3.
        Dimension("road_psd", "m**3", "m**3"),
    )
}


@lru_cache(maxsize=1)
def _registry():
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _integers_as_floats(text: str) -> str:
    """``text`` with its integer literals written as floats (``"2**1024 s"`` →
    ``"2.0**1024.0 s"``).

    pint evaluates integer literals as Python integers, so a power tower such as
    ``"9**9**9 s"`` would build an integer of hundreds of millions of digits; in
    floating point it overflows at once, and the text is refused.
    """
    return _INTEGER_LITERAL.sub(r"\1.0", text)


@lru_cache(maxsize=4096)
def _parse_text(text: str, dimension: str) -> float:
    ureg = _registry()
    try:
        quantity = ureg.Quantity(_integers_as_floats(text))
    except Exception as exc:  # pint raises many kinds on malformed text
        raise QuantityError(f"cannot read {text!r} as a quantity ({type(exc).__name__})") from None
    dim = DIMENSIONS[dimension]
    if not isinstance(quantity, ureg.Quantity):  # a bare number in a string
        quantity = ureg.Quantity(float(quantity), "")
    try:
        if dimension == "frequency" and _has_angle_unit(quantity):
            # Angular frequency: radians (or turns, degrees) per time, divided by 2π.
            value = quantity.to("radian/second").magnitude / (2.0 * math.pi)
        else:
            value = quantity.to(dim.si_unit).magnitude
    except Exception:
        raise QuantityError(
            f"{text!r} is not a {dimension} (expected units like {dim.display_unit or 'a number'})"
        ) from None
    try:
        value = float(value)
    except (OverflowError, TypeError, ValueError):
        raise QuantityError(f"{text!r} is not a finite number") from None
    if not math.isfinite(value):
        raise QuantityError(f"{text!r} is not finite")
    return value


def _has_angle_unit(quantity) -> bool:
    """True when the quantity's units contain an angle (radian, degree, turn, rpm...).

    Judged on the root units, where every angle unit, also one folded into a rate
    such as ``rpm`` (revolutions per minute), reduces to radians.
    """
    ureg = _registry()
    _, root = ureg.get_root_units(quantity.units)
    return any(name == "radian" for name, _ in ureg.Quantity(1.0, root).unit_items())


def parse_quantity(value: object, dimension: str) -> float:
    """Return ``value`` in SI units of ``dimension``.

    Parameters
    ----------
    value : int, float or str
        A number already in SI units, or a string with its unit (``"1.6 kN*s/m"``).
    dimension : str
        A key of :data:`DIMENSIONS`. Frequencies are in Hz; a value given in an
        angular unit (``"12.6 rad/s"``) is divided by 2π.

    Raises
    ------
    QuantityError
        Not a number or string, not finite, malformed, or of the wrong kind.
    """
    if isinstance(value, bool):
        raise QuantityError(f"expected a {dimension}, got a true/false value")
    if isinstance(value, int | float):
        number = float(value)
        if not math.isfinite(number):
            raise QuantityError(f"{value!r} is not finite")
        return number
    if isinstance(value, str):
        text = value.strip()
        if not text:
            raise QuantityError("empty quantity")
        if len(text) > MAX_QUANTITY_TEXT:
            raise QuantityError(f"quantity text longer than {MAX_QUANTITY_TEXT} characters")
        if not _QUANTITY_SHAPE.fullmatch(text):
            raise QuantityError(f"{text!r} is not one number followed by a unit (as \"22 kN/m\")")
        return _parse_text(text, dimension)
    raise QuantityError(f"expected a {dimension} as a number or a string with units")


def unit_of(value: object) -> str | None:
    """The unit part of a quantity string as written (``"22 kN/m"`` → ``"kN/m"``), else None."""
    if not isinstance(value, str):
        return None
    text = value.strip()
    for i, ch in enumerate(text):
        if not (ch.isdigit() or ch in "+-.eE "):
            unit = text[i:].strip()
            return unit or None
    return None


def format_quantity(si_value: float, dimension: str, unit: str | None = None) -> str | float:
    """``si_value`` written in ``unit`` when that reads back to the same float, else the SI number.

    The file writer uses this so that a saved file stays readable ("22 kN/m") and a
    round trip is exact: when the unit conversion would change the last bit, the plain
    SI number is written instead.
    """
    unit = unit if unit is not None else DIMENSIONS[dimension].display_unit
    if not unit:
        return si_value
    try:
        ureg = _registry()
        factor = ureg.Quantity(1.0, unit).to(DIMENSIONS[dimension].si_unit).magnitude
    except Exception:
        return si_value
    for magnitude in (si_value / factor, round(si_value / factor, 12)):
        number = repr(magnitude)
        number = number[:-2] if number.endswith(".0") else number  # "230 kN/m", not "230.0"
        text = f"{number} {unit}"
        try:
            if parse_quantity(text, dimension) == si_value:
                return text
        except QuantityError:
            pass
    return si_value


#: Units display() chooses from, smallest first, per dimension.
DISPLAY_LADDERS = {
    "mass": ("g", "kg", "t"),
    "length": ("mm", "m", "km"),
    "force": ("N", "kN", "MN"),
    "stiffness": ("N/m", "kN/m", "MN/m"),
    "damping": ("N*s/m", "kN*s/m", "MN*s/m"),
    "time": ("ms", "s"),
}


@lru_cache(maxsize=256)
def _factor(unit: str, dimension: str) -> float:
    """SI value of one ``unit`` of ``dimension``."""
    return float(_registry().Quantity(1.0, unit).to(DIMENSIONS[dimension].si_unit).magnitude)


def display(si_value: float, dimension: str, unit: str | None = None, digits: int = 4) -> str:
    """``si_value`` as text for people (``display(22000, "stiffness")`` → ``"22 kN/m"``).

    With no ``unit``, the largest unit of the dimension's ladder that keeps the number
    at or above 1 is used (12 000 kg → "12 t", 4e7 N/m → "40 MN/m", 0.06 m → "60 mm").
    """
    if unit is None:
        ladder = DISPLAY_LADDERS.get(dimension)
        if ladder is None:
            unit = DIMENSIONS[dimension].display_unit
        else:
            unit = ladder[0]
            for candidate in ladder[1:]:
                if abs(si_value) >= _factor(candidate, dimension):
                    unit = candidate
    if not unit:
        return f"{si_value:.{digits}g}"
    number = si_value / _factor(unit, dimension)
    return f"{number:.{digits}g} {unit.replace('**2', '²').replace('*', '·')}"
