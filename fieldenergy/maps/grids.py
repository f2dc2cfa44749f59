"""Evaluation points of each map kind, in the order the exporters expect.

Grids are ordered with the first axis fastest (x of a box, u of a plane), as VTK structured
data is; ``shape`` gives the number of points along each axis in that order.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from fieldenergy.model.maps import BoxMap, LineMap, MapSpec, PlaneMap, PointsMap

Array = NDArray[np.float64]


def grid_axes(spec: MapSpec) -> list[Array]:
    """Coordinates along each grid axis (m): x, y, z of a box; u, v offsets of a plane from
    its centre; the distance from the start of a line. Empty for a points map.

    Examples
    --------
    >>> from fieldenergy.model.maps import LineMap
    >>> grid_axes(LineMap("l", [0, 0, 0], [0, 0, 2], 3))[0].tolist()
    [0.0, 1.0, 2.0]
    """
    if isinstance(spec, BoxMap):
        return [np.linspace(spec.lower[k], spec.upper[k], spec.resolution[k]) for k in range(3)]
    if isinstance(spec, PlaneMap):
        return [np.linspace(-0.5 * s, 0.5 * s, n) if n > 1 else np.zeros(1) for s, n in zip(spec.size, spec.resolution)]
    if isinstance(spec, LineMap):
        return [np.linspace(0.0, float(np.linalg.norm(spec.end - spec.start)), spec.count)]
    return []


def map_points(spec: MapSpec) -> tuple[Array, tuple[int, ...]]:
    """The points of a map (m), shape (m, 3), and the grid shape (first axis fastest).

    Examples
    --------
    >>> from fieldenergy.model.maps import PlaneMap
    >>> pts, shape = map_points(PlaneMap("p", [0, 0, 1], [1, 0, 0], [0, 1, 0], (2.0, 2.0), (3, 2)))
    >>> shape, pts[:4].tolist()
    ((3, 2), [[-1.0, -1.0, 1.0], [0.0, -1.0, 1.0], [1.0, -1.0, 1.0], [-1.0, 1.0, 1.0]])
    """
    axes = grid_axes(spec)
    if isinstance(spec, BoxMap):
        z, y, x = np.meshgrid(axes[2], axes[1], axes[0], indexing="ij")
        return np.column_stack([x.ravel(), y.ravel(), z.ravel()]), tuple(spec.resolution)
    if isinstance(spec, PlaneMap):
        v, u = np.meshgrid(axes[1], axes[0], indexing="ij")
        pts = spec.center + u.ravel()[:, None] * spec.u + v.ravel()[:, None] * spec.v
        return pts, tuple(spec.resolution)
    if isinstance(spec, LineMap):
        f = np.linspace(0.0, 1.0, spec.count)
        return spec.start + f[:, None] * (spec.end - spec.start), (spec.count,)
    assert isinstance(spec, PointsMap)
    return spec.points.copy(), (len(spec.points),)


def reference_point(spec: MapSpec) -> Array:
    """The point homogeneity is relative to: the map's ``reference``, else its centre.

    The centre of a box or plane, the midpoint of a line, the mean of a point set.
    """
    if spec.reference is not None:
        return np.asarray(spec.reference, dtype=np.float64)
    if isinstance(spec, BoxMap):
        return 0.5 * (spec.lower + spec.upper)
    if isinstance(spec, PlaneMap):
        return spec.center.copy()
    if isinstance(spec, LineMap):
        return 0.5 * (spec.start + spec.end)
    return spec.points.mean(axis=0)
