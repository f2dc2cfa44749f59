"""Inductance matrices of large windings by fast summation of Neumann's double sum.

The direct A.J route (:mod:`fieldenergy.energy.from_potential`) evaluates all n^2 / 2 pair
integrals M_ij; for 10^5 segments and more that is minutes to hours. Here the same model is
summed in O(n log n):

* far pairs: each segment becomes :data:`SOURCES` Gauss point sources c_ia = (omega_a / 2)
  (b_i - a_i) w_i, and L_pq = mu0/(4 pi) sum_{i in p} sum_a c_ia . Phi_q(x_ia), where
  Phi_q(x) = sum_{j in q} sum_b c_jb / |x - x_jb| comes from the treecode of
  :mod:`fieldenergy.kernels._treecode` (one source tree per group);
* near pairs and the softened pairs of one stretch of a chain get Neumann's exact integral
  instead (:mod:`fieldenergy.kernels._neumann_fast`), so the result is the direct route's up
  to the treecode's tolerance and the softened tail left out beyond
  :data:`SOFT_REACH` GMDs (a relative change of at most 1 / (4 SOFT_REACH^2 ln(rho / g)) of a
  chain's self-inductance, rho its bend radius: below 1e-7 for SOFT_REACH = 500).

The difference between L_pq and L_qp (summed from opposite sides) is reported as an
indicator of the treecode's error; it understates it (measured 3.6e-6 against an error of
1.2e-5 at a cheaper setting), so the stated error of this route is the calibrated one of
:data:`ORDER`.

References
----------
L. Wilson, N. Vaughn and R. Krasny, Comput. Phys. Commun. 265, 108017 (2021): the treecode.
F. W. Grover, Inductance Calculations (1946): partial inductances of straight filaments.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import MU0_OVER_4PI
from fieldenergy.energy.from_potential import PAIR_RELATIVE_TOLERANCE, _checked, _checked_group
from fieldenergy.errors import GeometryError
from fieldenergy.fastfield import _midpoint_grid, segment_sources
from fieldenergy.kernels._neumann_fast import near_pair_corrections
from fieldenergy.kernels._treecode import SourceTree, tree_field
from fieldenergy.model.filaments import Filaments

#: Gauss point sources per segment. Pairs nearer than NEAR_RATIO lengths are exact, so the
#: rule's relative error on the nearest point-summed pair is about (2 NEAR_RATIO)^(-2 SOURCES).
SOURCES: int = 4

#: Pairs whose centres are closer than this many times the longer segment are summed exactly.
NEAR_RATIO: float = 3.0

#: Softened pairs of one stretch of a chain are summed exactly out to this many GMDs.
SOFT_REACH: float = 500.0

#: Treecode grid order, separation parameter and leaf size (see :mod:`fieldenergy.fastfield`).
#: Largest relative error of the coil matrix against the direct sum, measured (2 cores) on the
#: bundled toroidal-set (9 coils, one source tree each, rectangular packs): p = 5, theta = 0.7:
#: 1.2e-5; p = 6, theta = 0.6: 1.6e-7; p = 5, theta = 0.5: 9.6e-8; p = 6, theta = 0.5: 1.0e-8;
#: p = 7, theta = 0.6: 6.7e-9; p = 7, theta = 0.5: 9.5e-10. On the 2e5-segment winding of
#: benchmarks/bench_inductance.py the last three took 33, 35 and 40 s.
ORDER: int = 6
THETA: float = 0.5
LEAF: int = 200

#: Blocks of rows of the near-pair kernel (progress is reported after each), and static chunks
#: of rows within a block (the result does not depend on the thread count).
_N_BLOCKS: int = 16
_N_CHUNKS: int = 64

Array = NDArray[np.float64]

__all__ = ["FastInductance", "fast_grouped_inductance", "progress_steps"]


@dataclass(frozen=True)
class FastInductance:
    """A fast inductance matrix (H) and its treecode asymmetry.

    asymmetry is max |L_pq - L_qp| / sqrt(L_pp L_qq) before symmetrising: an indicator of the
    treecode's relative error (it understates it, see the module docstring). settings are
    the summation settings that produced the matrix.
    """

    matrix: Array
    asymmetry: float
    settings: dict[str, float]


def progress_steps(n_segments: int, n_groups: int) -> int:
    """Steps reported by :func:`fast_grouped_inductance`: one per source tree, then one per
    block of near-pair rows."""
    return n_groups + max(1, min(_N_BLOCKS, n_segments))


def fast_grouped_inductance(
    filaments: Filaments,
    group: ArrayLike,
    n_groups: int,
    *,
    order: int | None = None,
    theta: float | None = None,
    progress: Callable[[int], None] | None = None,
) -> FastInductance:
    """Inductance matrix between groups of segments, as :func:`grouped_inductance`, in O(n log n).

    ``order`` and ``theta`` are the treecode's (defaults :data:`ORDER`, :data:`THETA`).
    ``progress`` is called with the number of steps done out of :func:`progress_steps`.

    Raises
    ------
    GeometryError
        As :func:`fieldenergy.energy.from_potential.grouped_inductance`.

    Examples
    --------
    >>> t = np.linspace(0.0, 2.0 * np.pi, 65)
    >>> ring = np.stack([np.cos(t), np.sin(t), 0.0 * t], axis=1)
    >>> loop = Filaments.from_segments(ring[:-1], ring[1:], radii=1e-3)
    >>> r = fast_grouped_inductance(loop, np.zeros(64, dtype=int), 1)
    >>> print(f"{r.matrix[0, 0] * 1e6:.3f} uH")   # the direct sum gives 9.087 uH
    9.087 uH
    """
    _checked(filaments)
    n = filaments.n_segments
    groups = _checked_group(group, n_groups, n)
    order = ORDER if order is None else int(order)
    theta = THETA if theta is None else float(theta)
    piece, arc, loop = filaments.chain_pieces()
    perm = np.argsort(piece, kind="stable")
    starts, ends = filaments.starts[perm], filaments.ends[perm]
    weights, gmd = filaments.weights[perm], filaments.gmd[perm]
    groups, piece = groups[perm], piece[perm]
    arc, loop = arc[perm], loop[perm]
    n_pieces = int(piece.max()) + 1 if n else 0
    piece_first = np.searchsorted(piece, np.arange(n_pieces)).astype(np.int64)
    piece_count = np.bincount(piece, minlength=n_pieces).astype(np.int64)
    pos, chg = segment_sources(starts, ends, SOURCES)
    targets = pos.reshape(-1, 3)
    target_chg = (weights[:, None, None] * chg).reshape(-1, 3)
    seg_of_point = np.repeat(np.arange(n), SOURCES)
    far = np.zeros((n_groups, n_groups))
    for q in range(n_groups):
        mask = groups == q
        if mask.any():
            tree = SourceTree(pos[mask].reshape(-1, 3), (weights[mask, None, None] * chg[mask]).reshape(-1, 3),
                              order, LEAF)
            phi = tree_field(targets, tree, theta, LEAF, fields="A")[3:]
            per_point = np.einsum("ij,ji->i", target_chg, phi)
            per_seg = np.bincount(seg_of_point, per_point, minlength=n)
            far[:, q] = MU0_OVER_4PI * np.bincount(groups, per_seg, minlength=n_groups)
        if progress is not None:
            progress(q + 1)
    lengths = np.linalg.norm(ends - starts, axis=1)
    mid = 0.5 * (starts + ends)
    grid = _midpoint_grid(mid, np.full(n, NEAR_RATIO * float(lengths.max(initial=0.0))))
    near = np.zeros((n_groups, n_groups))
    n_blocks = max(1, min(_N_BLOCKS, n))
    for b in range(n_blocks):
        r0, r1 = b * n // n_blocks, (b + 1) * n // n_blocks
        near_pair_corrections(starts, ends, weights, gmd, piece, arc, loop, piece_first, piece_count, groups,
                              n_groups, pos, chg, NEAR_RATIO, SOFT_REACH, PAIR_RELATIVE_TOLERANCE, *grid, r0, r1,
                              max(1, min(_N_CHUNKS, r1 - r0)), near)
        if progress is not None:
            progress(n_groups + b + 1)
    total = far + near
    if not np.isfinite(total).all():
        raise GeometryError(
            "the inductance sum is not finite: segments of different filaments overlap "
            "(collinear and sharing a stretch of line)"
        )
    scale = np.sqrt(np.abs(np.outer(np.diag(total), np.diag(total))))
    with np.errstate(divide="ignore", invalid="ignore"):
        asym = np.where(scale > 0, np.abs(total - total.T) / scale, 0.0)
    settings = {"sources": SOURCES, "near_ratio": NEAR_RATIO, "soft_reach": SOFT_REACH, "order": order,
                "theta": theta, "leaf": LEAF}
    return FastInductance(0.5 * (total + total.T), float(asym.max(initial=0.0)), settings)
