"""Path specifications: what a case file says about a conductor's centre line.

These are plain frozen records, in SI units, with cheap shape checks. Evaluating them
(positions, tangents, frames) is the job of :mod:`fieldenergy.geometry`.
All paths are closed circuits: a polygon's last point joins its first, a helix is closed
by a documented return lead.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray


def _vec3(value: object, name: str) -> NDArray[np.float64]:
    arr = np.array(value, dtype=np.float64).reshape(-1)
    if arr.shape != (3,):
        raise ValueError(f"{name} must have 3 components, got {arr.size}")
    arr.setflags(write=False)
    return arr


def _points(value: object, name: str) -> NDArray[np.float64]:
    arr = np.array(value, dtype=np.float64)
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ValueError(f"{name} must be a list of [x, y, z] points, got shape {arr.shape}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, slots=True, eq=False)
class CirclePath:
    """A circle of ``radius`` about ``center`` in the plane normal to ``normal``.

    The current runs anticlockwise seen from the tip of ``normal`` (right-hand rule).
    ``start`` optionally gives the in-plane direction of the parameter origin.
    """

    radius: float
    center: NDArray[np.float64]
    normal: NDArray[np.float64]
    start: NDArray[np.float64] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "center", _vec3(self.center, "center"))
        object.__setattr__(self, "normal", _vec3(self.normal, "normal"))
        if self.start is not None:
            object.__setattr__(self, "start", _vec3(self.start, "start"))


@dataclass(frozen=True, slots=True, eq=False)
class PolygonPath:
    """A closed polygon through ``points`` (the last point joins the first).

    ``source`` names the points file when the points came from one.
    """

    points: NDArray[np.float64]
    source: str | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "points", _points(self.points, "points"))


@dataclass(frozen=True, slots=True, eq=False)
class RacetrackPath:
    """Two parallel straights of length ``straight`` joined by two half-circles of ``radius``.

    The straights run along ``direction``; the track lies in the plane normal to ``normal``
    and is centred on ``center``. Current runs anticlockwise seen from the tip of ``normal``.
    """

    straight: float
    radius: float
    center: NDArray[np.float64]
    normal: NDArray[np.float64]
    direction: NDArray[np.float64]

    def __post_init__(self) -> None:
        for name in ("center", "normal", "direction"):
            object.__setattr__(self, name, _vec3(getattr(self, name), name))


@dataclass(frozen=True, slots=True, eq=False)
class SaddlePath:
    """A saddle winding on a cylinder: two axial straights joined by two arcs.

    The cylinder has radius ``radius`` and axis ``axis`` through ``center``; the straights
    have length ``length`` (centred on ``center`` along the axis) and sit at azimuths
    ``±opening/2`` about the in-plane direction ``direction`` (rad); the arcs lie on the cylinder
    at the two ends.
    """

    radius: float
    length: float
    opening: float
    center: NDArray[np.float64]
    axis: NDArray[np.float64]
    direction: NDArray[np.float64]

    def __post_init__(self) -> None:
        for name in ("center", "axis", "direction"):
            object.__setattr__(self, name, _vec3(getattr(self, name), name))


@dataclass(frozen=True, slots=True, eq=False)
class HelixPath:
    """A helix of ``radius`` and ``pitch`` (axial advance per turn) over ``turns`` turns.

    It starts at ``center + radius * start`` and advances along ``axis``. It is closed by a
    straight return lead from its last point back to its first (for whole turns this lead
    runs parallel to the axis at the helix radius).
    """

    radius: float
    pitch: float
    turns: float
    center: NDArray[np.float64]
    axis: NDArray[np.float64]
    start: NDArray[np.float64] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "center", _vec3(self.center, "center"))
        object.__setattr__(self, "axis", _vec3(self.axis, "axis"))
        if self.start is not None:
            object.__setattr__(self, "start", _vec3(self.start, "start"))


@dataclass(frozen=True, slots=True, eq=False)
class CurvePath:
    """A closed parametric curve ``(x(t), y(t), z(t))`` for ``t`` in ``[t0, t1]``, in metres.

    The expressions are checked by :mod:`fieldenergy.expressions` when read; the curve must
    return to its start at ``t1``.
    """

    x: str
    y: str
    z: str
    t0: float
    t1: float


Path = CirclePath | PolygonPath | RacetrackPath | SaddlePath | HelixPath | CurvePath

#: Path classes by the ``kind`` a case file names (``file`` also gives a :class:`PolygonPath`).
PATH_KINDS: dict[str, type] = {
    "circle": CirclePath,
    "polygon": PolygonPath,
    "racetrack": RacetrackPath,
    "saddle": SaddlePath,
    "helix": HelixPath,
    "curve": CurvePath,
}
