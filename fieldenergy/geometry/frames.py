"""Section frames: the two unit vectors (e_w across the width, e_h across the height) that
orient a conductor's cross-section along its centre line.

Together with the unit tangent T they form a right-handed orthonormal triad (T, e_w, e_h):
``e_w x e_h = T``.

* Planar path: e_h is the plane normal (about which the current runs anticlockwise) and
  e_w = e_h x T lies in the plane, pointing to the inside of a convex loop.
* Non-planar path: a rotation-minimising frame, computed by the double-reflection method
  (Wang, Juttler, Zheng & Liu, ACM Trans. Graph. 27(1), 2008) on a fine parameter grid that
  also holds every requested parameter. At a corner (a break where the tangent jumps) the
  frame is carried across by the smallest rotation taking the incoming tangent to the
  outgoing one. A closed curve's frame generally comes back rotated about the tangent (the
  curve's holonomy); that mismatch angle, taken in (-pi, pi], is spread linearly along the
  arc length so the section does not jump at the start (common practice). The frame starts
  with e_w along ``reference`` projected normal to the start tangent; by default along the
  curve's own default (for a saddle the azimuthal direction, so e_h is the cylinder's normal
  all along; for a helix the inward radial direction, as for a circle), else along the
  direction from the start point to the curve's centroid (inward, as for a planar loop).

A moved or reversed curve takes the frame of the curve it was made from, carried along by
the motion (a mirror also flips e_h, keeping the triad right-handed); reversal keeps e_w and
flips e_h. So a transform or a reversal moves no filament relative to the conductor.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import GeometryError
from fieldenergy.geometry._vectors import PARALLEL_RTOL, rows_dot, unit_rows
from fieldenergy.geometry.curves import Curve
from fieldenergy.geometry.transforms import MovedCurve, ReversedCurve

#: Tangent turning (rad) per step of the fine grid of a rotation-minimising frame. The double
#: reflection has a global error of order step^4, here ~1e-7 rad of twist.
RMF_STEP_ANGLE: float = 0.02

#: Fewest steps of the fine grid on a curved piece.
RMF_MIN_STEPS: int = 8

#: Tangent samples per curved piece used to estimate how far the piece turns.
TURNING_SAMPLES: int = 257

#: Tangent samples are doubled until consecutive ones differ by at most this angle (rad), so
#: the summed turning does not alias; at most this many samples are taken.
MAX_SAMPLE_TURN: float = 0.5
MAX_TURNING_SAMPLES: int = 1 << 22

#: Two grid points closer than this fraction of the curve size are the same point: the step
#: between them is a corner (or nothing), not a chord.
SAME_POINT_RTOL: float = 1.0e-9


def section_frame(
    curve: Curve,
    t: ArrayLike,
    reference: ArrayLike | None = None,
    piece: ArrayLike | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Unit vectors (e_w, e_h) across a conductor's section at parameters ``t``.

    Parameters
    ----------
    curve
        The exact centre line.
    t
        Parameters, shape (m,).
    reference
        Start direction of e_w for a non-planar curve (ignored for a planar one).
    piece
        Piece to evaluate on for parameters on a break (see :class:`Curve`).

    Returns
    -------
    e_w, e_h
        Shape (m, 3) each; (T, e_w, e_h) is right-handed and orthonormal.

    Raises
    ------
    GeometryError
        Where the curve has zero speed (its direction is undefined).

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    >>> e_w, e_h = section_frame(circle, [0.0])
    >>> (np.round(e_w, 12) + 0.0).tolist(), (e_h + 0.0).tolist()
    ([[-1.0, 0.0, 0.0]], [[0.0, 0.0, 1.0]])
    """
    t_arr, p_arr = curve.resolve(t, piece)
    if isinstance(curve, MovedCurve):
        base_ref = None if reference is None else curve.q.T @ np.asarray(reference, dtype=np.float64).reshape(3)
        e_w, e_h = section_frame(curve.base, t_arr, base_ref, p_arr)
        return e_w @ curve.q.T, math.copysign(1.0, float(np.linalg.det(curve.q))) * (e_h @ curve.q.T)
    if isinstance(curve, ReversedCurve):
        e_w, e_h = section_frame(curve.base, curve.t_start + curve.t_end - t_arr, reference, curve.n_pieces - 1 - p_arr)
        return e_w, -e_h
    normal = curve.plane_normal()
    if normal is None:
        e_w, e_h, _ = rotation_minimising_frame(curve, t_arr, reference, p_arr)
        return e_w, e_h
    tangent, _ = _checked_tangent(curve, t_arr, p_arr)
    e_w = unit_rows(np.cross(normal, tangent))
    return e_w, np.cross(tangent, e_w)


def rotation_minimising_frame(
    curve: Curve,
    t: ArrayLike,
    reference: ArrayLike | None = None,
    piece: ArrayLike | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], float]:
    """Closed rotation-minimising frame (e_w, e_h) at ``t``, and the closure angle spread along it.

    See the module docstring for the method. The returned angle (rad, in (-pi, pi]) is the
    rotation about the tangent added over the whole curve: e_w turns about T at the constant
    rate angle / length.

    Examples
    --------
    >>> from fieldenergy.model import SaddlePath
    >>> from fieldenergy.geometry import exact_curve
    >>> saddle = exact_curve(SaddlePath(0.1, 0.4, 2.0, [0, 0, 0], [0, 0, 1], [1, 0, 0]))
    >>> e_w, e_h, closure = rotation_minimising_frame(saddle, [0.0, 0.3], reference=[1, 0, 0])
    >>> abs(closure) < 1e-9
    True
    """
    t_req, p_req = curve.resolve(t, piece)
    t_fine, p_fine = _fine_nodes(curve)
    all_t, all_p = np.concatenate([t_fine, t_req]), np.concatenate([p_fine, p_req])
    order = np.lexsort((all_t, all_p))
    t_all, p_all = all_t[order], all_p[order]
    x = curve.position(t_all, p_all)
    tangent, speed = _checked_tangent(curve, t_all, p_all)
    n_loc, b_loc = _local_frames(tangent)
    same = SAME_POINT_RTOL * curve.size()
    steps = _transported(x[:-1], x[1:], tangent[:-1], tangent[1:], n_loc[:-1], b_loc[:-1], same)
    turn = np.arctan2(rows_dot(steps, b_loc[1:]), rows_dot(steps, n_loc[1:]))
    close = _transported(x[-1:], x[:1], tangent[-1:], tangent[:1], n_loc[-1:], b_loc[-1:], same)
    close_turn = float(np.arctan2(close[0] @ b_loc[0], close[0] @ n_loc[0]))
    psi0 = _start_angle(curve, x[0], tangent[0], n_loc[0], b_loc[0], reference)
    psi = psi0 + np.concatenate([[0.0], np.cumsum(turn)])
    mismatch = psi0 - (float(psi[-1]) + close_turn)
    closure = math.pi - (math.pi - mismatch) % (2.0 * math.pi)
    # arc length by the trapezoidal rule on the speed: exact where the parameter is arc length
    arc = np.concatenate([[0.0], np.cumsum(0.5 * (speed[1:] + speed[:-1]) * np.diff(t_all))])
    psi += closure * arc / arc[-1]
    e_w = np.cos(psi)[:, None] * n_loc + np.sin(psi)[:, None] * b_loc
    inverse = np.empty_like(order)
    inverse[order] = np.arange(len(order))
    pick = inverse[len(t_fine):]
    return e_w[pick], np.cross(tangent[pick], e_w[pick]), closure


def _checked_tangent(
    curve: Curve, t: NDArray[np.float64], piece: NDArray[np.int64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Unit tangents and speeds |d position / dt|; GeometryError where the speed is zero."""
    derivative = curve.derivative(t, piece)
    speed = np.linalg.norm(derivative, axis=1)
    tangent = unit_rows(derivative)
    zero = np.flatnonzero(rows_dot(tangent, tangent) < 0.5)
    if zero.size:
        raise GeometryError(
            f"the path has zero speed at t = {float(t[zero[0]]):.6g}; its direction, and so the "
            "section frame, is undefined there"
        )
    return tangent, speed


def _fine_nodes(curve: Curve) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
    """Grid of every piece with both its ends (each break appears once per side)."""
    counts = np.ones(curve.n_pieces, dtype=np.int64)
    for k in np.flatnonzero(~curve.straight):
        counts[k] = max(RMF_MIN_STEPS, math.ceil(_turning(curve, int(k)) / RMF_STEP_ANGLE))
    piece = np.repeat(np.arange(curve.n_pieces, dtype=np.int64), counts + 1)
    first = np.cumsum(counts + 1) - (counts + 1)
    step = np.arange(len(piece)) - first[piece]
    widths = np.diff(curve.breaks)
    return curve.breaks[piece] + widths[piece] * (step / counts[piece]), piece


def _turning(curve: Curve, k: int) -> float:
    """Total turning (rad) of the tangent along piece k, from samples fine enough to follow it."""
    n = max(TURNING_SAMPLES, int(curve.sample_counts(TURNING_SAMPLES)[k]) + 1)
    while True:
        tangent = curve.tangent(np.linspace(curve.breaks[k], curve.breaks[k + 1], n), k)
        steps = np.arccos(np.clip(rows_dot(tangent[:-1], tangent[1:]), -1.0, 1.0))
        if steps.max() <= MAX_SAMPLE_TURN or n > MAX_TURNING_SAMPLES:
            return float(steps.sum())
        n = 2 * n - 1


def _local_frames(tangent: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """An orthonormal pair (N, B) normal to each tangent, with T x N = B (not smooth: only a basis)."""
    axis = np.zeros_like(tangent)
    axis[np.arange(len(tangent)), np.argmin(np.abs(tangent), axis=1)] = 1.0
    n_loc = unit_rows(np.cross(axis, tangent))
    return n_loc, np.cross(tangent, n_loc)


def _transported(
    x0: NDArray[np.float64],
    x1: NDArray[np.float64],
    t0: NDArray[np.float64],
    t1: NDArray[np.float64],
    r0: NDArray[np.float64],
    spare: NDArray[np.float64],
    same: float,
) -> NDArray[np.float64]:
    """Carry the normal vectors ``r0`` from (x0, t0) to (x1, t1) by two reflections.

    The first reflection is in the plane normal to the chord x1 - x0 (or, when the points
    coincide, to t0 + t1, which makes the pair the smallest rotation taking t0 to t1; at a
    full reversal, to ``spare``); the second takes the reflected tangent onto t1.
    """
    u1 = x1 - x0
    corner = rows_dot(u1, u1) <= same * same
    u1 = np.where(corner[:, None], t0 + t1, u1)
    c1 = rows_dot(u1, u1)
    u1 = np.where((c1 <= 1e-24)[:, None], spare, u1)
    c1 = rows_dot(u1, u1)
    r_l = r0 - (2.0 * rows_dot(u1, r0) / c1)[:, None] * u1
    t_l = t0 - (2.0 * rows_dot(u1, t0) / c1)[:, None] * u1
    u2 = t1 - t_l
    c2 = rows_dot(u2, u2)
    factor = np.divide(2.0 * rows_dot(u2, r_l), c2, out=np.zeros_like(c2), where=c2 > 1e-24)
    return r_l - factor[:, None] * u2


def _start_angle(
    curve: Curve,
    x0: NDArray[np.float64],
    t0: NDArray[np.float64],
    n0: NDArray[np.float64],
    b0: NDArray[np.float64],
    reference: ArrayLike | None,
) -> float:
    """Angle of the starting e_w in the local basis (n0, b0)."""
    if reference is None and curve.reference is not None:
        ref = curve.reference
    elif reference is None:
        ref = curve.sample().mean(axis=0) - x0
    else:
        ref = np.asarray(reference, dtype=np.float64).reshape(3)
    part = ref - float(ref @ t0) * t0
    degenerate = not np.all(np.isfinite(part)) or np.linalg.norm(part) <= PARALLEL_RTOL * np.linalg.norm(ref)
    if degenerate and reference is not None:
        raise GeometryError(
            f"section reference {ref.tolist()} must be a finite direction not along the path's start "
            f"tangent {np.round(t0, 12).tolist()}"
        )
    if degenerate:
        part = n0
    return float(np.arctan2(part @ b0, part @ n0))
