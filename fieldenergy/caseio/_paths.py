"""The ``path`` table of a coil, one reader per path kind.

Each reader checks the keys of its kind, converts lengths and angles to SI, and does the
checks that need only the numbers (zero directions, directions that must be perpendicular,
repeated or collinear polygon points, curves that do not close). Evaluating the paths in
space is left to :mod:`fieldenergy.geometry`.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path as FilePath

import numpy as np
from numpy.typing import NDArray

from fieldenergy.caseio._curves import read_curve
from fieldenergy.caseio._points_file import points_file_path, read_points_file
from fieldenergy.caseio._tables import REQUIRED, Table
from fieldenergy.caseio._units import ANGLE, LENGTH, UnitTextError, parse_unit
from fieldenergy.constants import REPEATED_POINT_RTOL
from fieldenergy.errors import CaseError
from fieldenergy.model.paths import CirclePath, HelixPath, Path, PolygonPath, RacetrackPath, SaddlePath

#: |cos| (for "normal to") or |sin| (for "not parallel") of the angle between two directions
#: below which they count as perpendicular or parallel. Directions typed as exact numbers are
#: off by about 1e-16; this only lets through directions that are meant to be exact.
DIRECTION_TOL: float = 1.0e-9

#: Ratio of a polygon's second to first principal extent below which its points lie on a line.
COLLINEAR_RTOL: float = 1.0e-10


def read_path(coil: Table, folder: FilePath) -> Path:
    """Read the ``path`` table of a coil.

    Parameters
    ----------
    coil
        The coil's table.
    folder
        The case folder, against which points files are resolved.

    Returns
    -------
    The path record, in SI units.

    Raises
    ------
    CaseError
        If the kind is unknown, a key is unknown or missing, or a value is out of range.
    """
    table = coil.sub("path")
    kind = table.text("kind")
    if kind not in _READERS:
        kinds = sorted(_READERS)
        close = difflib.get_close_matches(kind, kinds, n=1)
        guess = f"did you mean {close[0]!r}? " if close else ""
        raise table.error(f"unknown path kind {kind!r}; {guess}known kinds: {', '.join(kinds)}", "kind")
    return _READERS[kind](_with_unit(table), folder)


def _with_unit(table: Table) -> Table:
    """The table with its ``unit`` key applied to plain length numbers."""
    if "unit" not in table.data:
        return table
    text = table.text("unit")
    try:
        factor = parse_unit(text, LENGTH)
    except UnitTextError as exc:
        raise table.error(str(exc), "unit") from None
    return replace(table, unit=factor, unit_name=repr(text))


def _positive(table: Table, key: str) -> float:
    return table.bounded(key, table.quantity(key, LENGTH), "m", above=0.0)


def _center(table: Table) -> NDArray[np.float64]:
    return table.vector("center", LENGTH, default=np.zeros(3))


def _unit(vec: NDArray[np.float64]) -> NDArray[np.float64]:
    scaled = vec / np.max(np.abs(vec))  # no overflow when squaring
    return scaled / math.sqrt(float(np.dot(scaled, scaled)))


def _perpendicular(table: Table, key: str, vec: NDArray[np.float64], other: str, ref: NDArray[np.float64]) -> None:
    cos = abs(float(np.dot(_unit(vec), _unit(ref))))
    if cos > DIRECTION_TOL:
        angle = math.degrees(math.acos(min(cos, 1.0)))
        raise table.error(
            f"must be normal to '{other}' {ref.tolist()}: got {vec.tolist()}, at {angle:.6g} deg "
            f"to it (|cos| = {cos:.3g}, at most {DIRECTION_TOL:g} allowed)",
            key,
        )


def _not_parallel(table: Table, key: str, vec: NDArray[np.float64], other: str, ref: NDArray[np.float64]) -> None:
    sin = float(np.linalg.norm(np.cross(_unit(vec), _unit(ref))))
    if sin <= DIRECTION_TOL:
        raise table.error(
            f"must not be parallel to '{other}' {ref.tolist()}: got {vec.tolist()}; "
            "give a direction in the plane of the path",
            key,
        )


def _circle(table: Table, folder: FilePath) -> CirclePath:
    table.check_keys({"kind", "unit", "radius", "center", "normal", "start"})
    normal = table.direction("normal", default=np.array([0.0, 0.0, 1.0]))
    start = table.direction("start", default=None)
    if start is not None:
        _not_parallel(table, "start", start, "normal", normal)
    return CirclePath(radius=_positive(table, "radius"), center=_center(table), normal=normal, start=start)


def _polygon(table: Table, folder: FilePath) -> PolygonPath:
    table.check_keys({"kind", "unit", "points"})
    points = table.points("points", 3)
    check_polygon(points, lambda k: f"point {k}", lambda message: table.error(message, "points"))
    return PolygonPath(points=points)


def _file(table: Table, folder: FilePath) -> PolygonPath:
    table.check_keys({"kind", "unit", "file"})
    file = points_file_path(table, "file", folder)
    points, lines = read_points_file(file, table)
    where = f"{table.owner}, points file" if table.owner else "points file"
    check_polygon(points, lambda k: f"line {lines[k]}", lambda message: CaseError(message, path=str(file), where=where))
    return PolygonPath(points=points, source=table.text("file"))


def check_polygon(points: NDArray[np.float64], label: Callable[[int], str], fail: Callable[[str], CaseError]) -> None:
    """Refuse repeated consecutive points (the last and first included) and collinear points.

    ``label(k)`` names point ``k`` in a message; ``fail(message)`` makes the error to raise.
    """
    scale = float(np.max(np.abs(points)))
    unit = points / scale if scale > 0.0 else points  # lengths in units of the largest coordinate
    size = float(np.linalg.norm(unit.max(axis=0) - unit.min(axis=0)))
    steps = np.linalg.norm(np.roll(unit, -1, axis=0) - unit, axis=1)
    repeated = np.flatnonzero(steps <= REPEATED_POINT_RTOL * size)
    if repeated.size:
        k = int(repeated[0])
        n = len(points)
        if k == n - 1:
            raise fail(
                f"the last point ({label(k)}) repeats the first ({label(0)}): {points[0].tolist()}; "
                "a polygon closes by itself, leave the closing point out"
            )
        raise fail(f"{label(k)} and {label(k + 1)} are the same point {points[k].tolist()}; remove one")
    extents = np.linalg.svd(unit - unit.mean(axis=0), compute_uv=False)
    if extents[1] <= COLLINEAR_RTOL * extents[0]:
        raise fail(f"all {len(points)} points lie on one line; a polygon needs points spanning a plane")


def _racetrack(table: Table, folder: FilePath) -> RacetrackPath:
    table.check_keys({"kind", "unit", "straight", "radius", "center", "normal", "direction"})
    normal = table.direction("normal", default=np.array([0.0, 0.0, 1.0]))
    direction = table.direction("direction", default=np.array([1.0, 0.0, 0.0]))
    _perpendicular(table, "direction", direction, "normal", normal)
    return RacetrackPath(
        straight=_positive(table, "straight"),
        radius=_positive(table, "radius"),
        center=_center(table),
        normal=normal,
        direction=direction,
    )


def _saddle(table: Table, folder: FilePath) -> SaddlePath:
    table.check_keys({"kind", "unit", "radius", "length", "opening", "center", "axis", "direction"})
    axis = table.direction("axis", default=np.array([0.0, 0.0, 1.0]))
    direction = table.direction("direction", default=np.array([1.0, 0.0, 0.0]))
    _perpendicular(table, "direction", direction, "axis", axis)
    opening = table.bounded("opening", table.quantity("opening", ANGLE), "rad", above=0.0, below=2.0 * math.pi)
    return SaddlePath(
        radius=_positive(table, "radius"),
        length=_positive(table, "length"),
        opening=opening,
        center=_center(table),
        axis=axis,
        direction=direction,
    )


def _helix(table: Table, folder: FilePath) -> HelixPath:
    table.check_keys({"kind", "unit", "radius", "pitch", "turns", "center", "axis", "start"})
    axis = table.direction("axis", default=np.array([0.0, 0.0, 1.0]))
    start = table.direction("start", default=None)
    if start is not None:
        _not_parallel(table, "start", start, "axis", axis)
    turns = table.bounded("turns", table.number("turns", REQUIRED, "a number of turns"), "", above=0.0)
    return HelixPath(
        radius=_positive(table, "radius"),
        pitch=_positive(table, "pitch"),
        turns=turns,
        center=_center(table),
        axis=axis,
        start=start,
    )


_READERS: dict[str, Callable[[Table, FilePath], Path]] = {
    "circle": _circle,
    "polygon": _polygon,
    "file": _file,
    "racetrack": _racetrack,
    "saddle": _saddle,
    "helix": _helix,
    "curve": lambda table, folder: read_curve(table),
}
