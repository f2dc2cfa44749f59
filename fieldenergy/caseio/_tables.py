"""Typed access to one TOML table of a case file, with errors that say where and what.

A :class:`Table` wraps the parsed mapping together with the file it came from, the coil or
circuit it belongs to and the dotted key prefix, so that every :class:`CaseError` it raises
names the file, the owner and the key, the value received and the value expected.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace
from typing import Final, TypeVar

import numpy as np
from numpy.typing import NDArray

from fieldenergy.caseio._units import LENGTH, QuantityKind, UnitTextError, parse_quantity, scaled
from fieldenergy.errors import CaseError


class _Required:
    """Type of :data:`REQUIRED`."""


#: Marks a key with no default: it must be present.
REQUIRED: Final = _Required()

_D = TypeVar("_D")

#: Longest rendering of a received value in a message; longer ones are cut.
_MAX_SHOWN = 60


def show(value: object) -> str:
    """A short rendering of a value read from TOML, for error messages."""
    if isinstance(value, bool):
        text = "true (a boolean)" if value else "false (a boolean)"
    elif isinstance(value, (int, float, str)):
        text = repr(value)
    elif isinstance(value, Mapping):
        text = "a table"
    elif isinstance(value, list):
        text = f"a list of {len(value)} item(s)"
    else:
        text = f"{value!s} (a {type(value).__name__})"
    return text if len(text) <= _MAX_SHOWN else text[: _MAX_SHOWN - 3] + "..."


def named(table: Table, what: str) -> Table:
    """The table owned by ``"<what> '<name>'"`` when its ``name`` is a usable string, else unchanged."""
    name = table.data.get("name")
    if isinstance(name, str) and name.strip():
        return replace(table, owner=f"{what} {name!r}")
    return table


@dataclass(frozen=True, slots=True)
class Table:
    """One table of a case file.

    Parameters
    ----------
    data
        The parsed table.
    file
        The case file, for messages.
    owner
        What the table belongs to, for example ``"coil 'upper'"``; empty at the top level.
    prefix
        Dotted prefix of the keys, for example ``"path."``.
    unit
        Metres per plain number for lengths (set by a path table's ``unit`` key).
    unit_name
        What a plain length number is in, for messages.
    """

    data: Mapping[str, object]
    file: str
    owner: str = ""
    prefix: str = ""
    unit: float = 1.0
    unit_name: str = "metres"

    def where(self, key: str | None = None) -> str | None:
        """The owner and dotted key, for :class:`CaseError`'s ``where``."""
        parts = [self.owner] if self.owner else []
        if key is not None:
            parts.append(f"key '{self.prefix}{key}'")
        elif self.prefix:
            parts.append(f"table '{self.prefix.rstrip('.')}'")
        return ", ".join(parts) or None

    def error(self, message: str, key: str | None = None) -> CaseError:
        """A :class:`CaseError` at ``key`` of this table."""
        return CaseError(message, path=self.file, where=self.where(key))

    def check_keys(self, allowed: Iterable[str]) -> None:
        """Refuse keys not in ``allowed``, suggesting the closest allowed key."""
        known = sorted(allowed)
        for key in self.data:
            if key not in known:
                close = difflib.get_close_matches(key, known, n=1)
                guess = f"did you mean '{close[0]}'? " if close else ""
                raise self.error(f"unknown key; {guess}allowed keys: {', '.join(known)}", key)

    def bounded(
        self,
        key: str,
        value: float,
        unit: str,
        above: float | None = None,
        at_least: float | None = None,
        below: float | None = None,
    ) -> float:
        """Return ``value`` if ``above < value``, ``at_least <= value`` and ``value < below`` hold."""
        bounds = []
        if above is not None:
            bounds.append(f"> {above:g}")
        if at_least is not None:
            bounds.append(f">= {at_least:g}")
        if below is not None:
            bounds.append(f"< {below:.17g}")
        ok = (above is None or value > above) and (at_least is None or value >= at_least)
        if ok and (below is None or value < below):
            return value
        received = self.data.get(key)
        origin = f" (from {show(received)})" if isinstance(received, str) else ""
        suffix = f" {unit}" if unit else ""
        raise self.error(f"must be {' and '.join(bounds)}{suffix}, got {value:.17g}{suffix}{origin}", key)

    def raw(self, key: str, expected: str) -> object:
        """The value at ``key``; a missing key is an error naming what was ``expected``."""
        if key not in self.data:
            raise self.error(f"missing required key: expected {expected}", key)
        return self.data[key]

    def sub(self, key: str, owner: str | None = None) -> Table:
        """The nested table at ``key``."""
        value = self.raw(key, "a table")
        if not isinstance(value, Mapping):
            raise self.error(f"expected a table {{ ... }}, got {show(value)}", key)
        return replace(self, data=value, owner=self.owner if owner is None else owner, prefix=f"{self.prefix}{key}.")

    def items(self, key: str) -> list[Table]:
        """The tables of the list at ``key`` (an array of tables)."""
        value = self.raw(key, "a list of tables")
        if not isinstance(value, list):
            raise self.error(f"expected a list of tables [ {{ ... }}, ... ], got {show(value)}", key)
        tables = []
        for k, item in enumerate(value):
            if not isinstance(item, Mapping):
                raise self.error(f"expected a table {{ ... }}, got {show(item)}", f"{key}[{k}]")
            tables.append(replace(self, data=item, prefix=f"{self.prefix}{key}[{k}]."))
        return tables

    def text(self, key: str, default: _D | _Required = REQUIRED) -> str | _D:
        """A non-empty string."""
        if not isinstance(default, _Required) and key not in self.data:
            return default
        value = self.raw(key, "a string")
        if not isinstance(value, str) or not value.strip():
            raise self.error(f"expected a non-empty string, got {show(value)}", key)
        return value

    def boolean(self, key: str, default: bool) -> bool:
        """``true`` or ``false``."""
        value = self.data.get(key, default)
        if not isinstance(value, bool):
            raise self.error(f"expected true or false, got {show(value)}", key)
        return value

    def number(self, key: str, default: _D | _Required = REQUIRED, expected: str = "a plain number") -> float | _D:
        """A finite plain number (int or float, not a boolean)."""
        if not isinstance(default, _Required) and key not in self.data:
            return default
        return self._finite(self.raw(key, expected), key, expected)

    def integer(self, key: str, minimum: int) -> int:
        """An integer >= ``minimum``."""
        value = self.raw(key, f"an integer >= {minimum}")
        if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
            raise self.error(f"expected an integer >= {minimum}, got {show(value)}", key)
        return value

    def quantity(self, key: str, kind: QuantityKind, default: _D | _Required = REQUIRED) -> float | _D:
        """A quantity: a plain number in SI (or in this table's length unit) or a string with a unit."""
        if not isinstance(default, _Required) and key not in self.data:
            return default
        return self._quantity(self.raw(key, self._hint(kind)), kind, key)

    def vector(
        self, key: str, kind: QuantityKind | None, default: _D | _Required = REQUIRED
    ) -> NDArray[np.float64] | _D:
        """Three components: quantities of ``kind``, or plain numbers for a direction (``kind=None``)."""
        if not isinstance(default, _Required) and key not in self.data:
            return default
        expected = "a direction [x, y, z] of 3 plain numbers" if kind is None else f"[x, y, z], each {self._hint(kind)}"
        value = self.raw(key, expected)
        return self._vector(value, kind, key, expected)

    def direction(self, key: str, default: _D | _Required = REQUIRED) -> NDArray[np.float64] | _D:
        """A nonzero direction of 3 plain numbers."""
        if not isinstance(default, _Required) and key not in self.data:
            return default
        vec = self.vector(key, None)
        if not float(np.max(np.abs(vec))) > 0.0:
            raise self.error(f"expected a nonzero direction, got {vec.tolist()}", key)
        return vec

    def points(self, key: str, minimum: int) -> NDArray[np.float64]:
        """A list of at least ``minimum`` points [x, y, z] of lengths."""
        expected = f"a list of at least {minimum} points [x, y, z]"
        value = self.raw(key, expected)
        if not isinstance(value, list) or len(value) < minimum:
            raise self.error(f"expected {expected}, got {show(value)}", key)
        rows = [self._vector(item, LENGTH, f"{key}[{k}]", "a point [x, y, z]") for k, item in enumerate(value)]
        return np.array(rows, dtype=np.float64)

    def _hint(self, kind: QuantityKind) -> str:
        plain = self.unit_name if kind is LENGTH else kind.plain
        return f"{kind.hint} or a plain number in {plain}"

    def _vector(self, value: object, kind: QuantityKind | None, key: str, expected: str) -> NDArray[np.float64]:
        if not isinstance(value, list) or len(value) != 3:
            raise self.error(f"expected {expected}, got {show(value)}", key)
        if kind is None:
            comps = [self._finite(item, f"{key}[{k}]", "a plain number") for k, item in enumerate(value)]
        else:
            comps = [self._quantity(item, kind, f"{key}[{k}]") for k, item in enumerate(value)]
        return np.array(comps, dtype=np.float64)

    def _quantity(self, value: object, kind: QuantityKind, key: str) -> float:
        if isinstance(value, str):
            try:
                return parse_quantity(value, kind)
            except UnitTextError as exc:
                raise self.error(str(exc), key) from None
        number = self._finite(value, key, self._hint(kind))
        result = scaled(number, self.unit) if kind is LENGTH else number
        if not math.isfinite(result):
            raise self.error(f"expected {self._hint(kind)}, got {show(value)}, which is out of range", key)
        return result

    def _finite(self, value: object, key: str, expected: str) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(f"expected {expected}, got {show(value)}", key)
        try:
            number = float(value)
        except OverflowError:
            raise self.error(f"expected {expected}, got {show(value)}, which is out of range", key) from None
        if not math.isfinite(number):
            raise self.error(f"expected {expected}, got {show(value)}, which is not finite", key)
        return number
