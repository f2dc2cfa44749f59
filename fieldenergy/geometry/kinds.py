"""Exact curves of each path kind: :func:`exact_curve` turns a path record into a :class:`Curve`.

Circles, polygons, racetracks, saddles and helices become a :class:`ChainCurve` whose
parameter is arc length from the start point (so a curved piece cut into uniform parameter
steps gets chords of equal length). A ``curve`` path becomes an :class:`ExpressionCurve` in
its own parameter.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import REPEATED_POINT_RTOL
from fieldenergy.errors import GeometryError
from fieldenergy.expressions import compile_expression
from fieldenergy.geometry._vectors import (
    any_perpendicular,
    finite_vector,
    normal_component,
    positive,
    unit_vector,
    where,
)
from fieldenergy.geometry.curves import (
    CLOSURE_RTOL,
    PLANAR_RTOL,
    ChainCurve,
    Curve,
    ExpressionCurve,
    fitted_normal,
)
from fieldenergy.model.paths import (
    CirclePath,
    CurvePath,
    HelixPath,
    Path,
    PolygonPath,
    RacetrackPath,
    SaddlePath,
)

#: Samples of an expression curve used to check it is finite and closed and to find its size.
EXPRESSION_SAMPLES: int = 2048


@dataclass(frozen=True, slots=True)
class _Pieces:
    """Per-piece arrays of a :class:`ChainCurve` (see its docstring), plus piece lengths."""

    centre: NDArray[np.float64]
    e1: NDArray[np.float64]
    e2: NDArray[np.float64]
    e3: NDArray[np.float64]
    radius: NDArray[np.float64]
    omega: NDArray[np.float64]
    advance: NDArray[np.float64]
    length: NDArray[np.float64]


def _lines(points: NDArray[np.float64], ends: NDArray[np.float64]) -> _Pieces:
    """Straight pieces from ``points[i]`` to ``ends[i]``."""
    seg = ends - points
    length = np.linalg.norm(seg, axis=1)
    zeros, n = np.zeros_like(points), len(points)
    return _Pieces(points, zeros, zeros, seg / length[:, None], np.zeros(n), np.zeros(n), np.ones(n), length)


def _helical(
    centre: NDArray[np.float64],
    e1: NDArray[np.float64],
    e2: NDArray[np.float64],
    e3: NDArray[np.float64],
    radius: float,
    rise: float,
    angle: float,
) -> _Pieces:
    """One arc (``rise`` = 0) or helical arc turning ``angle`` rad from ``centre + radius*e1``.

    ``rise`` is the advance along ``e3`` per radian turned.
    """
    scale = math.hypot(radius, rise)
    one = np.ones(1)
    return _Pieces(
        centre[None, :], e1[None, :], e2[None, :], e3[None, :],
        radius * one, one / scale, (rise / scale) * one, angle * scale * one,
    )


def _chain(
    pieces: list[_Pieces],
    name: str | None,
    normal: NDArray[np.float64] | None = None,
    reference: NDArray[np.float64] | None = None,
) -> ChainCurve:
    """Join pieces into a checked ChainCurve; fit the plane normal when not given."""
    joined = {f.name: np.concatenate([getattr(p, f.name) for p in pieces]) for f in dataclasses.fields(_Pieces)}
    length = joined.pop("length")
    breaks = np.concatenate([[0.0], np.cumsum(length)])
    curve = ChainCurve(
        t_start=0.0, t_end=float(breaks[-1]), breaks=breaks, straight=joined["radius"] == 0.0, normal=None,
        reference=reference, **joined,
    )
    size = curve.size()
    _check_closed(curve, size, name)
    if normal is None:
        normal = fitted_normal(curve.sample(), size)
    return dataclasses.replace(curve, normal=normal)


def _check_closed(curve: Curve, size: float, name: str | None) -> None:
    gap = float(np.linalg.norm(curve.position(curve.t_end) - curve.position(curve.t_start)))
    if not gap <= CLOSURE_RTOL * size:
        raise GeometryError(
            f"{where(name)}: the path is not closed: its end is {gap:.6g} m from its start "
            f"(at most {CLOSURE_RTOL:g} x size {size:.6g} m allowed); a conductor path must return to its start"
        )


def _circle(path: CirclePath, name: str | None) -> ChainCurve:
    radius = positive(path.radius, "circle radius", name)
    centre = finite_vector(path.center, "circle center", name)
    normal = unit_vector(path.normal, "circle normal", name)
    if path.start is None:
        e1 = any_perpendicular(normal)
    else:
        e1 = normal_component(finite_vector(path.start, "circle start", name), normal, "circle start", name)
    arc = _helical(centre, e1, np.cross(normal, e1), normal, radius, 0.0, 2.0 * math.pi)
    return _chain([arc], name, normal)


def _polygon(path: PolygonPath, name: str | None) -> ChainCurve:
    points = np.asarray(path.points, dtype=np.float64)
    if not np.all(np.isfinite(points)):
        raise GeometryError(f"{where(name)}: polygon points must be finite")
    size = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0))) if len(points) else 0.0
    if len(points) > 3 and np.linalg.norm(points[-1] - points[0]) <= REPEATED_POINT_RTOL * size:
        points = points[:-1]  # an explicit closing point repeats the first: the closure is implied
    if len(points) < 3:
        raise GeometryError(f"{where(name)}: a polygon needs at least 3 distinct points, got {len(points)}")
    ends = np.roll(points, -1, axis=0)
    gaps = np.linalg.norm(ends - points, axis=1)
    bad = np.flatnonzero(gaps <= REPEATED_POINT_RTOL * size)
    if bad.size:
        i = int(bad[0])
        raise GeometryError(
            f"{where(name)}: polygon points {i} and {(i + 1) % len(points)} repeat {points[i].tolist()} "
            f"(distance {gaps[i]:.3g} m); consecutive points must differ"
        )
    singular = np.linalg.svd(points - points.mean(axis=0), compute_uv=False)
    if singular[1] <= PLANAR_RTOL * size:
        raise GeometryError(f"{where(name)}: polygon points are all on one line; the loop encloses no area")
    return _chain([_lines(points, ends)], name)


def _racetrack(path: RacetrackPath, name: str | None) -> ChainCurve:
    straight = positive(path.straight, "racetrack straight", name, allow_zero=True)
    radius = positive(path.radius, "racetrack radius", name)
    centre = finite_vector(path.center, "racetrack center", name)
    normal = unit_vector(path.normal, "racetrack normal", name)
    along = normal_component(unit_vector(path.direction, "racetrack direction", name), normal, "racetrack direction", name)
    across = np.cross(normal, along)
    half = 0.5 * straight * along
    pieces = []
    for sign in (1.0, -1.0):  # lower straight and right end, then upper straight and left end
        start, end = centre - sign * (half + radius * across), centre + sign * (half - radius * across)
        if straight > 0.0:
            pieces.append(_lines(start[None, :], end[None, :]))
        pieces.append(_helical(centre + sign * half, -sign * across, sign * along, normal, radius, 0.0, math.pi))
    return _chain(pieces, name, normal)


def _saddle(path: SaddlePath, name: str | None) -> ChainCurve:
    radius = positive(path.radius, "saddle radius", name)
    length = positive(path.length, "saddle length", name)
    opening = float(path.opening)
    if not 0.0 < opening < 2.0 * math.pi:
        raise GeometryError(f"{where(name)}: saddle opening must be in (0, 2 pi) rad, got {path.opening!r}")
    centre = finite_vector(path.center, "saddle center", name)
    axis = unit_vector(path.axis, "saddle axis", name)
    e1 = normal_component(unit_vector(path.direction, "saddle direction", name), axis, "saddle direction", name)
    e2 = np.cross(axis, e1)

    def radial(phi: float) -> NDArray[np.float64]:
        return math.cos(phi) * e1 + math.sin(phi) * e2

    lo, hi = radial(-0.5 * opening), radial(0.5 * opening)
    top, bottom = centre + 0.5 * length * axis, centre - 0.5 * length * axis
    return _chain(
        [
            _lines((bottom + radius * lo)[None, :], (top + radius * lo)[None, :]),
            _helical(top, lo, np.cross(axis, lo), axis, radius, 0.0, opening),
            _lines((top + radius * hi)[None, :], (bottom + radius * hi)[None, :]),
            _helical(bottom, hi, -np.cross(axis, hi), axis, radius, 0.0, opening),
        ],
        name,
        reference=np.cross(axis, lo),
    )


def _helix(path: HelixPath, name: str | None) -> ChainCurve:
    radius = positive(path.radius, "helix radius", name)
    turns = positive(path.turns, "helix turns", name)
    pitch = float(path.pitch)
    if not np.isfinite(pitch):
        raise GeometryError(f"{where(name)}: helix pitch must be finite, got {path.pitch!r}")
    centre = finite_vector(path.center, "helix center", name)
    axis = unit_vector(path.axis, "helix axis", name)
    if path.start is None:
        e1 = any_perpendicular(axis)
    else:
        e1 = normal_component(finite_vector(path.start, "helix start", name), axis, "helix start", name)
    e2 = np.cross(axis, e1)
    angle = 2.0 * math.pi * turns
    helix = _helical(centre, e1, e2, axis, radius, pitch / (2.0 * math.pi), angle)
    first = centre + radius * e1
    last = centre + radius * (math.cos(angle) * e1 + math.sin(angle) * e2) + turns * pitch * axis
    size = 2.0 * radius + abs(turns * pitch)
    pieces = [helix]
    if np.linalg.norm(last - first) > REPEATED_POINT_RTOL * size:
        # Return lead along the axis: radially in at the far end, back along the axis, radially
        # out to the start. A lead at the winding radius would cross every turn.
        top = centre + turns * pitch * axis
        corners = np.array([last, top, centre])
        pieces.append(_lines(corners, np.array([top, centre, first])))
    return _chain(pieces, name, reference=-e1)


def _expression(path: CurvePath, name: str | None) -> ExpressionCurve:
    t0, t1 = float(path.t0), float(path.t1)
    if not (np.isfinite(t0) and np.isfinite(t1) and t1 > t0):
        raise GeometryError(f"{where(name)}: curve parameter range must be finite with t1 > t0, got [{path.t0}, {path.t1}]")
    functions = tuple(
        compile_expression(text, where=f"{where(name)}, key {key!r}") for key, text in zip("xyz", (path.x, path.y, path.z))
    )
    curve = ExpressionCurve(
        t_start=t0, t_end=t1, breaks=np.array([t0, t1]), straight=np.array([False]), normal=None,
        reference=None, functions=functions,
    )
    points = curve.position(np.linspace(t0, t1, EXPRESSION_SAMPLES + 1))
    if not np.all(np.isfinite(points)):
        bad = float(np.linspace(t0, t1, EXPRESSION_SAMPLES + 1)[np.flatnonzero(~np.isfinite(points).all(axis=1))[0]])
        raise GeometryError(f"{where(name)}: curve expressions are not finite at t = {bad:.6g}")
    size = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0)))
    if size == 0.0:
        raise GeometryError(f"{where(name)}: curve expressions give a single point; the path has no extent")
    _check_closed(curve, size, name)
    return dataclasses.replace(curve, normal=fitted_normal(points[:-1], size))


_BUILDERS = {
    CirclePath: _circle,
    PolygonPath: _polygon,
    RacetrackPath: _racetrack,
    SaddlePath: _saddle,
    HelixPath: _helix,
    CurvePath: _expression,
}


def exact_curve(path: Path, name: str | None = None) -> Curve:
    """The exact closed centre line of a path.

    Parameters
    ----------
    path
        A path record of :mod:`fieldenergy.model.paths`.
    name
        Name of the coil the path belongs to, used in error messages.

    Returns
    -------
    Curve
        For a circle: one arc, anticlockwise about ``normal``, starting at ``center + radius *
        start`` (``start`` projected normal to ``normal``; by default an arbitrary fixed
        direction). For a polygon: one straight piece per side; a last point equal to the first
        is taken as the closure and dropped. For a racetrack: lower straight, half-circle,
        upper straight, half-circle, anticlockwise about ``normal``; the joins are breaks. For a
        saddle: axial straight at azimuth -opening/2, arc at +length/2, axial straight back at
        +opening/2, arc at -length/2. For a helix: the helical piece, then a return lead of
        three straights: radially in from the last point to the axis, back along the axis to
        the start's height, radially out to the first point (omitted when the helix closes on
        itself, as for whole turns of zero pitch). A lead at the winding radius would cross
        every turn; on the axis it crosses none. For a curve: one piece in the expressions' own parameter.

    Raises
    ------
    GeometryError
        For a non-positive size, a zero or parallel direction, repeated consecutive polygon
        points, collinear polygon points, non-finite expression values or an open curve.

    Examples
    --------
    >>> from fieldenergy.model import RacetrackPath
    >>> track = RacetrackPath(1.0, 0.5, [0, 0, 0], [0, 0, 1], [1, 0, 0])
    >>> curve = exact_curve(track, "track")
    >>> round(curve.length(), 6), curve.straight.tolist()
    (5.141593, [True, False, True, False])
    """
    builder = _BUILDERS.get(type(path))
    if builder is None:
        known = ", ".join(sorted(cls.__name__ for cls in _BUILDERS))
        raise GeometryError(f"{where(name)}: unsupported path type {type(path).__name__}; expected one of {known}")
    return builder(path, name)  # type: ignore[operator]
