"""Field maps a case declares: where to evaluate the field and which quantities to export.

A map is one of four kinds, each a frozen record in SI units:

- :class:`BoxMap`: a 3D grid of ``resolution`` points between two opposite corners;
- :class:`PlaneMap`: a rectangle centred on ``center``, spanned by two perpendicular unit
  directions ``u`` and ``v`` with full extents ``size``;
- :class:`LineMap`: ``count`` evenly spaced points from ``start`` to ``end``;
- :class:`PointsMap`: a given set of points (read from a CSV file by the case reader).

The quantities are named by :data:`MAP_QUANTITIES`: ``B`` (vector, T), ``|B|`` (T), ``A``
(vector, T m), ``u`` (energy density B^2 / (2 mu0), J/m^3) and ``homogeneity`` (ppm,
1e6 (|B| - |B_ref|) / |B_ref| with ``B_ref`` the field at ``reference``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

#: Quantities a map can hold, in export order.
MAP_QUANTITIES: tuple[str, ...] = ("B", "|B|", "A", "u", "homogeneity")

#: Quantities of a map that does not list its own.
DEFAULT_MAP_QUANTITIES: tuple[str, ...] = ("B", "|B|", "u")

#: Map kinds, as written in a case file.
MAP_KINDS: tuple[str, ...] = ("box", "plane", "line", "points")


def _vector(value: object, name: str) -> NDArray[np.float64]:
    arr = np.array(value, dtype=np.float64).reshape(-1)
    if arr.shape != (3,) or not np.isfinite(arr).all():
        raise ValueError(f"{name} must be 3 finite numbers, got {value!r}")
    return arr


def _check_quantities(quantities: tuple[str, ...]) -> None:
    unknown = [q for q in quantities if q not in MAP_QUANTITIES]
    if unknown or not quantities:
        raise ValueError(f"map quantities must be a non-empty subset of {MAP_QUANTITIES}, got {quantities!r}")


@dataclass(frozen=True, slots=True, eq=False)
class BoxMap:
    """A 3D grid: ``resolution`` = (nx, ny, nz) points from ``lower`` to ``upper`` (m)."""

    name: str
    lower: NDArray[np.float64]
    upper: NDArray[np.float64]
    resolution: tuple[int, int, int]
    quantities: tuple[str, ...] = DEFAULT_MAP_QUANTITIES
    reference: NDArray[np.float64] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "lower", _vector(self.lower, "lower"))
        object.__setattr__(self, "upper", _vector(self.upper, "upper"))
        if len(self.resolution) != 3 or min(self.resolution) < 1:
            raise ValueError(f"box resolution must be 3 integers >= 1, got {self.resolution!r}")
        _check_quantities(self.quantities)

    @property
    def kind(self) -> str:
        """``"box"``."""
        return "box"


@dataclass(frozen=True, slots=True, eq=False)
class PlaneMap:
    """A rectangle: ``center`` (m), unit directions ``u``, ``v`` (perpendicular), extents ``size`` (m)."""

    name: str
    center: NDArray[np.float64]
    u: NDArray[np.float64]
    v: NDArray[np.float64]
    size: tuple[float, float]
    resolution: tuple[int, int]
    quantities: tuple[str, ...] = DEFAULT_MAP_QUANTITIES
    reference: NDArray[np.float64] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "center", _vector(self.center, "center"))
        u, v = _vector(self.u, "u"), _vector(self.v, "v")
        object.__setattr__(self, "u", u / np.linalg.norm(u))
        object.__setattr__(self, "v", v / np.linalg.norm(v))
        if len(self.resolution) != 2 or min(self.resolution) < 1:
            raise ValueError(f"plane resolution must be 2 integers >= 1, got {self.resolution!r}")
        _check_quantities(self.quantities)

    @property
    def kind(self) -> str:
        """``"plane"``."""
        return "plane"


@dataclass(frozen=True, slots=True, eq=False)
class LineMap:
    """``count`` evenly spaced points from ``start`` to ``end`` (m), both included."""

    name: str
    start: NDArray[np.float64]
    end: NDArray[np.float64]
    count: int
    quantities: tuple[str, ...] = DEFAULT_MAP_QUANTITIES
    reference: NDArray[np.float64] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "start", _vector(self.start, "start"))
        object.__setattr__(self, "end", _vector(self.end, "end"))
        if self.count < 2:
            raise ValueError(f"line count must be >= 2, got {self.count}")
        _check_quantities(self.quantities)

    @property
    def kind(self) -> str:
        """``"line"``."""
        return "line"


@dataclass(frozen=True, slots=True, eq=False)
class PointsMap:
    """Given points (m), shape (m, 3), read from ``source`` (a CSV file), if any."""

    name: str
    points: NDArray[np.float64]
    quantities: tuple[str, ...] = DEFAULT_MAP_QUANTITIES
    reference: NDArray[np.float64] | None = None
    source: str | None = None

    def __post_init__(self) -> None:
        pts = np.ascontiguousarray(self.points, dtype=np.float64)
        if pts.ndim != 2 or pts.shape[1] != 3 or len(pts) == 0:
            raise ValueError(f"map points must have shape (m, 3) with m >= 1, got {pts.shape}")
        object.__setattr__(self, "points", pts)
        _check_quantities(self.quantities)

    @property
    def kind(self) -> str:
        """``"points"``."""
        return "points"


MapSpec = BoxMap | PlaneMap | LineMap | PointsMap
