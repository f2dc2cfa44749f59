"""Exact conductor centre lines: the :class:`Curve` interface and its two concrete kinds.

A curve is a closed chain of pieces over a parameter interval ``[t_start, t_end]``. The
sorted ``breaks`` (both ends included) separate the pieces; a piece may be straight, and a
corner of the path can only sit on a break. At a break, ``piece`` chooses which side is
evaluated (by default the piece that starts there; at ``t_end`` the last piece).

:class:`ChainCurve` holds lines, circular arcs and helical arcs, parametrised by arc length;
:class:`ExpressionCurve` holds a parametric curve given by expressions in ``t``.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.geometry._vectors import rows_dot, unit_rows

#: A sampled closed curve whose points all lie within this fraction of its size (bounding-box
#: diagonal) from their best-fit plane is planar; the slack covers rounding in transforms.
PLANAR_RTOL: float = 1.0e-9

#: A curve is closed when its end point lies within this fraction of its size of its start.
CLOSURE_RTOL: float = 1.0e-9

#: Samples per curved piece for the size and planarity of a curve: 256 is divisible by 4,
#: so the extreme points of a full circle are sampled exactly.
SAMPLES_PER_CURVED_PIECE: int = 256

#: Gauss-Legendre panels and nodes per piece for the length of a curve with no closed form;
#: 128 x 8 nodes integrate a smooth speed to rounding error.
LENGTH_PANELS: int = 128
LENGTH_NODES: int = 8

#: Steps (fraction of the parameter range) of the 4th-order central differences used for the
#: derivatives of an expression curve: they balance truncation (step^4) against rounding
#: (eps/step resp. eps/step^2), giving about 1e-12 resp. 1e-9 relative error.
DERIVATIVE_STEP: float = 2.0e-4
SECOND_DERIVATIVE_STEP: float = 2.0e-3


@dataclass(frozen=True, eq=False)
class Curve(ABC):
    """A closed exact curve made of pieces between ``breaks``.

    Attributes
    ----------
    t_start, t_end
        Parameter range.
    breaks
        Sorted parameters where pieces meet, both ends included, shape (n_pieces + 1,).
    straight
        Whether each piece is a straight line, shape (n_pieces,), bool.
    normal
        Unit normal of the curve's plane, oriented so that the curve runs anticlockwise about
        it (right-hand rule), or ``None`` if the curve is not planar.
    reference
        Default start direction of a non-planar curve's section width axis e_w (see
        :mod:`fieldenergy.geometry.frames`), or ``None`` for the inward direction from the
        start point to the curve's centroid.
    """

    t_start: float
    t_end: float
    breaks: NDArray[np.float64]
    straight: NDArray[np.bool_]
    normal: NDArray[np.float64] | None
    reference: NDArray[np.float64] | None

    @abstractmethod
    def _evaluate(self, t: NDArray[np.float64], piece: NDArray[np.int64], order: int) -> NDArray[np.float64]:
        """Position (order 0) or its 1st/2nd derivative in ``t`` at ``t`` on ``piece``, (m, 3)."""

    @property
    def n_pieces(self) -> int:
        """Number of pieces."""
        return len(self.straight)

    def piece_of(self, t: ArrayLike) -> NDArray[np.int64]:
        """Index of the piece each parameter lies on (the later piece on a break)."""
        idx = np.searchsorted(self.breaks, np.asarray(t, dtype=np.float64), side="right") - 1
        return np.clip(idx, 0, self.n_pieces - 1).astype(np.int64)

    def resolve(self, t: ArrayLike, piece: ArrayLike | None = None) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
        """Parameters as a 1-D array and the piece of each (given, or :meth:`piece_of`)."""
        t_arr = np.atleast_1d(np.asarray(t, dtype=np.float64)).reshape(-1)
        if piece is None:
            return t_arr, self.piece_of(t_arr)
        p_arr = np.broadcast_to(np.asarray(piece, dtype=np.int64), t_arr.shape)
        return t_arr, p_arr

    def position(self, t: ArrayLike, piece: ArrayLike | None = None) -> NDArray[np.float64]:
        """Points at parameters ``t``, shape (m, 3), m."""
        return self._evaluate(*self.resolve(t, piece), 0)

    def derivative(self, t: ArrayLike, piece: ArrayLike | None = None) -> NDArray[np.float64]:
        """d position / dt at ``t``, shape (m, 3)."""
        return self._evaluate(*self.resolve(t, piece), 1)

    def second_derivative(self, t: ArrayLike, piece: ArrayLike | None = None) -> NDArray[np.float64]:
        """d^2 position / dt^2 at ``t``, shape (m, 3)."""
        return self._evaluate(*self.resolve(t, piece), 2)

    def tangent(self, t: ArrayLike, piece: ArrayLike | None = None) -> NDArray[np.float64]:
        """Unit tangent (direction of current) at ``t``, shape (m, 3)."""
        return unit_rows(self.derivative(t, piece))

    def curvature(self, t: ArrayLike, piece: ArrayLike | None = None) -> NDArray[np.float64]:
        """Curvature vector d(tangent)/d(arc length) at ``t``, shape (m, 3), 1/m.

        Its length is 1/(radius of curvature); it points to the centre of curvature.
        """
        t_arr, p_arr = self.resolve(t, piece)
        d1 = self._evaluate(t_arr, p_arr, 1)
        d2 = self._evaluate(t_arr, p_arr, 2)
        speed2 = rows_dot(d1, d1)
        normal_part = d2 - (rows_dot(d1, d2) / np.where(speed2 > 0.0, speed2, 1.0))[:, None] * d1
        return normal_part / np.where(speed2 > 0.0, speed2, np.inf)[:, None]

    def grid(self, counts: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
        """Uniform parameter grid with ``counts[k]`` intervals on piece k.

        Returns the nodes, shape (n + 1,), each break once and both ends included, and the
        piece of each interval, shape (n,), where n = sum(counts).
        """
        counts = np.asarray(counts, dtype=np.int64)
        piece = np.repeat(np.arange(self.n_pieces, dtype=np.int64), counts)
        first = np.cumsum(counts) - counts
        step = np.arange(len(piece)) - first[piece]
        widths = np.diff(self.breaks)
        nodes = self.breaks[piece] + widths[piece] * (step / counts[piece])
        return np.append(nodes, self.t_end), piece

    def sample_counts(self, per_curved_piece: int) -> NDArray[np.int64]:
        """Sample intervals per piece for :meth:`sample`: 1 on a straight piece, else ``per_curved_piece``."""
        return np.where(self.straight, 1, per_curved_piece).astype(np.int64)

    def sample(self, per_curved_piece: int = SAMPLES_PER_CURVED_PIECE) -> NDArray[np.float64]:
        """Points along the curve: every break, and about ``per_curved_piece`` intervals per curved
        piece (per turn, for a piece that winds more than once round)."""
        nodes, piece = self.grid(self.sample_counts(per_curved_piece))
        return self.position(nodes[:-1], piece)

    def size(self) -> float:
        """Bounding-box diagonal of the curve (from :meth:`sample`), m."""
        pts = self.sample()
        return float(np.linalg.norm(pts.max(axis=0) - pts.min(axis=0)))

    def length(self) -> float:
        """Arc length, m (Gauss-Legendre quadrature of the speed on each piece)."""
        x, w = np.polynomial.legendre.leggauss(LENGTH_NODES)
        total = 0.0
        for k in range(self.n_pieces):
            edges = np.linspace(self.breaks[k], self.breaks[k + 1], LENGTH_PANELS + 1)
            half = 0.5 * np.diff(edges)
            t = (0.5 * (edges[:-1] + edges[1:]))[:, None] + half[:, None] * x[None, :]
            speed = np.linalg.norm(self.derivative(t.ravel(), k), axis=1).reshape(t.shape)
            total += float(np.sum(speed * w[None, :] * half[:, None]))
        return total

    def plane_normal(self) -> NDArray[np.float64] | None:
        """Unit normal about which the planar curve runs anticlockwise, or None if not planar.

        Examples
        --------
        >>> from fieldenergy.model import CirclePath
        >>> from fieldenergy.geometry import exact_curve
        >>> exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 2])).plane_normal().tolist()
        [0.0, 0.0, 1.0]
        """
        return None if self.normal is None else self.normal.copy()


@dataclass(frozen=True, eq=False)
class ChainCurve(Curve):
    """Lines, circular arcs and helical arcs end to end, parametrised by arc length.

    Piece k, at arc length s = t - breaks[k] from its start, is at
    ``centre + radius*(cos(omega*s)*e1 + sin(omega*s)*e2) + advance*s*e3``, with
    ``(radius*omega)^2 + advance^2 = 1``. A line has radius 0 and advance 1; an arc has
    advance 0. All per-piece arrays have n_pieces rows.
    """

    centre: NDArray[np.float64]
    e1: NDArray[np.float64]
    e2: NDArray[np.float64]
    e3: NDArray[np.float64]
    radius: NDArray[np.float64]
    omega: NDArray[np.float64]
    advance: NDArray[np.float64]

    def _evaluate(self, t: NDArray[np.float64], piece: NDArray[np.int64], order: int) -> NDArray[np.float64]:
        s = t - self.breaks[piece]
        r, w = self.radius[piece][:, None], self.omega[piece][:, None]
        angle = w * s[:, None]
        cos, sin = np.cos(angle), np.sin(angle)
        e1, e2 = self.e1[piece], self.e2[piece]
        if order == 0:
            axial = (self.advance[piece] * s)[:, None] * self.e3[piece]
            return self.centre[piece] + r * (cos * e1 + sin * e2) + axial
        if order == 1:
            return r * w * (cos * e2 - sin * e1) + self.advance[piece][:, None] * self.e3[piece]
        return -r * w * w * (cos * e1 + sin * e2)

    def length(self) -> float:
        """Arc length, m: the parameter range, since the parameter is arc length."""
        return float(self.t_end - self.t_start)

    def sample_counts(self, per_curved_piece: int) -> NDArray[np.int64]:
        """``per_curved_piece`` sample intervals per turn of each curved piece (at least that many)."""
        turns = np.abs(self.omega) * np.diff(self.breaks) / (2.0 * np.pi)
        counts = np.maximum(per_curved_piece, np.ceil(per_curved_piece * turns))
        return np.where(self.straight, 1, counts).astype(np.int64)


@dataclass(frozen=True, eq=False)
class ExpressionCurve(Curve):
    """A single-piece parametric curve ``(x(t), y(t), z(t))`` given by vectorised functions.

    The derivatives are 4th-order central differences (see :data:`DERIVATIVE_STEP`), so the
    functions are evaluated slightly outside ``[t_start, t_end]`` (by at most 0.4 % of the
    range) near the ends.
    """

    functions: tuple[Callable[[ArrayLike], NDArray[np.float64]], ...]

    def _xyz(self, t: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.stack([f(t) for f in self.functions], axis=-1)

    def _evaluate(self, t: NDArray[np.float64], piece: NDArray[np.int64], order: int) -> NDArray[np.float64]:
        span = self.t_end - self.t_start
        if order == 0:
            return self._xyz(t)
        if order == 1:
            h = DERIVATIVE_STEP * span
            f = [self._xyz(t + k * h) for k in (-2, -1, 1, 2)]
            return (f[0] - 8.0 * f[1] + 8.0 * f[2] - f[3]) / (12.0 * h)
        h = SECOND_DERIVATIVE_STEP * span
        f = [self._xyz(t + k * h) for k in (-2, -1, 0, 1, 2)]
        return (-f[0] + 16.0 * f[1] - 30.0 * f[2] + 16.0 * f[3] - f[4]) / (12.0 * h * h)


def fitted_normal(points: NDArray[np.float64], size: float) -> NDArray[np.float64] | None:
    """Normal of the plane of an ordered closed loop of points, or None if they are not coplanar.

    The normal is oriented so that the loop runs anticlockwise about it (its vector area,
    ``1/2 sum p_i x p_i+1``, points along it). Coplanar means every point lies within
    ``PLANAR_RTOL * size`` of the least-squares plane.

    Examples
    --------
    >>> square = np.array([[0, 0, 1], [0, 1, 1], [1, 1, 1], [1, 0, 1]], dtype=float)
    >>> (fitted_normal(square, 1.4).round(12) + 0.0).tolist()  # clockwise seen from +z
    [0.0, 0.0, -1.0]
    >>> fitted_normal(np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0.2]]), 1.4) is None
    True
    """
    centred = points - points.mean(axis=0)
    _, _, vh = np.linalg.svd(centred, full_matrices=False)
    normal = vh[-1]
    if np.max(np.abs(centred @ normal)) > PLANAR_RTOL * size:
        return None
    area = 0.5 * np.sum(np.cross(centred, np.roll(centred, -1, axis=0)), axis=0)
    return -normal if float(np.dot(area, normal)) < 0.0 else normal
