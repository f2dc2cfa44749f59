"""Near-pair corrections of a point-source (treecode) Neumann sum over straight segments.

The fast A.J route (:mod:`fieldenergy.energy.fast_inductance`) sums the mutual inductance of
all segment pairs as point sources on point targets, ``k`` Gauss points per segment with
charges c_ia = (omega_a / 2) (b_i - a_i), kernel 1/r. That is accurate for pairs well apart.
This kernel replaces it by Neumann's exact integral (:func:`._neumann.pair_integral`, with
the chain's GMD on one stretch of a chain, :func:`._neumann.same_stretch`) for

* geometric near pairs: centre distance below ``near_ratio`` times the longer segment, the
  pair with itself included; found through a uniform grid of segment midpoints (cells at
  least ``near_ratio`` times the longest segment, CSR form as in :mod:`._fast_near`);
* softened pairs: the other pairs of one stretch of one chain closer than ``soft_reach``
  times the GMD, where 1/sqrt(r^2 + g^2) still differs from 1/r by more than
  1/(2 soft_reach^2); found by walking along the chain (segments sorted piece by piece).
  These are beyond the near ratio, where a point rule holds for the softened kernel as for
  1/r, so their correction is a Gauss rule of the difference of the two kernels, of fewer
  points the farther apart they are.

Each unordered pair is corrected once and added, weighted, to its two groups' entries
(scaled by mu0 / 4 pi). ``prange`` runs over static chunks of rows, each with its own
(n_groups, n_groups) partial matrix: no races, the same result for any thread count.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from fieldenergy.constants import MU0_OVER_4PI
from fieldenergy.kernels._fast_near import _neighbour_cells
from fieldenergy.kernels._neumann import _rules, pair_integral, same_stretch
from fieldenergy.kernels._neumann_far import segment_geometry


@njit(cache=True, inline="always")
def _point_sum(i, j, pos, chg):
    """sum_ab c_ia . c_jb / |x_ia - x_jb| over the point sources, coincident points left out."""
    total = 0.0
    for a in range(pos.shape[1]):
        for b in range(pos.shape[1]):
            dx = pos[i, a, 0] - pos[j, b, 0]
            dy = pos[i, a, 1] - pos[j, b, 1]
            dz = pos[i, a, 2] - pos[j, b, 2]
            r2 = dx * dx + dy * dy + dz * dz
            if r2 > 0.0:
                dot = chg[i, a, 0] * chg[j, b, 0] + chg[i, a, 1] * chg[j, b, 1] + chg[i, a, 2] * chg[j, b, 2]
                total += dot / math.sqrt(r2)
    return total


#: Gauss orders of the softening rule by centre distance over the longer segment: 4 points
#: each below 12, 2 below 100, the midpoint beyond. Gauss-Legendre with m points on both
#: segments errs by about (L / 2r)^(2m) of the pair (midpoint: (L/r)^2 / 24): at the switch
#: distances 1.7e-11, 3e-6 / 135 and 1e-4 / 24 of one pair's softening.
_SOFT_FOUR: float = 12.0
_SOFT_TWO: float = 100.0


@njit(cache=True, inline="always")
def _softening(i, j, g, geom, m, nodes, wts):
    """sum_ab c_ia . c_jb (1/sqrt(r^2 + g^2) - 1/r) by the m-point Gauss rule on both segments:
    the chain's GMD added to a pair far enough apart (beyond the near ratio) for a point rule."""
    total = 0.0
    g2 = g * g
    hi, hj = geom[i, 6], geom[j, 6]
    cos_ij = geom[i, 3] * geom[j, 3] + geom[i, 4] * geom[j, 4] + geom[i, 5] * geom[j, 5]
    for a in range(m):
        ua = hi * nodes[m, a]
        px = geom[i, 0] + ua * geom[i, 3]
        py = geom[i, 1] + ua * geom[i, 4]
        pz = geom[i, 2] + ua * geom[i, 5]
        for b in range(m):
            ub = hj * nodes[m, b]
            dx = px - geom[j, 0] - ub * geom[j, 3]
            dy = py - geom[j, 1] - ub * geom[j, 4]
            dz = pz - geom[j, 2] - ub * geom[j, 5]
            r2 = dx * dx + dy * dy + dz * dz
            total += wts[m, a] * wts[m, b] * (1.0 / math.sqrt(r2 + g2) - 1.0 / math.sqrt(r2))
    return cos_ij * hi * hj * total


@njit(cache=True, inline="always")
def _correction(i, j, soft, geom, gmd, pos, chg, zt, nodes, wts, rel_tol, n_panel):
    """Neumann's M_ij minus its point-source value, over mu0 / 4 pi."""
    cos_ij = geom[i, 3] * geom[j, 3] + geom[i, 4] * geom[j, 4] + geom[i, 5] * geom[j, 5]
    g = gmd[i] if soft else 0.0
    exact = cos_ij * pair_integral(geom, i, j, g, zt, nodes, wts, rel_tol, n_panel) if (i == j or cos_ij != 0.0) else 0.0
    return exact - _point_sum(i, j, pos, chg)


@njit(cache=True, inline="always")
def _add(part, gi, gj, value, twice):
    """Add a pair's value to part[gi, gj] and part[gj, gi]; the self pair (twice False) once."""
    part[gi, gj] += value
    if twice:
        part[gj, gi] += value


@njit(cache=True, parallel=True, error_model="numpy")
def near_pair_corrections(starts, ends, weights, gmd, piece, arc, loop, piece_first, piece_count, group, n_groups,
                          pos, chg, near_ratio, soft_reach, rel_tol, origin, cell, dims, cell_start, cell_segs,
                          row_begin, row_end, n_chunks, out):
    """Add the weighted near-pair corrections w_i w_j (M_ij - points_ij) of the rows
    row_begin <= i < row_end (each pair is taken by its lower index) to ``out`` (H).

    starts, ends (n, 3) m; weights, gmd (n,); piece (n,) int64 with the segments of each piece
    contiguous and in chain order (piece_first, piece_count per piece), arc and loop (n,) m as
    from ``Filaments.chain_pieces``; group (n,) int64 in range(n_groups); pos, chg (n, k, 3)
    the point sources; the grid as in :func:`._fast_near.near_correction`; out (n_groups,
    n_groups) float64, added to (the pair (i, j) and (j, i) both, the self pair once).
    """
    geom = segment_geometry(starts, ends)
    zt, nodes, wts, n_panel = _rules(rel_tol)
    partial = np.zeros((n_chunks, n_groups, n_groups))
    n_rows = row_end - row_begin
    for c in prange(n_chunks):
        part = partial[c]
        cells = np.empty(27, np.int64)
        for i in range(row_begin + c * n_rows // n_chunks, row_begin + (c + 1) * n_rows // n_chunks):
            hi = geom[i, 6]
            wi = weights[i]
            gi = group[i]
            # Geometric near pairs, j >= i.
            for k in range(_neighbour_cells(geom[i, :3], origin, cell, dims, cells)):
                cc = cells[k]
                for m in range(cell_start[cc], cell_start[cc + 1]):
                    j = cell_segs[m]
                    if j < i:
                        continue
                    rx, ry, rz = geom[i, 0] - geom[j, 0], geom[i, 1] - geom[j, 1], geom[i, 2] - geom[j, 2]
                    r2 = rx * rx + ry * ry + rz * rz
                    reach = near_ratio * 2.0 * max(hi, geom[j, 6])
                    if r2 >= reach * reach:
                        continue
                    soft = same_stretch(piece[i], piece[j], arc[i], arc[j], loop[i], hi + geom[j, 6], r2)
                    corr = _correction(i, j, soft, geom, gmd, pos, chg, zt, nodes, wts, rel_tol, n_panel)
                    _add(part, gi, group[j], MU0_OVER_4PI * wi * weights[j] * corr, j != i)
            # Softened pairs along the chain that the grid did not take, j > i.
            p = piece[i]
            f0, cnt = piece_first[p], piece_count[p]
            closed = loop[i] > 0.0
            reach_s = soft_reach * gmd[i]
            for direction in (1, -1):
                if closed:
                    n_steps = cnt // 2 if direction == 1 else (cnt - 1) // 2
                else:
                    n_steps = cnt - 1 - (i - f0) if direction == 1 else 0
                for step in range(1, n_steps + 1):
                    j = f0 + (i - f0 + direction * step) % cnt
                    s = abs(arc[i] - arc[j])
                    if closed:
                        s = min(s, loop[i] - s)
                    if s > 2.0 * reach_s + hi + geom[j, 6]:
                        break
                    if j <= i:
                        continue
                    rx, ry, rz = geom[i, 0] - geom[j, 0], geom[i, 1] - geom[j, 1], geom[i, 2] - geom[j, 2]
                    r2 = rx * rx + ry * ry + rz * rz
                    reach = near_ratio * 2.0 * max(hi, geom[j, 6])
                    if r2 < reach * reach or r2 >= reach_s * reach_s:
                        continue
                    if not same_stretch(p, piece[j], arc[i], arc[j], loop[i], hi + geom[j, 6], r2):
                        continue
                    longer = 2.0 * max(hi, geom[j, 6])
                    m = 4 if r2 < (_SOFT_FOUR * longer) ** 2 else (2 if r2 < (_SOFT_TWO * longer) ** 2 else 1)
                    corr = _softening(i, j, gmd[i], geom, m, nodes, wts)
                    _add(part, gi, group[j], MU0_OVER_4PI * wi * weights[j] * corr, True)
    for c in range(n_chunks):
        out += partial[c]
