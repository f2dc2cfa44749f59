"""Cut an exact curve into chords: the parameter grid of a coil instance's segments.

Every break is a chord end. A straight piece is one chord (it is exact). A curved piece is
cut into n uniform parameter steps, n chosen so that the chord sagitta (largest distance
between a chord and the curve it spans) is at most the tolerance and consecutive chords turn
by at most ``max_angle``: first estimated from the sampled curvature (sagitta ~ kappa l^2 / 8,
turning ~ kappa l for a chord of length l), then checked by sampling the curve between the
chord ends, and raised where the check fails. Level k multiplies the chord count of every
curved piece by 2^k, so the grids are nested and the sagitta falls as 4^-k.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import MAX_SEGMENTS_PER_COIL
from fieldenergy.errors import DiscretisationError, FieldEnergyWarning
from fieldenergy.geometry import Curve
from fieldenergy.geometry._vectors import rows_dot, where

#: Curvature samples per curved piece for the first estimate of its chord count.
ESTIMATE_SAMPLES: int = 257

#: Samples where the curve moves slower than this fraction of its top speed are left out of
#: the curvature estimate: their chords are that much shorter, so their sagitta a million times
#: smaller at equal curvature, and the numerical curvature of a nearly stationary point is noise.
#: The sampled check still covers them.
SLOW_SPEED_FRACTION: float = 1.0e-3

#: Fewest chords on a curved piece: one chord would join a closed piece's ends to themselves.
MIN_CURVED_CHORDS: int = 2

#: Points sampled inside each chord to measure its sagitta (at fractions k/8, k = 1..7:
#: the midpoint, where the sagitta of a circular arc lies, is among them).
SAGITTA_FRACTIONS: NDArray[np.float64] = np.arange(1, 8) / 8.0

#: Chords per block when measuring sagittas, to bound memory on large grids.
SAGITTA_BLOCK: int = 1 << 16

#: Rounds of the check-and-raise loop; the curvature estimate is usually right first time.
MAX_REFINE_ROUNDS: int = 30

#: Growth margin when a check fails, so one more round usually suffices.
REFINE_MARGIN: float = 1.1


@dataclass(frozen=True, slots=True, eq=False)
class ChordGrid:
    """Chord end parameters of a curve.

    Attributes
    ----------
    t
        Chord end parameters, shape (n + 1,), from ``t_start`` to ``t_end``.
    piece
        Piece of each chord, shape (n,).
    counts
        Chords on each piece, shape (n_pieces,).
    sagitta
        Largest measured chord sagitta, m.
    turn
        Largest turning angle between consecutive chords of one piece, rad.
    """

    t: NDArray[np.float64]
    piece: NDArray[np.int64]
    counts: NDArray[np.int64]
    sagitta: float
    turn: float

    @property
    def n_chords(self) -> int:
        """Number of chords."""
        return len(self.piece)


def chord_grid(
    curve: Curve, tolerance: float, max_angle: float, level: int = 0, name: str | None = None
) -> ChordGrid:
    """Chord parameters of ``curve`` meeting a sagitta ``tolerance`` (m) and ``max_angle`` (rad).

    Parameters
    ----------
    curve
        The exact curve.
    tolerance
        Largest chord sagitta at level 0, m.
    max_angle
        Largest turning angle between consecutive chords at level 0, rad.
    level
        Refinement level: curved pieces get 2^level times the level-0 chords.
    name
        Coil instance name, for error messages.

    Raises
    ------
    DiscretisationError
        If more than ``MAX_SEGMENTS_PER_COIL`` chords would be needed, or settings are invalid.

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1]))
    >>> grid = chord_grid(circle, 1e-3, 0.5)
    >>> grid.n_chords, grid.sagitta <= 1e-3
    (71, True)
    >>> chord_grid(circle, 1e-3, 0.5, level=2).n_chords
    284
    """
    if not (math.isfinite(tolerance) and tolerance > 0.0):
        raise DiscretisationError(f"{where(name)}: sagitta tolerance must be finite and > 0 m, got {tolerance!r}")
    if not (math.isfinite(max_angle) and 0.0 < max_angle <= 0.5 * math.pi):
        raise DiscretisationError(f"{where(name)}: max_angle must be in (0, pi/2] rad, got {max_angle!r}")
    if isinstance(level, bool) or not isinstance(level, (int, np.integer)) or level < 0:
        raise DiscretisationError(f"{where(name)}: refinement level must be an integer >= 0, got {level!r}")
    curved = np.flatnonzero(~curve.straight)
    counts = np.ones(curve.n_pieces, dtype=np.int64)
    for k in curved:
        counts[k] = _estimate(curve, int(k), tolerance, max_angle)
    counts, t, piece, sagitta, turn = _refined(curve, counts, tolerance, max_angle, name)
    if level > 0:
        _check_count(counts, tolerance, name, scale=np.where(curve.straight, 1, 2**level))
        counts[curved] *= 2**level
        t, piece = curve.grid(counts)
        sagitta, turn = chord_sagittas(curve, t, piece), chord_turns(curve, t, piece)
    return ChordGrid(t, piece, counts, float(sagitta.max()), float(turn.max()) if turn.size else 0.0)


def _refined(
    curve: Curve, counts: NDArray[np.int64], tolerance: float, max_angle: float, name: str | None
) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """Raise chord counts until the sampled sagitta and turning limits hold on every piece.

    A piece whose largest turning angle does not fall as its chords multiply has a corner or
    cusp inside it (possible in an expression curve); the angle limit is then dropped for it,
    with a warning, and only the sagitta limit applies.
    """
    corner = np.zeros(curve.n_pieces, dtype=bool)
    previous: tuple[NDArray[np.int64], NDArray[np.float64]] | None = None
    for _ in range(MAX_REFINE_ROUNDS):
        _check_count(counts, tolerance, name)
        t, piece = curve.grid(counts)
        sagitta, turn = chord_sagittas(curve, t, piece), chord_turns(curve, t, piece)
        starts = np.cumsum(counts) - counts
        turn_need = np.maximum.reduceat(np.append(turn, 0.0), starts) / max_angle
        if previous is not None:
            growth = counts / previous[0]
            stuck = (turn_need > 1.0) & (growth >= 1.2) & (turn_need > 0.5 * (1.0 + 1.0 / growth) * previous[1])
            _warn_corners(curve, t, turn, piece, stuck & ~corner, name)
            corner |= stuck
        need = np.maximum(np.maximum.reduceat(np.sqrt(sagitta / tolerance), starts), np.where(corner, 0.0, turn_need))
        grow = (need > 1.0) & ~curve.straight
        if not grow.any():
            break
        previous = (counts.copy(), turn_need)
        counts[grow] = np.maximum(counts[grow] + 1, np.ceil(counts[grow] * need[grow] * REFINE_MARGIN)).astype(np.int64)
    return counts, t, piece, sagitta, turn


def _warn_corners(
    curve: Curve,
    t: NDArray[np.float64],
    turn: NDArray[np.float64],
    piece: NDArray[np.int64],
    pieces: NDArray[np.bool_],
    name: str | None,
) -> None:
    for k in np.flatnonzero(pieces):
        on_piece = np.flatnonzero(piece[:-1] == k)
        j = int(on_piece[np.argmax(turn[on_piece])])
        warnings.warn(
            f"{where(name)}: the path turns by {turn[j]:.3g} rad near t = {t[j + 1]:.6g} however finely it "
            "is cut (a corner or cusp inside a piece); the turning-angle limit is not applied there, the "
            "sagitta limit still is",
            FieldEnergyWarning,
            stacklevel=4,
        )


def chord_sagittas(curve: Curve, t: NDArray[np.float64], piece: NDArray[np.int64]) -> NDArray[np.float64]:
    """Sampled sagitta of each chord (largest distance of the curve from the chord), shape (n,).

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1]))
    >>> t, piece = circle.grid([4])
    >>> np.round(chord_sagittas(circle, t, piece), 12).tolist()  # 1 - cos(pi/4)
    [0.292893218813, 0.292893218813, 0.292893218813, 0.292893218813]
    """
    out = np.empty(len(piece))
    for lo in range(0, len(piece), SAGITTA_BLOCK):
        hi = min(lo + SAGITTA_BLOCK, len(piece))
        a = curve.position(t[lo:hi], piece[lo:hi])
        b = curve.position(t[lo + 1 : hi + 1], piece[lo:hi])
        ts = t[lo:hi, None] + SAGITTA_FRACTIONS[None, :] * (t[lo + 1 : hi + 1] - t[lo:hi])[:, None]
        p = curve.position(ts.ravel(), np.repeat(piece[lo:hi], len(SAGITTA_FRACTIONS)))
        p = p.reshape(hi - lo, len(SAGITTA_FRACTIONS), 3)
        chord = b - a
        c2 = rows_dot(chord, chord)
        rel = p - a[:, None, :]
        s = np.einsum("ijk,ik->ij", rel, chord) / np.where(c2 > 0.0, c2, 1.0)[:, None]
        off = rel - np.clip(s, 0.0, 1.0)[:, :, None] * chord[:, None, :]
        out[lo:hi] = np.sqrt(np.max(np.einsum("ijk,ijk->ij", off, off), axis=1))
    return out


def chord_turns(curve: Curve, t: NDArray[np.float64], piece: NDArray[np.int64]) -> NDArray[np.float64]:
    """Turning angle from each chord to the next one on the same piece, shape (n - 1,) (0 across breaks).

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1]))
    >>> t, piece = circle.grid([8])
    >>> np.round(chord_turns(circle, t, piece) / (np.pi / 4), 12).tolist()
    [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0]
    """
    nodes = curve.position(t[:-1], piece)
    nodes = np.vstack([nodes, curve.position(t[-1:], piece[-1:])])
    chords = np.diff(nodes, axis=0)
    norms = np.linalg.norm(chords, axis=1)
    both = norms[:-1] * norms[1:]
    cos = np.divide(rows_dot(chords[:-1], chords[1:]), both, out=np.ones_like(both), where=both > 0.0)
    turns = np.arccos(np.clip(cos, -1.0, 1.0))  # a zero-length chord has no direction: no turn
    return np.where(piece[:-1] == piece[1:], turns, 0.0)


def _estimate(curve: Curve, k: int, tolerance: float, max_angle: float) -> int:
    """Chords on curved piece k from its sampled curvature."""
    lo, hi = float(curve.breaks[k]), float(curve.breaks[k + 1])
    t = np.linspace(lo, hi, ESTIMATE_SAMPLES)
    d1, d2 = curve.derivative(t, k), curve.second_derivative(t, k)
    speed = np.linalg.norm(d1, axis=1)
    bend = np.linalg.norm(np.cross(d1, d2), axis=1)  # kappa * speed^3
    moving = (speed > SLOW_SPEED_FRACTION * speed.max()) & (bend > 0.0)
    if not moving.any():
        return MIN_CURVED_CHORDS
    # parameter step h: sagitta kappa (speed h)^2 / 8 <= tol, turning kappa speed h <= max_angle
    h_sagitta = np.sqrt(8.0 * tolerance * speed[moving] / bend[moving])
    h_angle = max_angle * speed[moving] ** 2 / bend[moving]
    step = float(min(h_sagitta.min(), h_angle.min()))
    return min(MAX_SEGMENTS_PER_COIL + 1, max(MIN_CURVED_CHORDS, math.ceil((hi - lo) / step)))


def _check_count(
    counts: NDArray[np.int64], tolerance: float, name: str | None, scale: NDArray[np.int64] | None = None
) -> None:
    # Python integers, so a high level cannot overflow before the check
    factors = [1] * len(counts) if scale is None else [int(f) for f in scale]
    total = sum(int(c) * f for c, f in zip(counts, factors))
    if total > MAX_SEGMENTS_PER_COIL:
        raise DiscretisationError(
            f"{where(name)}: sagitta tolerance {tolerance:.3g} m needs {total} chords, more than the "
            f"limit of {MAX_SEGMENTS_PER_COIL}; use a larger sagitta (check its unit) or a lower level"
        )
