"""Rigid transforms of curves, reversal, and the instances of a coil (transforms, reverse, repeat).

A moved curve wraps its base curve with an orthogonal matrix Q (det +1 for a rotation, -1 for
a mirror) and an offset o: position = Q p + o, derivatives = Q p', Q p''. The plane normal,
a pseudovector (the direction about which the current circulates), becomes det(Q) Q n.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import GeometryError
from fieldenergy.geometry._vectors import finite_vector, unit_vector, where
from fieldenergy.geometry.curves import Curve
from fieldenergy.geometry.kinds import exact_curve
from fieldenergy.model.case import Coil
from fieldenergy.model.transforms import (
    LinearRepeat,
    Mirror,
    Repeat,
    Rotate,
    RotationalRepeat,
    Transform,
    Translate,
)


@dataclass(frozen=True, eq=False)
class MovedCurve(Curve):
    """``base`` moved rigidly: position = q @ p + offset (q orthogonal, det +-1)."""

    base: Curve
    q: NDArray[np.float64]
    offset: NDArray[np.float64]

    def _evaluate(self, t: NDArray[np.float64], piece: NDArray[np.int64], order: int) -> NDArray[np.float64]:
        out = self.base._evaluate(t, piece, order) @ self.q.T
        return out + self.offset if order == 0 else out

    def length(self) -> float:
        """Arc length of the base curve, m (a rigid motion keeps it)."""
        return self.base.length()

    def sample_counts(self, per_curved_piece: int) -> NDArray[np.int64]:
        """Those of the base curve."""
        return self.base.sample_counts(per_curved_piece)


@dataclass(frozen=True, eq=False)
class ReversedCurve(Curve):
    """``base`` run backwards: position(t) = base.position(t_start + t_end - t)."""

    base: Curve

    def _evaluate(self, t: NDArray[np.float64], piece: NDArray[np.int64], order: int) -> NDArray[np.float64]:
        out = self.base._evaluate(self.t_start + self.t_end - t, self.n_pieces - 1 - piece, order)
        return -out if order == 1 else out

    def length(self) -> float:
        """Arc length of the base curve, m."""
        return self.base.length()

    def sample_counts(self, per_curved_piece: int) -> NDArray[np.int64]:
        """Those of the base curve, in reversed piece order."""
        return self.base.sample_counts(per_curved_piece)[::-1].copy()


def rotation_matrix(axis: ArrayLike, angle: float) -> NDArray[np.float64]:
    """Matrix of a right-handed rotation by ``angle`` (rad) about ``axis`` (Rodrigues' formula).

    R = I + sin(angle) K + (1 - cos(angle)) K^2, where K is the cross-product matrix of the
    unit axis.

    Raises
    ------
    GeometryError
        If ``axis`` is zero or not finite.

    Examples
    --------
    >>> np.round(rotation_matrix([0, 0, 1], np.pi / 2) @ [1.0, 0.0, 0.0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    k = unit_vector(axis, "rotation axis", None)
    cross = np.array([[0.0, -k[2], k[1]], [k[2], 0.0, -k[0]], [-k[1], k[0], 0.0]])
    return np.eye(3) + math.sin(angle) * cross + (1.0 - math.cos(angle)) * (cross @ cross)


def transform_map(transform: Transform, name: str | None = None) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The (Q, o) of a transform record: a point p goes to Q p + o.

    Examples
    --------
    >>> q, o = transform_map(Translate([1.0, 2.0, 3.0]))
    >>> (q @ [0.0, 0.0, 0.0] + o).tolist()
    [1.0, 2.0, 3.0]
    """
    if isinstance(transform, Translate):
        return np.eye(3), finite_vector(transform.offset, "translation offset", name)
    if isinstance(transform, Rotate):
        angle = float(transform.angle)
        if not math.isfinite(angle):
            raise GeometryError(f"{where(name)}: rotation angle must be finite, got {transform.angle!r}")
        q = rotation_matrix(unit_vector(transform.axis, "rotation axis", name), angle)
        origin = finite_vector(transform.origin, "rotation origin", name)
        return q, origin - q @ origin
    if isinstance(transform, Mirror):
        n = unit_vector(transform.normal, "mirror normal", name)
        origin = finite_vector(transform.origin, "mirror origin", name)
        return np.eye(3) - 2.0 * np.outer(n, n), 2.0 * float(np.dot(origin, n)) * n
    raise GeometryError(f"{where(name)}: unsupported transform {type(transform).__name__}; expected Translate, Rotate or Mirror")


def moved(curve: Curve, q: NDArray[np.float64], offset: NDArray[np.float64]) -> Curve:
    """``curve`` moved by p -> q p + offset; nested moves are folded into one.

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    >>> twice = moved(moved(circle, np.eye(3), np.array([0.0, 0.0, 1.0])), np.eye(3), np.array([0.0, 0.0, 1.0]))
    >>> twice.base is circle, twice.position(0.0).tolist()
    (True, [[1.0, 0.0, 2.0]])
    """
    if isinstance(curve, MovedCurve):
        q, offset, curve = q @ curve.q, q @ curve.offset + offset, curve.base
    normal = None if curve.normal is None else math.copysign(1.0, float(np.linalg.det(q))) * (q @ curve.normal)
    return MovedCurve(
        t_start=curve.t_start, t_end=curve.t_end, breaks=curve.breaks, straight=curve.straight,
        normal=normal, reference=None if curve.reference is None else q @ curve.reference,
        base=curve, q=q, offset=offset,
    )


def transformed(curve: Curve, transform: Transform, name: str | None = None) -> Curve:
    """``curve`` under a Translate, Rotate or Mirror record; the original is left unchanged.

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    >>> shifted = transformed(circle, Translate([0.0, 0.0, 2.0]))
    >>> shifted.position(0.0).tolist()
    [[1.0, 0.0, 2.0]]
    """
    q, offset = transform_map(transform, name)
    return moved(curve, q, offset)


def reversed_curve(curve: Curve) -> Curve:
    """``curve`` run the other way (current direction flipped); reversing twice gives it back.

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    >>> (np.round(reversed_curve(circle).derivative(0.0), 12) + 0.0).tolist()
    [[0.0, -1.0, 0.0]]
    """
    if isinstance(curve, ReversedCurve):
        return curve.base
    breaks = (curve.t_start + curve.t_end) - curve.breaks[::-1]
    breaks[0], breaks[-1] = curve.t_start, curve.t_end
    return ReversedCurve(
        t_start=curve.t_start, t_end=curve.t_end, breaks=breaks, straight=curve.straight[::-1].copy(),
        normal=None if curve.normal is None else -curve.normal, reference=curve.reference, base=curve,
    )


def repeat_maps(repeat: Repeat | None, name: str | None = None) -> list[tuple[NDArray[np.float64], NDArray[np.float64]]]:
    """The (Q, o) of each copy of a repeat; copy 0 is the identity.

    Examples
    --------
    >>> maps = repeat_maps(LinearRepeat(3, [0.0, 0.0, 0.5]))
    >>> [o.tolist() for _, o in maps]
    [[0.0, 0.0, 0.0], [0.0, 0.0, 0.5], [0.0, 0.0, 1.0]]
    """
    if repeat is None:
        return [(np.eye(3), np.zeros(3))]
    count = repeat.count
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or count < 1:
        raise GeometryError(f"{where(name)}: repeat count must be an integer >= 1, got {count!r}")
    if isinstance(repeat, LinearRepeat):
        step = finite_vector(repeat.step, "repeat step", name)
        return [(np.eye(3), k * step) for k in range(count)]
    if isinstance(repeat, RotationalRepeat):
        axis = unit_vector(repeat.axis, "repeat axis", name)
        origin = finite_vector(repeat.origin, "repeat origin", name)
        maps = []
        for k in range(count):
            q = rotation_matrix(axis, 2.0 * math.pi * k / count)
            maps.append((q, origin - q @ origin))
        return maps
    raise GeometryError(f"{where(name)}: unsupported repeat {type(repeat).__name__}; expected RotationalRepeat or LinearRepeat")


def instance_name(coil_name: str, copy: int) -> str:
    """Name of copy ``copy`` (0-based) of a coil: ``name`` for copy 0, then ``name[2]``, ``name[3]``, ...

    Examples
    --------
    >>> [instance_name("tf", k) for k in range(3)]
    ['tf', 'tf[2]', 'tf[3]']
    """
    return coil_name if copy == 0 else f"{coil_name}[{copy + 1}]"


def coil_instances(coil: Coil) -> list[tuple[str, Curve]]:
    """The exact centre line of each instance of a coil, with its name.

    The coil's ``transforms`` are applied to its path in order, then ``reverse`` if set, then
    the repeat: copy 0 is the coil itself, copy k is moved by the repeat's k-th map. Copies are
    named by :func:`instance_name` (``c``, ``c[2]``, ``c[3]``, ...: the k-th copy counted from 1).

    Raises
    ------
    GeometryError
        From :func:`exact_curve`, or for a degenerate transform or repeat.

    Examples
    --------
    >>> from fieldenergy.model import Coil, CirclePath, RoundSection
    >>> coil = Coil("c", "main", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]),
    ...             repeat=LinearRepeat(2, [0, 0, 0.05]))
    >>> [name for name, _ in coil_instances(coil)]
    ['c', 'c[2]']
    """
    curve = exact_curve(coil.path, coil.name)
    for transform in coil.transforms:
        curve = transformed(curve, transform, coil.name)
    if coil.reverse:
        curve = reversed_curve(curve)
    out: list[tuple[str, Curve]] = []
    for k, (q, offset) in enumerate(repeat_maps(coil.repeat, coil.name)):
        out.append((instance_name(coil.name, k), curve if k == 0 else moved(curve, q, offset)))
    return out


def mapped_direction(curve: Curve, direction: ArrayLike) -> NDArray[np.float64]:
    """A direction given in the frame of a curve's path, as seen on the (moved) curve.

    Walks the wrappers of ``curve`` and applies each rotation or mirror; reversal leaves a
    direction alone. Used for a coil's section ``reference``.

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1]))
    >>> turned = transformed(circle, Rotate([0, 0, 1], np.pi, [0, 0, 0]))
    >>> np.round(mapped_direction(turned, [1.0, 0.0, 0.0]), 12).tolist()
    [-1.0, 0.0, 0.0]
    """
    vector = np.asarray(direction, dtype=np.float64).reshape(3)
    if isinstance(curve, MovedCurve):
        return curve.q @ mapped_direction(curve.base, vector)
    if isinstance(curve, ReversedCurve):
        return mapped_direction(curve.base, vector)
    return vector
