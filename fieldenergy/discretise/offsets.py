"""Filament points across a section: section frames at the chord ends, mitred corners, fold check.

A filament at section offset (u, v) passes through ``position(t) + u e_w(t) + v e_h(t)`` at
each chord end t, so all filaments of a pack share the chord parameters. Where the path has a
corner (a break where the tangent jumps), the filament's two chords are offset along the frames
of the incoming and outgoing pieces, and they meet at the mitre point: the one point whose
offset seen normal to each of the two tangents is (u, v). Each filament is then made of
chords parallel to the centre line's chords at the right distance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.discretise.chords import ChordGrid
from fieldenergy.discretise.sections import SectionLayout
from fieldenergy.errors import GeometryError
from fieldenergy.geometry import Curve, section_frame
from fieldenergy.geometry._vectors import rows_dot, where

#: A corner turning by less than about 1e-5 rad (1 - cos^2 below this) is treated as smooth:
#: the mitre would move a filament by less than 1e-10 of its offset.
MITRE_SMOOTH: float = 1.0e-10


@dataclass(frozen=True, slots=True, eq=False)
class NodeFrames:
    """Section frames at the chord ends of one coil instance.

    Attributes
    ----------
    e_w, e_h
        Frames at chord ends 0..n-1 on the piece of the chord starting there, shape (n, 3).
    joints
        Chord ends where the piece changes (always including 0, where the loop closes), shape (b,).
    left_w, left_h
        Frames at the joints on the piece of the chord ending there, shape (b, 3).
    """

    e_w: NDArray[np.float64]
    e_h: NDArray[np.float64]
    joints: NDArray[np.int64]
    left_w: NDArray[np.float64]
    left_h: NDArray[np.float64]


def node_frames(curve: Curve, grid: ChordGrid, reference: NDArray[np.float64] | None, name: str) -> NodeFrames:
    """Section frames at every chord end, both sides of each joint, in one frame evaluation.

    Examples
    --------
    >>> from fieldenergy.model import PolygonPath
    >>> from fieldenergy.geometry import exact_curve
    >>> from fieldenergy.discretise.chords import chord_grid
    >>> square = exact_curve(PolygonPath([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]]))
    >>> frames = node_frames(square, chord_grid(square, 1e-3, 0.2), None, "sq")
    >>> frames.joints.tolist(), (frames.e_w[0] + 0.0).tolist(), (frames.left_w[0] + 0.0).tolist()
    ([0, 1, 2, 3], [0.0, 1.0, 0.0], [1.0, 0.0, 0.0])
    """
    n = grid.n_chords
    joints = np.concatenate([[0], 1 + np.flatnonzero(grid.piece[1:] != grid.piece[:-1])])
    left_piece = grid.piece[(joints - 1) % n]
    left_t = np.where(joints == 0, grid.t[-1], grid.t[joints])
    t_all = np.concatenate([grid.t[:-1], left_t])
    p_all = np.concatenate([grid.piece, left_piece])
    try:
        e_w, e_h = section_frame(curve, t_all, reference, p_all)
    except GeometryError as exc:
        raise GeometryError(f"{where(name)}: {exc}") from None
    return NodeFrames(e_w[:n], e_h[:n], joints, e_w[n:], e_h[n:])


def node_offsets(frames: NodeFrames, offsets: NDArray[np.float64], name: str) -> NDArray[np.float64]:
    """Offset of each filament from the centre line at each chord end, shape (k, n + 1, 3).

    The last chord end repeats the first, so every filament closes exactly.

    Examples
    --------
    >>> from fieldenergy.model import PolygonPath
    >>> from fieldenergy.geometry import exact_curve
    >>> from fieldenergy.discretise.chords import chord_grid
    >>> square = exact_curve(PolygonPath([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]]))
    >>> frames = node_frames(square, chord_grid(square, 1e-3, 0.2), None, "sq")
    >>> node_offsets(frames, np.array([[0.1, 0.0]]), "sq")[0, 0].round(12).tolist()  # mitre
    [0.1, 0.1, 0.0]
    """
    u, v = offsets[:, 0, None, None], offsets[:, 1, None, None]
    out = u * frames.e_w[None] + v * frames.e_h[None]
    j = frames.joints
    o_left = u * frames.left_w[None] + v * frames.left_h[None]
    o_right = out[:, j]
    t_left = np.cross(frames.left_w, frames.left_h)
    t_right = np.cross(frames.e_w[j], frames.e_h[j])
    cos = rows_dot(t_left, t_right)
    sin2 = 1.0 - cos * cos
    cusp = (sin2 <= MITRE_SMOOTH) & (cos < 0.0)
    if cusp.any() and np.any(offsets):
        raise GeometryError(
            f"{where(name)}: the path turns back on itself at chord end {int(j[np.flatnonzero(cusp)[0]])}; "
            "a section cannot follow a full reversal"
        )
    smooth = sin2 <= MITRE_SMOOTH
    along = (np.einsum("kbi,bi->kb", o_right, t_left) + cos * np.einsum("kbi,bi->kb", o_left, t_right))
    along = np.divide(along, sin2, out=np.zeros_like(along), where=~smooth)
    mitre = o_left + along[:, :, None] * t_left[None]
    out[:, j] = np.where(smooth[None, :, None], 0.5 * (o_left + o_right), mitre)
    return np.concatenate([out, out[:, :1]], axis=1)


def check_fold(
    curve: Curve,
    grid: ChordGrid,
    centre: NDArray[np.float64],
    layout: SectionLayout,
    frames: NodeFrames | None,
    name: str,
) -> None:
    """Raise GeometryError where the section reaches past the centre of curvature.

    A filament at offset (u, v) runs on a radius of curvature R (1 - kappa . (u e_w + v e_h))
    where kappa is the curvature vector; the section folds where this reaches zero for a corner
    of the section: (w/2) |kappa . e_w| + (h/2) |kappa . e_h| >= 1 (radius a for a round section).
    kappa is the curve's own at each chord end, unless the chords meeting there (on one piece)
    turn less: then the chords' turning per length is used, so a numerical curvature spoilt by
    a corner inside an expression curve does not count (that corner is warned about already).
    ``centre`` holds the centre-line chord ends, shape (n + 1, 3).

    Examples
    --------
    >>> from fieldenergy.model import CirclePath, RoundSection
    >>> from fieldenergy.geometry import exact_curve
    >>> from fieldenergy.discretise.chords import chord_grid
    >>> from fieldenergy.discretise.sections import section_layout
    >>> ring = exact_curve(CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> grid = chord_grid(ring, 1e-4, 0.2)
    >>> check_fold(ring, grid, ring.position(grid.t), section_layout(RoundSection(0.2)), None, "ring")
    Traceback (most recent call last):
    ...
    fieldenergy.errors.GeometryError: coil 'ring': the section (0.4 x 0.4 m) is too large ...
    """
    curved = ~curve.straight[grid.piece]
    if not curved.any():
        return
    kappa = _node_curvature(curve, grid, centre)[curved]
    if frames is None:
        reach = layout.half_width * np.linalg.norm(kappa, axis=1)
    else:
        reach = layout.half_width * np.abs(rows_dot(kappa, frames.e_w[curved])) + layout.half_height * np.abs(
            rows_dot(kappa, frames.e_h[curved])
        )
    bad = np.flatnonzero(reach >= 1.0)
    if bad.size:
        i = int(bad[np.argmax(reach[bad])])
        radius = 1.0 / float(np.linalg.norm(kappa[i]))
        raise GeometryError(
            f"{where(name)}: the section ({2 * layout.half_width:.6g} x {2 * layout.half_height:.6g} m) is too "
            f"large for the path's bend at t = {float(grid.t[:-1][curved][i]):.6g}: radius of curvature "
            f"{radius:.6g} m, but the section reaches {reach[i] * radius:.6g} m towards the centre of "
            "curvature; the filaments would fold. Use a smaller section or a gentler path"
        )


def _node_curvature(curve: Curve, grid: ChordGrid, centre: NDArray[np.float64]) -> NDArray[np.float64]:
    """Curvature vector at chord ends 0..n-1 (the smaller of the curve's and the chords', see check_fold)."""
    point = curve.curvature(grid.t[:-1], grid.piece)
    chord = np.diff(centre, axis=0)
    length = np.linalg.norm(chord, axis=1)
    unit = chord / length[:, None]
    before = np.roll(np.arange(grid.n_chords), 1)
    discrete = 2.0 * (unit - unit[before]) / (length + length[before])[:, None]
    same = grid.piece[before] == grid.piece
    smaller = same & (rows_dot(discrete, discrete) < rows_dot(point, point))
    return np.where(smaller[:, None], discrete, point)
