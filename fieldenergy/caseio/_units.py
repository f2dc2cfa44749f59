"""Quantities with units, as a case file writes them ("18 mm", "3.5 kA", "30 deg").

A unit string is checked against a small grammar before the units library sees it (a number,
then unit names joined by ``*`` or ``/`` with small integer powers), so that no string can make
the parser do unbounded work. The registry is created on first use, not at import.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, TypeVar

import numpy as np
from numpy.typing import NDArray

_Scalable = TypeVar("_Scalable", float, NDArray[np.float64])


class UnitTextError(ValueError):
    """A quantity string cannot be read; the message says why and what was expected."""


@dataclass(frozen=True, slots=True)
class QuantityKind:
    """A kind of physical quantity a case file key holds.

    Parameters
    ----------
    name
        The kind, for example ``"length"``.
    si_unit
        The SI unit values are converted to, as the units library spells it.
    example
        A typical value with a unit, used in hints.
    plain
        What a plain number means, for example ``"metres"``.
    """

    name: str
    si_unit: str
    example: str
    plain: str

    @property
    def hint(self) -> str:
        """The expected value, for error messages: ``"a length such as '18 mm'"``."""
        article = "an" if self.name[0] in "aeiou" else "a"
        return f"{article} {self.name} such as {self.example!r}"


LENGTH = QuantityKind("length", "m", "18 mm", "metres")
ANGLE = QuantityKind("angle", "rad", "30 deg", "radians")
CURRENT = QuantityKind("current", "A", "12.5 A", "amperes")
RESISTANCE = QuantityKind("resistance", "ohm", "2.2 mOhm", "ohms")

#: Longest quantity string accepted (characters); real ones are a dozen characters long.
MAX_QUANTITY_LENGTH: int = 100

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?"
_NAME = r"(?:[^\W\d]|°)(?:\w|°)*"
_FACTOR = rf"{_NAME}(?:\s*(?:\^|\*\*)\s*[+-]?\d{{1,2}})?"
_UNIT = rf"{_FACTOR}(?:\s*[*/]\s*{_FACTOR})*"
_QUANTITY_RE = re.compile(rf"\s*(?P<number>{_NUMBER})\s*(?P<unit>{_UNIT})?\s*")
_UNIT_RE = re.compile(rf"\s*(?P<unit>{_UNIT})\s*")


@lru_cache(maxsize=1)
def _registry() -> Any:
    """The one unit registry, created on first use (creating it takes about half a second)."""
    import pint

    registry: Any = pint.UnitRegistry()
    # Engineers write "mOhm" and "kOhm"; the registry only knows the lower-case name.
    registry.define("@alias ohm = Ohm")
    return registry


def parse_quantity(text: str, kind: QuantityKind) -> float:
    """Convert a quantity string such as ``"18 mm"`` to a float in SI units.

    Parameters
    ----------
    text
        A number followed by a unit.
    kind
        The kind of quantity expected; its dimension is checked.

    Returns
    -------
    The value in ``kind.si_unit``.

    Raises
    ------
    UnitTextError
        If the string is malformed, has no unit, has a unit of another dimension, or the value
        is not finite.

    Examples
    --------
    >>> parse_quantity("18 mm", LENGTH)
    0.018
    """
    if len(text) > MAX_QUANTITY_LENGTH:
        raise UnitTextError(f"expected {kind.hint}, got a string of {len(text)} characters")
    match = _QUANTITY_RE.fullmatch(text)
    if match is None:
        raise UnitTextError(f"expected {kind.hint}, got {text!r}, which is not a number followed by a unit")
    if match["unit"] is None:
        raise UnitTextError(
            f"expected {kind.hint}, got {text!r} with no unit; write a plain number for {kind.plain} or add a unit"
        )
    value = scaled(float(match["number"]), _factor(match["unit"], kind, text))
    if not math.isfinite(value):
        raise UnitTextError(f"expected {kind.hint}, got {text!r}, which is out of range")
    return value


def parse_unit(text: str, kind: QuantityKind) -> float:
    """Return the size of unit ``text`` (no number) in SI units, for example 0.001 for ``"mm"``.

    Parameters
    ----------
    text
        A unit name or product of unit names.
    kind
        The kind of quantity the unit must measure.

    Returns
    -------
    The factor converting a number in that unit to ``kind.si_unit``; positive and finite.

    Raises
    ------
    UnitTextError
        If the string is not a unit of the expected dimension.

    Examples
    --------
    >>> parse_unit("cm", LENGTH)
    0.01
    """
    unit_hint = f"{kind.hint.split(' such as ')[0]} unit such as {kind.example.split()[-1]!r}"
    if len(text) > MAX_QUANTITY_LENGTH:
        raise UnitTextError(f"expected {unit_hint}, got a string of {len(text)} characters")
    match = _UNIT_RE.fullmatch(text)
    if match is None:
        raise UnitTextError(f"expected {unit_hint}, got {text!r}")
    factor = _factor(match["unit"], kind, text)
    if not (math.isfinite(factor) and factor > 0.0):
        raise UnitTextError(f"expected {unit_hint}, got {text!r}, whose size is {factor!r} {kind.si_unit}")
    return factor


def scaled(value: _Scalable, factor: float) -> _Scalable:
    """Return ``value * factor``, dividing instead when ``factor`` is 1/integer (as for "mm").

    Dividing by 1000 rounds "18 mm" to the float nearest 0.018, where multiplying by the
    inexact 0.001 can land one unit in the last place away.

    Examples
    --------
    >>> scaled(18.0, 0.001)
    0.018
    """
    if 0.0 < factor < 1.0:
        divisor = round(1.0 / factor)
        if abs(divisor * factor - 1.0) <= _RECIPROCAL_RTOL:
            return value / divisor
    return value * factor


#: How close ``1/factor`` must be to an integer for :func:`scaled` to divide by it; the
#: decimal prefixes come out of the units library within a few units in the last place.
_RECIPROCAL_RTOL: float = 1.0e-12


def _factor(unit: str, kind: QuantityKind, text: str) -> float:
    """Size of ``unit`` in ``kind.si_unit``; every failure of the units library becomes UnitTextError."""
    registry = _registry()
    try:
        parsed = registry.parse_units(unit)
    except Exception:  # the units library raises many types, including plain Python ones
        raise UnitTextError(f"expected {kind.hint}, got {text!r}: unknown unit {unit!r}") from None
    try:
        factor = float(registry.Quantity(1.0, parsed).to(kind.si_unit).magnitude)
    except Exception:  # wrong dimension, offset units (degC) ...
        raise UnitTextError(
            f"expected {kind.hint}, got {text!r}: {unit!r} is not a unit of {kind.name} "
            f"(its dimension is {_dimension(parsed)})"
        ) from None
    return factor


def _dimension(parsed: Any) -> str:
    """The dimension of a parsed unit as text, such as ``"[current]"``."""
    try:
        return str(parsed.dimensionality) or "none"
    except Exception:  # the units library may fail on exotic definitions; the message still stands
        return "unknown"
