"""Near-field corrections of a point-source (fast multipole) field of curved elements.

The fast multipole sum treats each element as ``qf`` point sources (a Gauss rule); that rule
is accurate only at points well away from the element. For every (point, element) pair with
the point closer than ``near_ratio`` element sizes (d, h as in
:mod:`fieldenergy.kernels._exact_path`), this kernel subtracts the point sources' B and A and
adds the element's exact-path field, so the corrected result equals the direct evaluation up
to the multipole sum's own tolerance.

Candidate elements are found through a uniform grid of cells (side ``cell``, ``dims`` cells
along each axis from ``origin``) holding each element by the cell of its chord midpoint, in
CSR form (``cell_start``, ``cell_elems``); each cell is at least as large as any element's
near radius, so the 27 cells around a point's cell hold every near element. ``prange`` runs
over points: each thread writes only its own output rows. A point exactly on a point source
(where the multipole sum left that source out) skips that source here too.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from fieldenergy.constants import MU0_OVER_4PI
from fieldenergy.kernels._biot_savart import _A2, _AX, _AY, _AZ, _CUR, _DX, _DY, _DZ, _INV_L2, _pair
from fieldenergy.kernels._exact_path import _distance, _element


@njit(cache=True, inline="always")
def _minus_sources(px, py, pz, e, src_pos, src_chg, acc):
    """Subtract element e's point sources' B and A (over mu0/4pi) at p from acc."""
    for i in range(src_pos.shape[1]):
        dx, dy, dz = px - src_pos[e, i, 0], py - src_pos[e, i, 1], pz - src_pos[e, i, 2]
        r2 = dx * dx + dy * dy + dz * dz
        if r2 == 0.0:
            continue
        inv = 1.0 / math.sqrt(r2)
        inv3 = inv * inv * inv
        tx, ty, tz = src_chg[e, i, 0], src_chg[e, i, 1], src_chg[e, i, 2]
        acc[0] -= (ty * dz - tz * dy) * inv3
        acc[1] -= (tz * dx - tx * dz) * inv3
        acc[2] -= (tx * dy - ty * dx) * inv3
        acc[3] -= tx * inv
        acc[4] -= ty * inv
        acc[5] -= tz * inv


@njit(cache=True)
def _cell_of(p, origin, cell, dims):
    """Cell indices of a point along each axis (may lie outside 0..dims-1)."""
    out = np.empty(3, dtype=np.int64)
    for c in range(3):
        out[c] = math.floor((p[c] - origin[c]) / cell)
    return out


@njit(cache=True)
def _neighbour_cells(p, origin, cell, dims, out):
    """Indices of the (up to 27) grid cells around a point's cell into out; returns how many."""
    home = _cell_of(p, origin, cell, dims)
    n = 0
    for kz in range(max(home[2] - 1, 0), min(home[2] + 2, dims[2])):
        for ky in range(max(home[1] - 1, 0), min(home[1] + 2, dims[1])):
            for kx in range(max(home[0] - 1, 0), min(home[0] + 2, dims[0])):
                out[n] = kx + dims[0] * (ky + dims[1] * kz)
                n += 1
    return n


@njit(cache=True, parallel=True)
def near_correction(points, nodes, tang, ends, sag, radii, src_pos, src_chg, xg, wg, bary,
                    ratio, max_sub, near_ratio, origin, cell, dims, cell_start, cell_elems, b_out, a_out):
    """Add (exact - point sources) of near elements to b_out (T) and a_out (T m).

    Element arrays as in :func:`fieldenergy.kernels._exact_path.exact_path_field`; src_pos,
    src_chg (n, qf, 3) the point sources (position, Gauss weight x I dr/ds); origin (3,),
    cell (float) and dims (3,) int64 the grid; cell_start (n_cells + 1,) and cell_elems (n,)
    int64 the elements of each cell (cell index ix + dims0 (iy + dims1 iz)).
    """
    for t in prange(points.shape[0]):
        acc = np.zeros(6)
        px, py, pz = points[t, 0], points[t, 1], points[t, 2]
        cells = np.empty(27, np.int64)
        for c in range(_neighbour_cells(points[t], origin, cell, dims, cells)):
            k = cells[c]
            for j in range(cell_start[k], cell_start[k + 1]):
                e = cell_elems[j]
                d, h = _distance(px, py, pz, ends, e)
                if d - sag[e] >= near_ratio * h:
                    continue
                _minus_sources(px, py, pz, e, src_pos, src_chg, acc)
                _element(px, py, pz, e, nodes, tang, ends, sag, radii, xg, wg, bary, ratio, max_sub, acc)
        for c in range(3):
            b_out[t, c] += MU0_OVER_4PI * acc[c]
            a_out[t, c] += MU0_OVER_4PI * acc[3 + c]


@njit(cache=True, parallel=True)
def near_segment_correction(points, tab, src_pos, src_chg, reach, origin, cell, dims, cell_start, cell_segs, b_out):
    """Add (closed form - point sources) of near straight segments to b_out (T).

    The straight-segment counterpart of :func:`near_correction`, for B only: ``tab`` is the
    segment table of :func:`fieldenergy.kernels._biot_savart._segment_table` and the closed
    form is that kernel's, finite-core rule included (inside conductors only), so the corrected field equals
    :func:`fieldenergy.kernels._biot_savart.b_from_segments` up to the far sum's tolerance.
    A segment is near a point closer than reach[j] to it; the grid (cells at least as large
    as every reach) holds each segment by the cell of its midpoint.
    """
    for t in prange(points.shape[0]):
        acc = np.zeros(6)
        px, py, pz = points[t, 0], points[t, 1], points[t, 2]
        cells = np.empty(27, np.int64)
        n_cells = _neighbour_cells(points[t], origin, cell, dims, cells)
        # The core rule holds only inside a conductor (see the closed form's module); every
        # segment whose core holds the point is near it (reach >= core radius).
        inside = False
        for c in range(n_cells):
            k = cells[c]
            for i in range(cell_start[k], cell_start[k + 1]):
                j = cell_segs[i]
                inside = inside or _segment_distance(px, py, pz, tab, j) ** 2 < tab[_A2, j]
        for c in range(n_cells):
            k = cells[c]
            for i in range(cell_start[k], cell_start[k + 1]):
                j = cell_segs[i]
                if _segment_distance(px, py, pz, tab, j) >= reach[j]:
                    continue
                _minus_sources(px, py, pz, j, src_pos, src_chg, acc)
                cx, cy, cz, f, _, _ = _pair(px, py, pz, tab, j, inside)
                g = tab[_CUR, j] * f
                acc[0] += g * cx
                acc[1] += g * cy
                acc[2] += g * cz
        for c in range(3):
            b_out[t, c] += MU0_OVER_4PI * acc[c]


@njit(cache=True, inline="always")
def _segment_distance(px, py, pz, tab, j):
    """Distance from a point to segment j of a segment table."""
    ux, uy, uz = px - tab[_AX, j], py - tab[_AY, j], pz - tab[_AZ, j]
    s = (ux * tab[_DX, j] + uy * tab[_DY, j] + uz * tab[_DZ, j]) * tab[_INV_L2, j]
    s = min(1.0, max(0.0, s))
    wx, wy, wz = ux - s * tab[_DX, j], uy - s * tab[_DY, j], uz - s * tab[_DZ, j]
    return math.sqrt(wx * wx + wy * wy + wz * wz)
