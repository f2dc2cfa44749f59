"""The ``[[map]]`` tables of a case file -> :mod:`fieldenergy.model.maps` records.

Keys common to every kind: ``name`` (unique), ``kind`` (box, plane, line, points),
``quantities`` (a list from ``B``, ``|B|``, ``A``, ``u``, ``homogeneity``) and ``reference``
(the point homogeneity is relative to; default the map's centre). Per kind:

- box: ``lower``, ``upper`` (corners), ``resolution = [nx, ny, nz]``;
- plane: ``center``, ``u``, ``v`` (perpendicular in-plane directions), ``size = [su, sv]``
  (full extents along u and v), ``resolution = [nu, nv]``;
- line: ``start``, ``end``, ``count``;
- points: ``file`` (a CSV with columns x, y, z in metres, relative to the case folder).
"""

from __future__ import annotations

from pathlib import Path as FilePath

import numpy as np

from fieldenergy.caseio._tables import Table, show
from fieldenergy.caseio._units import LENGTH
from fieldenergy.errors import CaseError
from fieldenergy.model.maps import (
    DEFAULT_MAP_QUANTITIES,
    MAP_KINDS,
    MAP_QUANTITIES,
    BoxMap,
    LineMap,
    MapSpec,
    PlaneMap,
    PointsMap,
)

#: Most points one map may hold; protects against a resolution typed with extra digits.
MAX_MAP_POINTS: int = 200_000_000

#: In-plane directions whose cosine exceeds this are refused as not perpendicular.
PERPENDICULAR_TOLERANCE: float = 1.0e-9

_COMMON = {"name", "kind", "quantities", "reference"}
_KIND_KEYS = {
    "box": {"lower", "upper", "resolution"},
    "plane": {"center", "u", "v", "size", "resolution"},
    "line": {"start", "end", "count"},
    "points": {"file"},
}


def read_maps(root: Table, folder: FilePath) -> tuple[MapSpec, ...]:
    """Read the optional ``[[map]]`` tables of a case; names must be unique.

    Raises
    ------
    CaseError
        Naming the file, the map and the key, for any bad map input.
    """
    if "map" not in root.data:
        return ()
    maps: list[MapSpec] = []
    for k, table in enumerate(root.items("map"), start=1):
        table = Table(table.data, root.file, owner=f"map #{k}")
        name = table.text("name")
        table = Table(table.data, root.file, owner=f"map {name!r}")
        if any(m.name == name for m in maps):
            raise table.error(f"duplicate map name {name!r}; map names must be unique", "name")
        maps.append(_read_map(table, name, folder))
    return tuple(maps)


def _read_map(table: Table, name: str, folder: FilePath) -> MapSpec:
    kind = table.text("kind")
    if kind not in MAP_KINDS:
        raise table.error(f"unknown map kind {kind!r}; known kinds: {', '.join(MAP_KINDS)}", "kind")
    table.check_keys(_COMMON | _KIND_KEYS[kind])
    quantities = _quantities(table)
    reference = table.vector("reference", LENGTH, None)
    if kind == "box":
        lower, upper = table.vector("lower", LENGTH), table.vector("upper", LENGTH)
        if not (upper > lower).all():
            raise table.error(f"expected upper > lower in every coordinate, got lower {lower.tolist()} m, "
                              f"upper {upper.tolist()} m", "upper")
        res = _counts(table, "resolution", 3)
        return BoxMap(name, lower, upper, res, quantities, reference)  # type: ignore[arg-type]
    if kind == "plane":
        return _plane(table, name, quantities, reference)
    if kind == "line":
        start, end = table.vector("start", LENGTH), table.vector("end", LENGTH)
        if not np.linalg.norm(end - start) > 0.0:
            raise table.error(f"end must differ from start, got both {start.tolist()} m", "end")
        count = table.integer("count", 2)
        _check_size(table, count, "count")
        return LineMap(name, start, end, count, quantities, reference)
    return _points(table, name, quantities, reference, folder)


def _plane(table: Table, name: str, quantities: tuple[str, ...], reference: np.ndarray | None) -> PlaneMap:
    center = table.vector("center", LENGTH)
    u, v = table.direction("u"), table.direction("v")
    cosine = abs(float(u @ v)) / float(np.linalg.norm(u) * np.linalg.norm(v))
    if cosine > PERPENDICULAR_TOLERANCE:
        raise table.error(f"u and v must be perpendicular, got u {u.tolist()}, v {v.tolist()} "
                          f"(cosine {cosine:.3g})", "v")
    size = _extents(table)
    res = _counts(table, "resolution", 2)
    return PlaneMap(name, center, u, v, size, res, quantities, reference)  # type: ignore[arg-type]


def _points(table: Table, name: str, quantities: tuple[str, ...], reference: np.ndarray | None,
            folder: FilePath) -> PointsMap:
    from fieldenergy.output.points_csv import read_points

    file = folder / table.text("file")
    try:
        points = read_points(file)
    except CaseError as exc:
        raise table.error(f"{exc.message} (file {file})", "file") from None
    if "homogeneity" in quantities and reference is None:
        raise table.error("a points map with 'homogeneity' needs a 'reference' point [x, y, z]", "reference")
    return PointsMap(name, points, quantities, reference, source=str(file))


def _quantities(table: Table) -> tuple[str, ...]:
    if "quantities" not in table.data:
        return DEFAULT_MAP_QUANTITIES
    value = table.data["quantities"]
    expected = f"a non-empty list of names from {', '.join(MAP_QUANTITIES)}"
    if not isinstance(value, list) or not value:
        raise table.error(f"expected {expected}, got {show(value)}", "quantities")
    for k, item in enumerate(value):
        if item not in MAP_QUANTITIES:
            raise table.error(f"expected {expected}, got {show(item)}", f"quantities[{k}]")
    return tuple(dict.fromkeys(value))


def _counts(table: Table, key: str, n: int) -> tuple[int, ...]:
    expected = f"a list of {n} integers >= 2"
    value = table.raw(key, expected)
    if not isinstance(value, list) or len(value) != n:
        raise table.error(f"expected {expected}, got {show(value)}", key)
    for k, item in enumerate(value):
        if isinstance(item, bool) or not isinstance(item, int) or item < 2:
            raise table.error(f"expected {expected}, got {show(item)}", f"{key}[{k}]")
    _check_size(table, int(np.prod(value)), key)
    return tuple(value)


def _extents(table: Table) -> tuple[float, float]:
    value = table.raw("size", "[size_u, size_v], two lengths > 0")
    if not isinstance(value, list) or len(value) != 2:
        raise table.error(f"expected [size_u, size_v], two lengths > 0, got {show(value)}", "size")
    sizes = [table._quantity(item, LENGTH, f"size[{k}]") for k, item in enumerate(value)]
    for k, s in enumerate(sizes):
        if not s > 0.0:
            raise table.error(f"must be > 0 m, got {s:.17g} m", f"size[{k}]")
    return sizes[0], sizes[1]


def _check_size(table: Table, n_points: int, key: str) -> None:
    if n_points > MAX_MAP_POINTS:
        raise table.error(f"the map would hold {n_points} points; at most {MAX_MAP_POINTS} are allowed", key)
