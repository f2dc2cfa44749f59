"""One ``[[coil]]`` table: its circuit, turns, section, path, transforms and repeat."""

from __future__ import annotations

import difflib
from pathlib import Path as FilePath

import numpy as np

from fieldenergy.caseio._paths import read_path
from fieldenergy.caseio._tables import Table, named
from fieldenergy.caseio._units import ANGLE, LENGTH
from fieldenergy.model.case import Coil, RectSection, RoundSection, Section
from fieldenergy.model.transforms import LinearRepeat, Mirror, Repeat, Rotate, RotationalRepeat, Transform, Translate

_COIL_KEYS = {"name", "circuit", "turns", "section", "path", "reverse", "frame_reference", "transform", "repeat"}
_TRANSFORM_KINDS = ("translate", "rotate", "mirror")


def read_coil(table: Table, circuits: list[str], folder: FilePath) -> Coil:
    """Read one coil table.

    Parameters
    ----------
    table
        The coil's table; its owner names the coil by position until its name is read.
    circuits
        Names of the case's circuits.
    folder
        The case folder (for points files).

    Returns
    -------
    The coil, in SI units.

    Raises
    ------
    CaseError
        If a key is unknown or missing, a value is out of range, or the circuit is unknown.
    """
    table = named(table, "coil")
    table.check_keys(_COIL_KEYS)
    name = table.text("name")
    circuit = table.text("circuit")
    if circuit not in circuits:
        close = difflib.get_close_matches(circuit, circuits, n=1)
        guess = f"did you mean {close[0]!r}? " if close else ""
        known = ", ".join(repr(c) for c in circuits)
        raise table.error(f"unknown circuit {circuit!r}; {guess}known circuits: {known}", "circuit")
    turns = table.bounded("turns", table.number("turns", 1.0, "a number of turns"), "", above=0.0)
    return Coil(
        name=name,
        circuit=circuit,
        section=_section(table.sub("section")),
        path=read_path(table, folder),
        turns=turns,
        transforms=tuple(_transform(item) for item in table.items("transform")) if "transform" in table.data else (),
        repeat=_repeat(table.sub("repeat")) if "repeat" in table.data else None,
        reverse=table.boolean("reverse", False),
        reference=table.direction("frame_reference", default=None),
    )


def _section(table: Table) -> Section:
    shapes = {"round": {"shape", "radius"}, "rect": {"shape", "width", "height"}}
    shape = table.text("shape")
    if shape not in shapes:
        close = difflib.get_close_matches(shape, sorted(shapes), n=1)
        guess = f"did you mean {close[0]!r}? " if close else ""
        raise table.error(f"unknown section shape {shape!r}; {guess}known shapes: 'rect', 'round'", "shape")
    table.check_keys(shapes[shape])
    if shape == "round":
        return RoundSection(radius=_positive(table, "radius"))
    return RectSection(width=_positive(table, "width"), height=_positive(table, "height"))


def _positive(table: Table, key: str) -> float:
    return table.bounded(key, table.quantity(key, LENGTH), "m", above=0.0)


def _transform(item: Table) -> Transform:
    keys = list(item.data)
    if len(keys) != 1 or keys[0] not in _TRANSFORM_KINDS:
        item.check_keys(_TRANSFORM_KINDS)
        raise item.error(
            f"expected exactly one of the keys {', '.join(_TRANSFORM_KINDS)} in each transform, got "
            f"{len(keys)}: {', '.join(keys) or 'none'}"
        )
    kind = keys[0]
    if kind == "translate":
        return Translate(offset=item.vector("translate", LENGTH))
    table = item.sub(kind)
    table.check_keys({"axis", "angle", "origin"} if kind == "rotate" else {"normal", "origin"})
    origin = table.vector("origin", LENGTH, default=np.zeros(3))
    if kind == "rotate":
        return Rotate(axis=table.direction("axis"), angle=table.quantity("angle", ANGLE), origin=origin)
    return Mirror(normal=table.direction("normal"), origin=origin)


def _repeat(table: Table) -> Repeat:
    has_axis, has_step = "axis" in table.data, "step" in table.data
    if has_axis == has_step:
        raise table.error(
            "expected either 'axis' (copies rotated about an axis, with optional 'origin') or "
            "'step' (copies shifted by a step), " + ("not both" if has_axis else "got neither")
        )
    if has_step:
        table.check_keys({"count", "step"})
        step = table.vector("step", LENGTH)
        if not float(np.max(np.abs(step))) > 0.0:
            raise table.error("expected a nonzero step; copies would lie on top of each other", "step")
        return LinearRepeat(count=table.integer("count", 1), step=step)
    table.check_keys({"count", "axis", "origin"})
    return RotationalRepeat(
        count=table.integer("count", 1),
        axis=table.direction("axis"),
        origin=table.vector("origin", LENGTH, default=np.zeros(3)),
    )
