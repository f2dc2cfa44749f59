"""The ``[[sweep]]`` tables of a case document, read and checked into :class:`Sweep` records."""

from __future__ import annotations

import copy
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fieldenergy.caseio._tables import show
from fieldenergy.caseio._units import _QUANTITY_RE, ANGLE, CURRENT, LENGTH, RESISTANCE, UnitTextError, parse_quantity
from fieldenergy.errors import CaseError
from fieldenergy.sweep._address import AddressError, assign

#: Most variants one case may expand to; guards against a count typed with extra zeros.
MAX_VARIANTS: int = 1000

#: Quantity kinds a swept string may hold, tried in this order.
_KINDS = (LENGTH, ANGLE, CURRENT, RESISTANCE)

_SWEEP_KEYS = {"name", "key", "values", "start", "stop", "count"}
_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_-]*")


@dataclass(frozen=True, slots=True)
class SweepValue:
    """One value of a sweep.

    Attributes
    ----------
    raw
        What is written into the case document (a number, or a string with a unit).
    label
        The value as shown in variant names, such as ``"20 mm"``.
    si
        The value in SI units (a quantity string converted; a plain number as written).
    """

    raw: float | str
    label: str
    si: float


@dataclass(frozen=True, slots=True)
class Sweep:
    """One ``[[sweep]]`` table: a named address in the case document and its values.

    ``unit`` is the SI unit of quantity-string values (``"m"``, ``"rad"``, ``"A"``, ``"ohm"``),
    empty for plain numbers.
    """

    name: str
    key: str
    values: tuple[SweepValue, ...]
    unit: str

    @property
    def axis_label(self) -> str:
        """Axis label for plots of results against this sweep."""
        return f"{self.name} ({self.unit})" if self.unit else f"{self.name} (as written in the case file)"



def read_sweeps(document: Mapping[str, object], file: str | Path) -> tuple[Sweep, ...]:
    """The sweeps a case document declares, checked (an empty tuple when there are none).

    Parameters
    ----------
    document
        The parsed case document (see :func:`fieldenergy.caseio.read_case_toml`).
    file
        The case file, named in messages.

    Raises
    ------
    CaseError
        Naming the file, the sweep and the key, for any malformed ``[[sweep]]`` table.

    Examples
    --------
    >>> doc = {"sweep": [{"name": "r", "key": "coil.a.path.radius", "start": "10 mm", "stop": "30 mm", "count": 3}],
    ...        "coil": [{"name": "a", "path": {"radius": 0.01}}]}
    >>> [v.label for v in read_sweeps(doc, "case.toml")[0].values]
    ['10 mm', '20 mm', '30 mm']
    """
    file = str(file)
    if "sweep" not in document:
        return ()
    tables = document["sweep"]
    if not isinstance(tables, list) or not tables or not all(isinstance(t, Mapping) for t in tables):
        raise CaseError(f"expected one or more [[sweep]] tables, got {show(tables)}", path=file, where="key 'sweep'")
    sweeps: list[Sweep] = []
    for k, table in enumerate(tables, start=1):
        sweep = _sweep(table, document, file, k)
        if any(s.name == sweep.name for s in sweeps):
            raise CaseError(
                f"duplicate sweep name {sweep.name!r}; names must be unique", path=file, where=f"sweep #{k}"
            )
        sweeps.append(sweep)
    n_variants = math.prod(len(s.values) for s in sweeps)
    if n_variants > MAX_VARIANTS:
        raise CaseError(f"the sweeps give {n_variants} variants, more than the {MAX_VARIANTS} allowed", path=file,
                        where="key 'sweep'")
    return tuple(sweeps)


def _sweep(table: Mapping[str, object], document: Mapping[str, object], file: str, k: int) -> Sweep:
    where = f"sweep #{k}"
    unknown = sorted(set(table) - _SWEEP_KEYS)
    if unknown:
        raise CaseError(f"unknown key; allowed keys: {', '.join(sorted(_SWEEP_KEYS))}", path=file,
                        where=f"{where}, key '{unknown[0]}'")
    name = table.get("name")
    if not isinstance(name, str) or not _NAME_RE.fullmatch(name):
        raise CaseError(f"expected a name of letters, digits, '_' and '-' starting with a letter, got {show(name)}",
                        path=file, where=f"{where}, key 'name'")
    where = f"sweep {name!r}"
    key = table.get("key")
    if not isinstance(key, str) or not key:
        raise CaseError(f"expected a dotted key such as 'coil.upper.path.radius', got {show(key)}", path=file,
                        where=f"{where}, key 'key'")
    try:
        assign(copy.deepcopy(dict(document)), key, 0.0)
    except AddressError as exc:
        raise CaseError(f"{key!r}: {exc}", path=file, where=f"{where}, key 'key'") from None
    values = _values(table, file, where)
    units = {unit for _, unit in values}
    if len(units) > 1:
        raise CaseError(f"the values mix units of {' and '.join(sorted(u or 'plain numbers' for u in units))}; "
                        "give them all in one kind", path=file, where=f"{where}, key 'values'")
    seen = [v.si for v, _ in values]
    if len(set(seen)) != len(seen):
        raise CaseError("a value is given twice; every value of a sweep must differ", path=file,
                        where=f"{where}, key 'values'")
    return Sweep(name=name, key=key, values=tuple(v for v, _ in values), unit=units.pop())


def _values(table: Mapping[str, object], file: str, where: str) -> list[tuple[SweepValue, str]]:
    has_list = "values" in table
    has_range = any(k in table for k in ("start", "stop", "count"))
    if has_list == has_range:
        raise CaseError("give either 'values' = [...] or 'start', 'stop' and 'count'", path=file, where=where)
    if has_list:
        items = table["values"]
        if not isinstance(items, list) or not items:
            raise CaseError(f"expected a non-empty list of numbers or quantities, got {show(items)}", path=file,
                            where=f"{where}, key 'values'")
        return [_value(item, file, f"{where}, key 'values[{k}]'") for k, item in enumerate(items)]
    return _range(table, file, where)


def _range(table: Mapping[str, object], file: str, where: str) -> list[tuple[SweepValue, str]]:
    for key in ("start", "stop", "count"):
        if key not in table:
            raise CaseError("missing required key: a range needs 'start', 'stop' and 'count'", path=file,
                            where=f"{where}, key '{key}'")
    count = table["count"]
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= MAX_VARIANTS:
        raise CaseError(f"expected an integer from 1 to {MAX_VARIANTS}, got {show(count)}", path=file,
                        where=f"{where}, key 'count'")
    start, start_unit = _value(table["start"], file, f"{where}, key 'start'")
    stop, stop_unit = _value(table["stop"], file, f"{where}, key 'stop'")
    if start_unit != stop_unit:
        raise CaseError(f"'start' and 'stop' must be of one kind, got {start.label!r} and {stop.label!r}",
                        path=file, where=f"{where}, key 'stop'")
    if not isinstance(start.raw, str):
        steps = [float(f"{x:.12g}") for x in np.linspace(start.si, stop.si, count)]
        if isinstance(start.raw, int) and isinstance(stop.raw, int) and all(x.is_integer() for x in steps):
            return [_value(int(x), file, where) for x in steps]
        return [_value(x, file, where) for x in steps]
    match = _QUANTITY_RE.fullmatch(start.raw)
    unit = match["unit"] if match else start_unit
    size = start.si / float(match["number"]) if match and float(match["number"]) != 0.0 else _unit_size(unit)
    lo, hi = start.si / size, stop.si / size
    return [_value(f"{x:.12g} {unit}", file, where) for x in np.linspace(lo, hi, count)]


def _unit_size(unit: str) -> float:
    """SI size of one ``unit`` (its kind found as for values)."""
    return _quantity(f"1 {unit}")[0]


def _value(item: object, file: str, where: str) -> tuple[SweepValue, str]:
    """A sweep value and its SI unit ('' for a plain number)."""
    if isinstance(item, bool) or not isinstance(item, (int, float, str)):
        raise CaseError(f"expected a number or a quantity such as '20 mm', got {show(item)}", path=file, where=where)
    if isinstance(item, str):
        try:
            si, unit = _quantity(item)
        except UnitTextError as exc:
            raise CaseError(str(exc), path=file, where=where) from None
        return SweepValue(raw=item, label=item.strip(), si=si), unit
    if not math.isfinite(item):
        raise CaseError(f"expected a finite number, got {show(item)}", path=file, where=where)
    return SweepValue(raw=item, label=f"{item:g}", si=float(item)), ""


def _quantity(text: str) -> tuple[float, str]:
    """SI value and SI unit of a quantity string of any kind a case file holds."""
    for kind in _KINDS:
        try:
            return parse_quantity(text, kind), kind.si_unit
        except UnitTextError:
            continue
    kinds = ", ".join(k.name for k in _KINDS)
    raise UnitTextError(f"expected a number or a quantity ({kinds}) such as '20 mm', got {text!r}")
