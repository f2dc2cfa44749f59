"""Magnetic flux density B and vector potential A of filament segments at given points.

Public wrappers around :mod:`fieldenergy.kernels._biot_savart`: they check and coerce the
input, cut large point sets into chunks (memory stays O(points + segments)), call the numba
kernels and turn a non-finite result (a point on a zero-radius filament) into a
:class:`~fieldenergy.errors.GeometryError` naming the point.

The fields are those of straight segments of current (Biot-Savart, closed form of Hanson &
Hirshman, Phys. Plasmas 9, 4410 (2002)) with a round core of uniform current density of
radius ``radii`` around each segment; see the kernel module for the exact rule.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Literal, overload

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import CaseError, GeometryError
from fieldenergy.kernels._biot_savart import b_and_a_from_segments, b_from_segments
from fieldenergy.model.filaments import Filaments

#: Points handed to one kernel call; bounds the scratch memory and paces progress reports.
CHUNK_POINTS: int = 65536

#: Segments shorter than this (m) count as zero-length: their squared length underflows.
MIN_SEGMENT_LENGTH: float = float(np.sqrt(np.finfo(np.float64).tiny))

Progress = Callable[[int], None]
Array = NDArray[np.float64]


def b_field(
    points: ArrayLike, filaments: Filaments, circuit_currents: ArrayLike, *, progress: Progress | None = None
) -> Array:
    """Magnetic flux density of the filaments at the points.

    Parameters
    ----------
    points
        Field points, shape (m, 3), m.
    filaments
        The segments carrying current.
    circuit_currents
        Terminal current of each circuit, shape (n_circuits,), A.
    progress
        Called with the number of points done after each chunk.

    Returns
    -------
    NDArray
        B, shape (m, 3), T.

    Raises
    ------
    GeometryError
        Bad or non-finite points or segments, or a point on a zero-radius filament.
    CaseError
        Wrong number of circuit currents.

    Examples
    --------
    >>> fil = Filaments.from_segments([[0, 0, -1e3]], [[0, 0, 1e3]])   # a long wire on z
    >>> b = b_field([[0.1, 0.0, 0.0]], fil, [1.0])
    >>> round(float(b[0, 1]) * 1e6, 6)    # mu0 I / (2 pi r) = 2 uT
    2.0
    """
    currents = _segment_currents(filaments, circuit_currents)
    seg = _segments(filaments.starts, filaments.ends, currents, filaments.radii)
    return _evaluate(_points(points), seg, False, progress)[0]


def vector_potential(
    points: ArrayLike, filaments: Filaments, circuit_currents: ArrayLike, *, progress: Progress | None = None
) -> Array:
    """Magnetic vector potential (Coulomb gauge) of the filaments at the points.

    Parameters and errors as in :func:`b_field`.

    Returns
    -------
    NDArray
        A, shape (m, 3), T m (Wb/m).

    Examples
    --------
    >>> fil = Filaments.from_segments([[-1.0, 0, 0]], [[1.0, 0, 0]])
    >>> a = vector_potential([[0.0, 1.0, 0.0]], fil, [1.0])
    >>> round(float(a[0, 0]) / 1e-7, 6)    # ln((S + L)/(S - L)), S = 2 sqrt2, L = 2
    1.762747
    """
    return field_at(points, filaments, circuit_currents, progress=progress)[1]


def field_at(
    points: ArrayLike, filaments: Filaments, circuit_currents: ArrayLike, *, progress: Progress | None = None
) -> tuple[Array, Array]:
    """B and A of the filaments at the points, in one pass.

    Parameters and errors as in :func:`b_field`.

    Returns
    -------
    tuple of NDArray
        B (T) and A (T m), each shape (m, 3).

    Examples
    --------
    >>> fil = Filaments.from_segments([[0, 0, -1e3]], [[0, 0, 1e3]], radii=0.01)
    >>> b, a = field_at([[0.005, 0.0, 0.0]], fil, [1.0])   # inside the core: half of 20 uT
    >>> round(float(b[0, 1]) * 1e6, 6)
    10.0
    """
    currents = _segment_currents(filaments, circuit_currents)
    seg = _segments(filaments.starts, filaments.ends, currents, filaments.radii)
    return _evaluate(_points(points), seg, True, progress)


@overload
def segment_field(
    points: ArrayLike,
    starts: ArrayLike,
    ends: ArrayLike,
    currents: ArrayLike,
    radii: ArrayLike = ...,
    *,
    want_a: Literal[True] = ...,
    progress: Progress | None = ...,
) -> tuple[Array, Array]: ...


@overload
def segment_field(
    points: ArrayLike,
    starts: ArrayLike,
    ends: ArrayLike,
    currents: ArrayLike,
    radii: ArrayLike = ...,
    *,
    want_a: Literal[False],
    progress: Progress | None = ...,
) -> Array: ...


def segment_field(
    points: ArrayLike,
    starts: ArrayLike,
    ends: ArrayLike,
    currents: ArrayLike,
    radii: ArrayLike = 0.0,
    *,
    want_a: bool = True,
    progress: Progress | None = None,
) -> tuple[Array, Array] | Array:
    """B (and A) of bare segment arrays at the points.

    Parameters
    ----------
    points
        Field points, shape (m, 3), m.
    starts, ends
        Segment end points, shape (n, 3), m; current flows from start to end.
    currents
        Segment currents, shape (n,) or a scalar, A.
    radii
        Core radius of each segment, shape (n,) or a scalar, m; 0 for a line filament.
    want_a
        Also return the vector potential.
    progress
        Called with the number of points done after each chunk.

    Returns
    -------
    NDArray or tuple of NDArray
        B (T), shape (m, 3); with ``want_a``, the pair (B, A) with A in T m.

    Raises
    ------
    GeometryError
        Bad or non-finite points or segments, or a point on a zero-radius segment.

    Examples
    --------
    >>> b = segment_field([[0.0, 1.0, 0.0]], [[-1.0, 0, 0]], [[1.0, 0, 0]], 1.0, want_a=False)
    >>> round(float(b[0, 2]) / 1e-7, 9)    # (cos 45 deg + cos 45 deg) / 1 m, along +z
    1.414213562
    """
    b, a = _evaluate(_points(points), _segments(starts, ends, currents, radii), want_a, progress)
    return (b, a) if want_a else b


def _evaluate(
    pts: Array, seg: tuple[Array, Array, Array, Array], want_a: bool, progress: Progress | None
) -> tuple[Array, Array]:
    """Run the kernels chunk by chunk: (B, A), A of shape (0, 3) unless asked for."""
    s, e, cur, rad = seg
    m = len(pts)
    b = np.empty((m, 3))
    a = np.empty((m if want_a else 0, 3))
    for i0 in range(0, m, CHUNK_POINTS):
        i1 = min(m, i0 + CHUNK_POINTS)
        if not want_a:
            b_from_segments(pts[i0:i1], s, e, cur, rad, b[i0:i1])
        else:
            b_and_a_from_segments(pts[i0:i1], s, e, cur, rad, b[i0:i1], a[i0:i1])
        if progress is not None:
            progress(i1)
    _check_finite_result(b, pts)
    return b, a


def _points(points: ArrayLike) -> Array:
    pts = np.ascontiguousarray(points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 3:
        raise GeometryError(
            f"field points must have shape (m, 3), got {pts.shape}; a single point is [[x, y, z]]"
        )
    bad = ~np.isfinite(pts).all(axis=1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise GeometryError(
            f"field point {i} is not finite: {pts[i].tolist()} ({int(bad.sum())} such points)"
        )
    return pts


def _segments(
    starts: ArrayLike, ends: ArrayLike, currents: ArrayLike, radii: ArrayLike
) -> tuple[Array, Array, Array, Array]:
    s = np.ascontiguousarray(starts, dtype=np.float64)
    e = np.ascontiguousarray(ends, dtype=np.float64)
    if s.ndim != 2 or s.shape[1] != 3 or e.shape != s.shape:
        raise GeometryError(
            f"segment starts and ends must both have shape (n, 3), got {s.shape} and {e.shape}"
        )
    n = len(s)
    cur = _per_segment(currents, n, "currents")
    rad = _per_segment(radii, n, "radii")
    for name, arr in (("start", s), ("end", e)):
        bad = ~np.isfinite(arr).all(axis=1)
        if bad.any():
            j = int(np.flatnonzero(bad)[0])
            raise GeometryError(f"segment {j}: {name} point is not finite: {arr[j].tolist()}")
    bad = ~(rad >= 0.0) | ~np.isfinite(rad)
    if bad.any():
        j = int(np.flatnonzero(bad)[0])
        raise GeometryError(f"segment {j}: core radius must be finite and >= 0 m, got {rad[j]}")
    if not np.isfinite(cur).all():
        j = int(np.flatnonzero(~np.isfinite(cur))[0])
        raise GeometryError(f"segment {j}: current must be finite, got {cur[j]}")
    length = np.linalg.norm(e - s, axis=1)
    short = ~(length >= MIN_SEGMENT_LENGTH)
    if short.any():
        j = int(np.flatnonzero(short)[0])
        raise GeometryError(
            f"segment {j} has zero length (start = end = {s[j].tolist()}); "
            f"segments must be longer than {MIN_SEGMENT_LENGTH:.1e} m ({int(short.sum())} such segments)"
        )
    return s, e, cur, rad


def _per_segment(values: ArrayLike, n: int, name: str) -> Array:
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim == 0:
        return np.full(n, float(arr))
    if arr.shape != (n,):
        raise GeometryError(f"segment {name} must be a scalar or have shape ({n},), got {arr.shape}")
    return np.ascontiguousarray(arr)


def _segment_currents(filaments: Filaments, circuit_currents: ArrayLike) -> Array:
    cur = np.asarray(circuit_currents, dtype=np.float64)
    if cur.shape != (filaments.n_circuits,):
        raise CaseError(
            f"expected {filaments.n_circuits} circuit currents (one per circuit), got shape {cur.shape}",
            where="circuit currents",
        )
    if not np.isfinite(cur).all():
        raise CaseError(f"circuit currents must be finite, got {cur.tolist()}", where="circuit currents")
    return filaments.currents(cur)


def _check_finite_result(b: Array, pts: Array) -> None:
    bad = ~np.isfinite(b).all(axis=1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise GeometryError(
            f"field point {i} at {pts[i].tolist()} lies on a zero-radius filament segment, where the "
            f"field is infinite ({int(bad.sum())} such points); give the segments a core radius or "
            "move the points off the filaments"
        )
