"""Neumann double integrals between straight segments, and their grouped sums.

The partial mutual inductance of two straight segments a and b is Neumann's formula

    M_ab = mu0/(4 pi) * (t_a . t_b) * I_ab,   I_ab = int_a int_b ds dt / sqrt(r^2 + g^2),

with g = the chain's geometric mean distance (GMD) between two segments of one stretch of one
filament chain (Maxwell's device: a thin conductor's self-inductance is the mutual inductance
between its centre line and a parallel line at distance GMD), and g = 0 otherwise: between
different chains, and between stretches of one chain that come back near each other, such as
the turns of a helix (see :data:`fieldenergy.constants.CHAIN_ARC_OVER_CHORD` and
:func:`same_stretch`).

``I_ab`` is evaluated in one of four ways:

* a == b: closed form 2 [l asinh(l/g) - sqrt(l^2 + g^2) + g] (Grover, Inductance
  Calculations, 1946, the straight-conductor formula; Rosa 1908);
* far pairs: the multipole expansion of the kernel about the segment centres to fourth order;
* middle pairs: a tensor Gauss-Legendre product of point-point terms, orders taken from a
  threshold table built for the requested accuracy (both in :mod:`._neumann_far`);
* near pairs: the inner integral in closed form, the outer one (along the shorter segment) by
  composite Gauss-Legendre on panels graded geometrically towards the outer segment's points
  closest to the other segment and to its end points, down to the scale sqrt(d^2 + g^2)
  (:mod:`fieldenergy.kernels._neumann_near`).

The double sums evaluate the multipole for a whole row of pairs in a branch-free loop (which
LLVM vectorises), then redo the few pairs it cannot serve. Every routine takes float64
C-contiguous arrays; nothing here validates input.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from fieldenergy.constants import CHAIN_ARC_OVER_CHORD, MU0_OVER_4PI
from fieldenergy.kernels._neumann_far import (
    FAR_MAX_ORDER,
    far_thresholds,
    gauss_product,
    gauss_table,
    multipole,
    order_for,
    parallel_integral,
    segment_geometry,
    self_integral,
)
from fieldenergy.kernels._neumann_near import near_integral, panel_order

_ARC2 = CHAIN_ARC_OVER_CHORD * CHAIN_ARC_OVER_CHORD


@njit(cache=True, inline="always")
def same_stretch(own, other, arc_i, arc_j, loop, half_sum, r2):
    """Whether two segments of chains ``own`` and ``other`` lie on one stretch of one chain.

    arc_i, arc_j: their midpoints' arc coordinates on the chain; loop: the chain's length if
    closed, else 0; half_sum: the sum of their half-lengths; r2: their centre distance squared.
    Adjacent segments always do; others when the arc between them is at most
    CHAIN_ARC_OVER_CHORD times their centre distance.
    """
    s = abs(arc_i - arc_j)
    if loop > 0.0:
        s = min(s, loop - s)
    return other == own and (s <= (1.0 + 1e-9) * half_sum or s * s <= _ARC2 * r2)


@njit(cache=True, error_model="numpy")
def _middle_or_near(geom, i, j, g, zt, nodes, wts, rel_tol, n_panel):
    """I_ij by the tensor Gauss rule if the table allows it, else by the near-pair rule."""
    rx = geom[i, 0] - geom[j, 0]
    ry = geom[i, 1] - geom[j, 1]
    rz = geom[i, 2] - geom[j, 2]
    dc = math.sqrt(rx * rx + ry * ry + rz * rz)
    ha = geom[i, 6]
    hb = geom[j, 6]
    na = order_for((dc - hb) / ha, zt)
    nb = order_for((dc - ha) / hb, zt)
    parallel = parallel_integral(
        rx, ry, rz, geom[i, 3], geom[i, 4], geom[i, 5], geom[j, 3], geom[j, 4], geom[j, 5], ha, hb, g * g
    )
    if parallel >= 0.0:
        return parallel
    if na > 0 and nb > 0:
        return gauss_product(
            rx, ry, rz, geom[i, 3], geom[i, 4], geom[i, 5], ha, geom[j, 3], geom[j, 4], geom[j, 5], hb,
            g * g, na, nb, nodes, wts,
        )  # fmt: skip
    if ha <= hb:
        return near_integral(geom, i, j, g, rel_tol, nodes[n_panel], wts[n_panel], n_panel)
    return near_integral(geom, j, i, g, rel_tol, nodes[n_panel], wts[n_panel], n_panel)


@njit(cache=True, error_model="numpy")
def pair_integral(geom, i, j, g, zt, nodes, wts, rel_tol, n_panel):
    """I_ij = int_i int_j ds dt / sqrt(r^2 + g^2) for segments ``i`` and ``j`` of ``geom`` (m).

    ``zt`` from :func:`far_thresholds`, ``nodes``/``wts`` from :func:`gauss_table` (at least up
    to ``n_panel``), ``n_panel`` from :func:`panel_order`; all for ``rel_tol``.
    """
    if i == j:
        return self_integral(2.0 * geom[i, 6], g)
    rx = geom[i, 0] - geom[j, 0]
    ry = geom[i, 1] - geom[j, 1]
    rz = geom[i, 2] - geom[j, 2]
    inv = 1.0 / (rx * rx + ry * ry + rz * rz + g * g)
    if (geom[i, 6] ** 2 + geom[j, 6] ** 2) * inv <= zt[0]:
        return multipole(
            rx, ry, rz, geom[i, 3], geom[i, 4], geom[i, 5], geom[i, 6],
            geom[j, 3], geom[j, 4], geom[j, 5], geom[j, 6], inv,
        )  # fmt: skip
    return _middle_or_near(geom, i, j, g, zt, nodes, wts, rel_tol, n_panel)


@njit(cache=True, error_model="numpy")
def _rules(rel_tol):
    """Far thresholds, Gauss tables and the near-panel order for ``rel_tol``."""
    n_panel = panel_order(rel_tol)
    nodes, wts = gauss_table(max(FAR_MAX_ORDER, n_panel))
    return far_thresholds(rel_tol), nodes, wts, n_panel


@njit(cache=True, error_model="numpy")
def _row_mutuals(i, geom, soa, gmd, filament, arc, loop, zt, nodes, wts, rel_tol, n_panel, row, xrow):
    """row[j] = M_ij (H) for j > i: Neumann's formula, softened by gmd[i] on i's own stretch
    of its chain (:func:`same_stretch`; ``filament``, arc, loop: the piece, arc and loop of ``Filaments.chain_pieces``).

    First pass: the multipole for every j, branch-free over contiguous rows of ``soa`` (the
    (7, n) transpose of ``geom``), so that it vectorises; ``xrow[j]`` keeps x of each pair.
    Second pass: the pairs with x above the multipole's limit go through the Gauss or near
    rule. ``row`` and ``xrow`` are (n,) scratch arrays.
    """
    n = soa.shape[1]
    cx, cy, cz, tx, ty, tz, half = soa[0], soa[1], soa[2], soa[3], soa[4], soa[5], soa[6]
    xi, yi, zi, tax, tay, taz, ha = cx[i], cy[i], cz[i], tx[i], ty[i], tz[i], half[i]
    own = filament[i]
    g2own = gmd[i] * gmd[i]
    arc_i, loop_i = arc[i], loop[i]
    for j in range(i + 1, n):
        rx = xi - cx[j]
        ry = yi - cy[j]
        rz = zi - cz[j]
        hb = half[j]
        r2 = rx * rx + ry * ry + rz * rz
        soft = same_stretch(own, filament[j], arc_i, arc[j], loop_i, ha + hb, r2)
        inv = 1.0 / (r2 + (g2own if soft else 0.0))
        tbx, tby, tbz = tx[j], ty[j], tz[j]
        xrow[j] = (ha * ha + hb * hb) * inv
        cos_ij = tax * tbx + tay * tby + taz * tbz
        row[j] = MU0_OVER_4PI * cos_ij * multipole(rx, ry, rz, tax, tay, taz, ha, tbx, tby, tbz, hb, inv)
    x_limit = zt[0]
    for j in range(i + 1, n):
        if xrow[j] <= x_limit:
            continue
        tbx, tby, tbz, hb = tx[j], ty[j], tz[j], half[j]
        cos_ij = tax * tbx + tay * tby + taz * tbz
        rx = xi - cx[j]
        ry = yi - cy[j]
        rz = zi - cz[j]
        r2 = rx * rx + ry * ry + rz * rz
        g = gmd[i] if same_stretch(own, filament[j], arc_i, arc[j], loop_i, ha + hb, r2) else 0.0
        dc = math.sqrt(r2)
        na = order_for((dc - hb) / ha, zt)
        nb = order_for((dc - ha) / hb, zt)
        parallel = parallel_integral(rx, ry, rz, tax, tay, taz, tbx, tby, tbz, ha, hb, g * g)
        if cos_ij == 0.0:
            row[j] = 0.0
        elif parallel >= 0.0:
            row[j] = MU0_OVER_4PI * cos_ij * parallel
        elif na > 0 and nb > 0:
            val = gauss_product(rx, ry, rz, tax, tay, taz, ha, tbx, tby, tbz, hb, g * g, na, nb, nodes, wts)
            row[j] = MU0_OVER_4PI * cos_ij * val
        else:
            row[j] = MU0_OVER_4PI * cos_ij * _middle_or_near(geom, i, j, g, zt, nodes, wts, rel_tol, n_panel)


@njit(cache=True, error_model="numpy")
def _accumulate_row(
    i, geom, soa, weights, gmd, filament, arc, loop, group, zt, nodes, wts, rel_tol, n_panel, row, xrow, acc, part
):
    """Add w_i w_j M_ij for all j >= i to ``part[group[i], group[j]]`` and its mirror.

    The row is first summed by group into ``acc`` (n_groups,), so each pair costs one
    scattered addition; the row total is then spread over the row and column of group[i].
    """
    _row_mutuals(i, geom, soa, gmd, filament, arc, loop, zt, nodes, wts, rel_tol, n_panel, row, xrow)
    acc[:] = 0.0
    for j in range(i + 1, geom.shape[0]):
        acc[group[j]] += weights[j] * row[j]
    gi = group[i]
    wi = weights[i]
    for q in range(acc.shape[0]):
        part[gi, q] += wi * acc[q]
        part[q, gi] += wi * acc[q]
    part[gi, gi] += wi * wi * MU0_OVER_4PI * self_integral(2.0 * geom[i, 6], gmd[i])


@njit(cache=True, error_model="numpy", parallel=True)
def grouped_mutual_sum(
    starts, ends, weights, gmd, filament, arc, loop, group, n_groups, rel_tol, k_begin, k_end, n_chunks, out
):
    """Add sum_{i in p, j in q} w_i w_j M_ij to ``out[p, q]`` for the outer rows of a fold range.

    The triangular loop is folded for load balance: fold index k stands for the rows i = k and
    i = n - 1 - k (once if they coincide), each paired with every j >= i; k runs over
    ``range((n + 1) // 2)`` and this call does ``[k_begin, k_end)`` of it. The range is cut into
    ``n_chunks`` static chunks of equal work, each with its own (n_groups, n_groups) partial
    matrix: no races, and the result does not depend on the thread count. The partials are
    added to ``out`` after the loop.

    starts, ends: (n, 3) float64, m. weights, gmd: (n,) float64 (ampere-turns per ampere; m).
    filament, group: (n,) int64; filament, arc, loop are the piece, arc and loop of
    ``Filaments.chain_pieces``; arc, loop (n,) float64, m.
    n_groups, k_begin, k_end, n_chunks: int. rel_tol: float, the
    per-pair relative accuracy. out: (n_groups, n_groups) float64, H, added to.
    """
    n = starts.shape[0]
    geom = segment_geometry(starts, ends)
    soa = np.ascontiguousarray(geom.T)
    zt, nodes, wts, n_panel = _rules(rel_tol)
    n_k = k_end - k_begin
    partial = np.zeros((n_chunks, n_groups, n_groups))
    for c in prange(n_chunks):
        row = np.empty(n)
        xrow = np.empty(n)
        acc = np.empty(n_groups)
        part = partial[c]
        for k in range(k_begin + c * n_k // n_chunks, k_begin + (c + 1) * n_k // n_chunks):
            n_rows = 1 if n - 1 - k == k else 2  # the middle row of an odd fold is done once
            for r in range(n_rows):
                i = k if r == 0 else n - 1 - k
                _accumulate_row(
                    i, geom, soa, weights, gmd, filament, arc, loop, group, zt, nodes, wts, rel_tol, n_panel, row, xrow, acc, part
                )
    for c in range(n_chunks):
        out += partial[c]


@njit(cache=True, error_model="numpy")
def partial_inductance_matrix(starts, ends, gmd, filament, arc, loop, rel_tol, out):
    """Fill the dense (n, n) matrix ``out`` of partial inductances M_ij (H).

    Serial on purpose: it serves tests and inspection of small n (memory O(n^2)), where a
    parallel version would cost more in compile time than it saves. Row i computes j >= i;
    the lower triangle is mirrored. starts, ends: (n, 3) float64, m; gmd: (n,) float64, m;
    filament (n,) int64, arc, loop (n,) float64, m: ``Filaments.chain_pieces``; rel_tol: float, per-pair relative accuracy; out: (n, n) float64.
    """
    n = starts.shape[0]
    geom = segment_geometry(starts, ends)
    soa = np.ascontiguousarray(geom.T)
    zt, nodes, wts, n_panel = _rules(rel_tol)
    xrow = np.empty(n)
    for i in range(n):
        out[i, i] = MU0_OVER_4PI * self_integral(2.0 * geom[i, 6], gmd[i])
        _row_mutuals(i, geom, soa, gmd, filament, arc, loop, zt, nodes, wts, rel_tol, n_panel, out[i], xrow)
        for j in range(i):
            out[i, j] = out[j, i]
