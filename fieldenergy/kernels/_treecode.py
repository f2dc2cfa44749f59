"""A dual-tree treecode for the field of vector point sources (current elements).

Sums, at m targets x, the vector potential and the flux density of n point current elements
q_j (A m) at y_j, without the factor mu0 / (4 pi)::

    A(x) = sum_j q_j / |x - y_j|,     B(x) = sum_j q_j x (x - y_j) / |x - y_j|^3

A source that coincides with a target is left out of that target's sum (callers replace
nearby sources by exact elements anyway).

Method: barycentric Lagrange dual tree traversal (Wilson, Vaughn and Krasny, "A GPU-accelerated
fast multipole method based on barycentric Lagrange interpolation and dual tree traversal",
Comput. Phys. Commun. 265, 108017 (2021); the interpolation is the barycentric form of Berrut
and Trefethen, SIAM Review 46, 501 (2004)). Targets and sources each get an octree whose
cells are the tight bounding boxes of their points. Each cell with more than P = (p + 1)^3
points carries a tensor grid of Chebyshev points of the second kind: a source cell's *proxy
sources* hold its charges interpolated onto the grid, a target cell's *proxy targets* collect
the field at the grid points, which is later interpolated back to its points. A pair of cells
is well separated when (r_T + r_S) < theta R (half-diagonals r, centre distance R); the
pair then interacts through whichever of proxies or points is cheaper, so no interaction
costs more than the direct sum it replaces. Pairs that are not separated are split (the larger
cell first) down to leaves, which are summed directly.

The kernels are three tiers as elsewhere: the build and traversal are serial numba loops,
the evaluation passes are ``prange`` loops in which each thread writes only its own cells'
outputs, and :mod:`fieldenergy.fastfield` wraps and checks them. Everything works on
structure-of-arrays copies sorted by cell, so inner loops run over contiguous memory, and the
inner loop of every pair sum runs over sources (branch-free, vectorised as partial sums).
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numba import njit, prange

# Kinds of cell interactions.
_DIRECT, _PROXY_SOURCES, _PROXY_TARGETS, _PROXY_BOTH = 0, 1, 2, 3

#: What a sum computes (the kernels' ``mode``): B and A, A alone, or B alone.
FIELD_MODES: dict[str, int] = {"BA": 0, "A": 1, "B": 2}

#: Smallest half-width of a cell's interpolation box along an axis, relative to its largest
#: (a flat cluster, e.g. the targets of a plane map, still gets distinct grid points).
_MIN_ASPECT = 1e-3


def chebyshev_nodes(order: int) -> tuple[np.ndarray, np.ndarray]:
    """Chebyshev points of the second kind cos(k pi / p) on [-1, 1] and their barycentric
    weights (-1)^k, halved at both ends (Berrut & Trefethen 2004)."""
    k = np.arange(order + 1)
    nodes = np.cos(np.pi * k / order)
    weights = (-1.0) ** k
    weights[0] *= 0.5
    weights[-1] *= 0.5
    return nodes, weights


@njit(cache=True)
def build_tree(points, leaf_size):
    """Octree of points (m, 3): cells in breadth-first order, children after their parent.

    Returns perm (m,) (points sorted by cell: cell c holds perm[start[c]:end[c]]), and per
    cell: start, end, first_child, n_children, parent, level, and box (n_cells, 6) with the
    padded centre (0-2) and half-widths (3-5) of the cell's interpolation box.
    Cells with more than ``leaf_size`` points are split at the centre of their tight box along
    every axis at least half as long as the longest (2, 4 or 8 non-empty children).
    """
    m = points.shape[0]
    perm = np.arange(m)
    cap = 16 + 4 * (m // max(1, leaf_size) + 1)
    start = np.empty(cap, np.int64)
    end = np.empty(cap, np.int64)
    first = np.full(cap, -1, np.int64)
    nch = np.zeros(cap, np.int64)
    parent = np.full(cap, -1, np.int64)
    level = np.zeros(cap, np.int64)
    box = np.empty((cap, 6))
    start[0] = 0
    end[0] = m
    n_cells = 1
    codes = np.empty(m, np.int64)
    scratch = np.empty(m, np.int64)
    c = 0
    while c < n_cells:
        s, e = start[c], end[c]
        lo = np.full(3, np.inf)
        hi = np.full(3, -np.inf)
        for i in range(s, e):
            for k in range(3):
                v = points[perm[i], k]
                lo[k] = min(lo[k], v)
                hi[k] = max(hi[k], v)
        hw_max = 0.0
        for k in range(3):
            hw_max = max(hw_max, 0.5 * (hi[k] - lo[k]))
        for k in range(3):
            box[c, k] = 0.5 * (lo[k] + hi[k])
            box[c, 3 + k] = max(0.5 * (hi[k] - lo[k]), _MIN_ASPECT * hw_max, 1e-300)
        if e - s > leaf_size and hw_max > 0.0:
            split = np.zeros(3, np.bool_)
            for k in range(3):
                split[k] = 0.5 * (hi[k] - lo[k]) >= 0.5 * hw_max
            counts = np.zeros(8, np.int64)
            for i in range(s, e):
                code = 0
                for k in range(3):
                    if split[k] and points[perm[i], k] > box[c, k]:
                        code |= 1 << k
                codes[i] = code
                counts[code] += 1
            offs = np.zeros(9, np.int64)
            for q in range(8):
                offs[q + 1] = offs[q] + counts[q]
            fill = offs[:8].copy()
            for i in range(s, e):
                scratch[s + fill[codes[i]]] = perm[i]
                fill[codes[i]] += 1
            for i in range(s, e):
                perm[i] = scratch[i]
            if n_cells + 8 > cap:
                cap = 2 * cap + 8
                start = _grow_int(start, cap)
                end = _grow_int(end, cap)
                first = _grow_int(first, cap, -1)
                nch = _grow_int(nch, cap)
                parent = _grow_int(parent, cap, -1)
                level = _grow_int(level, cap)
                nb = np.empty((cap, 6))
                nb[: box.shape[0]] = box
                box = nb
            first[c] = n_cells
            for q in range(8):
                if counts[q] > 0:
                    start[n_cells] = s + offs[q]
                    end[n_cells] = s + offs[q + 1]
                    parent[n_cells] = c
                    level[n_cells] = level[c] + 1
                    nch[c] += 1
                    n_cells += 1
        c += 1
    return (perm, start[:n_cells].copy(), end[:n_cells].copy(), first[:n_cells].copy(),
            nch[:n_cells].copy(), parent[:n_cells].copy(), level[:n_cells].copy(), box[:n_cells].copy())


@njit(cache=True)
def _grow_int(a, cap, fill=0):
    out = np.full(cap, fill, np.int64)
    out[: a.shape[0]] = a
    return out


@njit(cache=True)
def traverse(t_box, t_count, t_first, t_nch, s_box, s_count, s_first, s_nch, theta, n_proxy):
    """Dual tree traversal: the list of interacting (target cell, source cell, kind).

    A separated pair interacts through proxies on each side holding more than ``n_proxy``
    points; pairs that are not separated are split, the cell with the larger half-diagonal
    first (a leaf is never split), and leaf pairs are summed directly.
    """
    cap = 1024
    it_t = np.empty(cap, np.int64)
    it_s = np.empty(cap, np.int64)
    it_k = np.empty(cap, np.int64)
    n_it = 0
    stack = np.empty((256, 2), np.int64)
    stack[0, 0] = 0
    stack[0, 1] = 0
    top = 1
    while top > 0:
        top -= 1
        t, s = stack[top, 0], stack[top, 1]
        rt = math.sqrt(t_box[t, 3] ** 2 + t_box[t, 4] ** 2 + t_box[t, 5] ** 2)
        rs = math.sqrt(s_box[s, 3] ** 2 + s_box[s, 4] ** 2 + s_box[s, 5] ** 2)
        dist = math.sqrt((t_box[t, 0] - s_box[s, 0]) ** 2 + (t_box[t, 1] - s_box[s, 1]) ** 2
                         + (t_box[t, 2] - s_box[s, 2]) ** 2)
        t_leaf = t_nch[t] == 0
        s_leaf = s_nch[s] == 0
        kind = -1
        if rt + rs < theta * dist:
            big_t = t_count[t] > n_proxy
            big_s = s_count[s] > n_proxy
            if big_t and big_s:
                kind = _PROXY_BOTH
            elif big_t:
                kind = _PROXY_TARGETS
            elif big_s:
                kind = _PROXY_SOURCES
            else:
                kind = _DIRECT
        elif t_leaf and s_leaf:
            kind = _DIRECT
        if kind >= 0:
            if n_it == cap:
                cap *= 2
                it_t = _grow_int(it_t, cap)
                it_s = _grow_int(it_s, cap)
                it_k = _grow_int(it_k, cap)
            it_t[n_it] = t
            it_s[n_it] = s
            it_k[n_it] = kind
            n_it += 1
            continue
        if top + 8 > stack.shape[0]:
            bigger = np.empty((2 * stack.shape[0], 2), np.int64)
            bigger[:top] = stack[:top]
            stack = bigger
        if s_leaf or (not t_leaf and rt >= rs):
            for q in range(t_nch[t]):
                stack[top, 0] = t_first[t] + q
                stack[top, 1] = s
                top += 1
        else:
            for q in range(s_nch[s]):
                stack[top, 0] = t
                stack[top, 1] = s_first[s] + q
                top += 1
    return it_t[:n_it].copy(), it_s[:n_it].copy(), it_k[:n_it].copy()


@njit(cache=True, inline="always")
def _lagrange(t, nodes, weights, out):
    """Values of the barycentric Lagrange basis on ``nodes`` at t (Berrut & Trefethen 2004)."""
    hit = -1
    total = 0.0
    for k in range(nodes.shape[0]):
        d = t - nodes[k]
        if d == 0.0:
            hit = k
            break
        out[k] = weights[k] / d
        total += out[k]
    if hit >= 0:
        for k in range(nodes.shape[0]):
            out[k] = 0.0
        out[hit] = 1.0
    else:
        for k in range(nodes.shape[0]):
            out[k] /= total


@njit(cache=True, inline="always")
def _basis_at(px, py, pz, box, c, nodes, weights, lx, ly, lz):
    """1D basis values of cell c's grid at a point, per axis."""
    _lagrange((px - box[c, 0]) / box[c, 3], nodes, weights, lx)
    _lagrange((py - box[c, 1]) / box[c, 4], nodes, weights, ly)
    _lagrange((pz - box[c, 2]) / box[c, 5], nodes, weights, lz)


@njit(cache=True)
def grid_points(box, c, nodes, gx, gy, gz):
    """The (p + 1)^3 Chebyshev grid points of cell c, x index slowest, into gx, gy, gz."""
    n = nodes.shape[0]
    q = 0
    for a in range(n):
        for b in range(n):
            for d in range(n):
                gx[q] = box[c, 0] + box[c, 3] * nodes[a]
                gy[q] = box[c, 1] + box[c, 4] * nodes[b]
                gz[q] = box[c, 2] + box[c, 5] * nodes[d]
                q += 1


@njit(cache=True)
def _transfer(box, child, parent_cell, nodes, weights):
    """Matrices (3, p + 1, p + 1): basis of the parent's grid at the child's grid nodes,
    [axis, parent node, child node]."""
    n = nodes.shape[0]
    mat = np.empty((3, n, n))
    tmp = np.empty(n)
    for ax in range(3):
        for k in range(n):
            x = box[child, ax] + box[child, 3 + ax] * nodes[k]
            _lagrange((x - box[parent_cell, ax]) / box[parent_cell, 3 + ax], nodes, weights, tmp)
            for j in range(n):
                mat[ax, j, k] = tmp[j]
    return mat


@njit(cache=True)
def _points_to_grid(sx, sy, sz, q, i0, i1, box, c, nodes, weights, out):
    """Add the charges q (3, .) of points i0..i1 onto cell c's grid: out (P, 3)."""
    n = nodes.shape[0]
    lx = np.empty(n)
    ly = np.empty(n)
    lz = np.empty(n)
    for i in range(i0, i1):
        _basis_at(sx[i], sy[i], sz[i], box, c, nodes, weights, lx, ly, lz)
        qa, qb, qc = q[0, i], q[1, i], q[2, i]
        g = 0
        for a in range(n):
            for b in range(n):
                wab = lx[a] * ly[b]
                for d in range(n):
                    w = wab * lz[d]
                    out[g, 0] += w * qa
                    out[g, 1] += w * qb
                    out[g, 2] += w * qc
                    g += 1


@njit(cache=True)
def _tensor_apply(mat, src, dst, transpose):
    """dst += (M_x (x) M_y (x) M_z) src over grid arrays (P, k); with ``transpose`` the
    transposed matrices. M[ax] has shape (p + 1, p + 1) as built by _transfer."""
    n = mat.shape[1]
    k = src.shape[1]
    t1 = np.zeros((n, n, n, k))
    t2 = np.zeros((n, n, n, k))
    s = src.reshape((n, n, n, k))
    # axis z, then y, then x; out index first when not transposed
    for a in range(n):
        for b in range(n):
            for o in range(n):
                for i in range(n):
                    w = mat[2, i, o] if transpose else mat[2, o, i]
                    for c in range(k):
                        t1[a, b, o, c] += w * s[a, b, i, c]
    for a in range(n):
        for o in range(n):
            for i in range(n):
                w = mat[1, i, o] if transpose else mat[1, o, i]
                for d in range(n):
                    for c in range(k):
                        t2[a, o, d, c] += w * t1[a, i, d, c]
    dd = dst.reshape((n, n, n, k))
    for o in range(n):
        for i in range(n):
            w = mat[0, i, o] if transpose else mat[0, o, i]
            for b in range(n):
                for d in range(n):
                    for c in range(k):
                        dd[o, b, d, c] += w * t2[i, b, d, c]


@njit(cache=True, parallel=True)
def upward(sx, sy, sz, q, start, end, first, nch, level, box, proxy_id, n_proxy_cells, nodes, weights):
    """Proxy charges (n_proxy_cells, P, 3) of the source cells with proxy_id >= 0.

    Deepest level first: a cell's charges come from its children's proxy charges by the
    tensor interpolation matrices, or straight from the points of children without proxies.
    """
    n = nodes.shape[0]
    p3 = n * n * n
    charges = np.zeros((n_proxy_cells, p3, 3))
    max_level = level.max() if level.shape[0] else 0
    for lev in range(max_level, -1, -1):
        cells = np.nonzero((level == lev) & (proxy_id >= 0))[0]
        for ic in prange(cells.shape[0]):
            c = cells[ic]
            out = charges[proxy_id[c]]
            if nch[c] == 0:
                _points_to_grid(sx, sy, sz, q, start[c], end[c], box, c, nodes, weights, out)
                continue
            for ch in range(first[c], first[c] + nch[c]):
                if proxy_id[ch] >= 0:
                    mat = _transfer(box, ch, c, nodes, weights)
                    _tensor_apply(mat, charges[proxy_id[ch]], out, False)
                else:
                    _points_to_grid(sx, sy, sz, q, start[ch], end[ch], box, c, nodes, weights, out)
    return charges


#: Compiler freedoms of the pair sums: each target's sum over sources may be reassociated
#: (so it runs as vector partial sums) and multiply-adds fused. Measured on one core (54 to 512
#: targets by 160 to 512 sources, B alone): 1.35 to 1.4 times the pairs per second of the
#: earlier loop over targets in the inner loop. The order of a sum changes only its rounding.
_PAIR_MATH = {"reassoc", "nsz", "contract"}


@njit(cache=True, fastmath=_PAIR_MATH, error_model="numpy")
def _p2p(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, b0, b1, b2, a0, a1, a2):
    """Add B (b0, b1, b2) and A (a0, a1, a2) of sources s0..s1 at the points x, y, z.

    Each point's sum over the sources runs as the inner loop (vectorised by reassociation);
    source arrays are contiguous. A source on the point adds nothing.
    """
    # views from 0, so the loop indices are known non-negative (no wraparound selects)
    sx, sy, sz, qx, qy, qz = sx[s0:s1], sy[s0:s1], sz[s0:s1], qx[s0:s1], qy[s0:s1], qz[s0:s1]
    n = s1 - s0
    for i in range(x.shape[0]):
        px, py, pz = x[i], y[i], z[i]
        e0 = e1 = e2 = f0 = f1 = f2 = 0.0
        for j in range(n):
            dx = px - sx[j]
            dy = py - sy[j]
            dz = pz - sz[j]
            r2 = dx * dx + dy * dy + dz * dz
            inv = 1.0 / np.sqrt(r2) if r2 > 0.0 else 0.0
            inv3 = inv * inv * inv
            e0 += (qy[j] * dz - qz[j] * dy) * inv3
            e1 += (qz[j] * dx - qx[j] * dz) * inv3
            e2 += (qx[j] * dy - qy[j] * dx) * inv3
            f0 += qx[j] * inv
            f1 += qy[j] * inv
            f2 += qz[j] * inv
        b0[i] += e0
        b1[i] += e1
        b2[i] += e2
        a0[i] += f0
        a1[i] += f1
        a2[i] += f2


@njit(cache=True, fastmath=_PAIR_MATH, error_model="numpy")
def _p2p_a(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, a0, a1, a2):
    """Add A (a0, a1, a2) alone of sources s0..s1 at the points x, y, z (as :func:`_p2p`)."""
    # views from 0, so the loop indices are known non-negative (no wraparound selects)
    sx, sy, sz, qx, qy, qz = sx[s0:s1], sy[s0:s1], sz[s0:s1], qx[s0:s1], qy[s0:s1], qz[s0:s1]
    n = s1 - s0
    for i in range(x.shape[0]):
        px, py, pz = x[i], y[i], z[i]
        f0 = f1 = f2 = 0.0
        for j in range(n):
            dx = px - sx[j]
            dy = py - sy[j]
            dz = pz - sz[j]
            r2 = dx * dx + dy * dy + dz * dz
            inv = 1.0 / np.sqrt(r2) if r2 > 0.0 else 0.0
            f0 += qx[j] * inv
            f1 += qy[j] * inv
            f2 += qz[j] * inv
        a0[i] += f0
        a1[i] += f1
        a2[i] += f2


@njit(cache=True, fastmath=_PAIR_MATH, error_model="numpy")
def _p2p_b(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, b0, b1, b2):
    """Add B (b0, b1, b2) alone of sources s0..s1 at the points x, y, z (as :func:`_p2p`)."""
    # views from 0, so the loop indices are known non-negative (no wraparound selects)
    sx, sy, sz, qx, qy, qz = sx[s0:s1], sy[s0:s1], sz[s0:s1], qx[s0:s1], qy[s0:s1], qz[s0:s1]
    n = s1 - s0
    for i in range(x.shape[0]):
        px, py, pz = x[i], y[i], z[i]
        e0 = e1 = e2 = 0.0
        for j in range(n):
            dx = px - sx[j]
            dy = py - sy[j]
            dz = pz - sz[j]
            r2 = dx * dx + dy * dy + dz * dz
            inv = 1.0 / np.sqrt(r2) if r2 > 0.0 else 0.0
            inv3 = inv * inv * inv
            e0 += (qy[j] * dz - qz[j] * dy) * inv3
            e1 += (qz[j] * dx - qx[j] * dz) * inv3
            e2 += (qx[j] * dy - qy[j] * dx) * inv3
        b0[i] += e0
        b1[i] += e1
        b2[i] += e2


@njit(cache=True, inline="always", error_model="numpy")
def _interact(mode, x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, b0, b1, b2, a0, a1, a2):
    """:func:`_p2p` (mode 0), :func:`_p2p_a` (1: A alone, B left at zero) or :func:`_p2p_b`
    (2: B alone, A left at zero); see :data:`FIELD_MODES`."""
    if mode == 1:
        _p2p_a(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, a0, a1, a2)
    elif mode == 2:
        _p2p_b(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, b0, b1, b2)
    else:
        _p2p(x, y, z, sx, sy, sz, qx, qy, qz, s0, s1, b0, b1, b2, a0, a1, a2)


@njit(cache=True, parallel=True, error_model="numpy")
def evaluate_points(tx, ty, tz, t_start, t_end, t_nch, t_parent, it_start, it_src, it_kind,
                    sx, sy, sz, qx, qy, qz, s_start, s_end, s_box, s_proxy, charges, nodes, mode, out):
    """Direct and proxy-source interactions into the targets' rows of out (6, m): B (rows
    0-2) and A (rows 3-5), or one of them by ``mode`` (see :data:`FIELD_MODES`).

    Each leaf target cell takes the interactions listed for it and for its ancestors
    (it_start: CSR by target cell), restricted to its own points, so threads never share rows.
    """
    n = nodes.shape[0]
    p3 = n * n * n
    leaves = np.nonzero(t_nch == 0)[0]
    for il in prange(leaves.shape[0]):
        leaf = leaves[il]
        t0, t1 = t_start[leaf], t_end[leaf]
        x = tx[t0:t1].copy()
        y = ty[t0:t1].copy()
        z = tz[t0:t1].copy()
        w = t1 - t0
        b0, b1, b2, a0, a1, a2 = np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w)
        gx = np.empty(p3)
        gy = np.empty(p3)
        gz = np.empty(p3)
        cell = leaf
        while cell >= 0:
            for k in range(it_start[cell], it_start[cell + 1]):
                s = it_src[k]
                if it_kind[k] == _DIRECT:
                    _interact(mode, x, y, z, sx, sy, sz, qx, qy, qz, s_start[s], s_end[s], b0, b1, b2, a0, a1, a2)
                else:
                    grid_points(s_box, s, nodes, gx, gy, gz)
                    ch = charges[s_proxy[s]]
                    _interact(mode, x, y, z, gx, gy, gz, ch[0], ch[1], ch[2], 0, p3, b0, b1, b2, a0, a1, a2)
            cell = t_parent[cell]
        for i in range(w):
            out[0, t0 + i] += b0[i]
            out[1, t0 + i] += b1[i]
            out[2, t0 + i] += b2[i]
            out[3, t0 + i] += a0[i]
            out[4, t0 + i] += a1[i]
            out[5, t0 + i] += a2[i]


@njit(cache=True, parallel=True, error_model="numpy")
def evaluate_proxies(cells, it_start, it_src, it_kind, t_box, t_proxy, n_t_proxy,
                     sx, sy, sz, qx, qy, qz, s_start, s_end, s_box, s_proxy, charges, nodes, mode, n_parts):
    """Fields (n_t_proxy, 6, P) at the proxy targets of target cells, from proxy-target
    interactions (source points) and proxy-both interactions (proxy sources); B, A or
    both by ``mode``.

    Each cell's grid is cut into ``n_parts`` slices of targets, and the parallel loop runs
    over the slices part by part (every cell's first slice, then every second one, ...): with
    one part per thread each thread gets an equal share of every cell, however unequal the
    cells' interaction lists are. Measured on 2 threads: 1.6x one thread's speed with whole
    cells, 2.1x with slices. Each target's sum is the same whatever the slicing.
    """
    n = nodes.shape[0]
    p3 = n * n * n
    n_cells = cells.shape[0]
    values = np.zeros((n_t_proxy, 6, p3))
    for item in prange(n_parts * n_cells):
        part = item // n_cells
        c = cells[item % n_cells]
        if it_start[c] == it_start[c + 1]:
            continue
        g0 = part * p3 // n_parts
        g1 = (part + 1) * p3 // n_parts
        w = g1 - g0
        gx = np.empty(p3)
        gy = np.empty(p3)
        gz = np.empty(p3)
        sgx = np.empty(p3)
        sgy = np.empty(p3)
        sgz = np.empty(p3)
        b0, b1, b2, a0, a1, a2 = np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w), np.zeros(w)
        grid_points(t_box, c, nodes, gx, gy, gz)
        x, y, z = gx[g0:g1].copy(), gy[g0:g1].copy(), gz[g0:g1].copy()
        for k in range(it_start[c], it_start[c + 1]):
            s = it_src[k]
            if it_kind[k] == _PROXY_TARGETS:
                _interact(mode, x, y, z, sx, sy, sz, qx, qy, qz, s_start[s], s_end[s], b0, b1, b2, a0, a1, a2)
            else:
                grid_points(s_box, s, nodes, sgx, sgy, sgz)
                ch = charges[s_proxy[s]]
                _interact(mode, x, y, z, sgx, sgy, sgz, ch[0], ch[1], ch[2], 0, p3, b0, b1, b2, a0, a1, a2)
        out = values[t_proxy[c]]
        for g in range(w):
            out[0, g0 + g] = b0[g]
            out[1, g0 + g] = b1[g]
            out[2, g0 + g] = b2[g]
            out[3, g0 + g] = a0[g]
            out[4, g0 + g] = a1[g]
            out[5, g0 + g] = a2[g]
    return values


@njit(cache=True)
def _grid_to_points(vals, tx, ty, tz, i0, i1, box, c, nodes, weights, out):
    """out[:, i] += cell c's grid values (6, P) interpolated at points i0..i1."""
    n = nodes.shape[0]
    lx = np.empty(n)
    ly = np.empty(n)
    lz = np.empty(n)
    for i in range(i0, i1):
        _basis_at(tx[i], ty[i], tz[i], box, c, nodes, weights, lx, ly, lz)
        acc = np.zeros(6)
        g = 0
        for a in range(n):
            for b in range(n):
                wab = lx[a] * ly[b]
                for d in range(n):
                    w = wab * lz[d]
                    for k in range(6):
                        acc[k] += w * vals[k, g]
                    g += 1
        for k in range(6):
            out[k, i] += acc[k]


@njit(cache=True, fastmath=_PAIR_MATH)
def _grid_to_points_curl(vals, tx, ty, tz, i0, i1, box, c, nodes, weights, out):
    """out[:, i] += B = curl A and A (rows 0-2, 3-5) of cell c's grid values of A (3, P),
    interpolated at points i0..i1 (the barycentric interpolant and its derivatives).

    The tensor sums run axis by axis (z, then y, then x): about 6 P multiply-adds a point."""
    n = nodes.shape[0]
    lx = np.empty(n)
    ly = np.empty(n)
    lz = np.empty(n)
    dlx = np.empty(n)
    dly = np.empty(n)
    dlz = np.empty(n)
    v0, v1, v2 = vals[0], vals[1], vals[2]
    for i in range(i0, i1):
        _basis_deriv((tx[i] - box[c, 0]) / box[c, 3], nodes, weights, lx, dlx)
        _basis_deriv((ty[i] - box[c, 1]) / box[c, 4], nodes, weights, ly, dly)
        _basis_deriv((tz[i] - box[c, 2]) / box[c, 5], nodes, weights, lz, dlz)
        # s[k][j]: component k; j = value, d/dx, d/dy, d/dz (in the unit coordinates)
        s00 = s01 = s02 = s03 = s10 = s11 = s12 = s13 = s20 = s21 = s22 = s23 = 0.0
        for a in range(n):
            r0 = r1 = r2 = ry0 = ry1 = ry2 = rz0 = rz1 = rz2 = 0.0
            for b in range(n):
                g = (a * n + b) * n
                t0 = t1 = t2 = u0 = u1 = u2 = 0.0
                for d in range(n):
                    w = lz[d]
                    dw = dlz[d]
                    t0 += w * v0[g + d]
                    t1 += w * v1[g + d]
                    t2 += w * v2[g + d]
                    u0 += dw * v0[g + d]
                    u1 += dw * v1[g + d]
                    u2 += dw * v2[g + d]
                wy = ly[b]
                dwy = dly[b]
                r0 += wy * t0
                r1 += wy * t1
                r2 += wy * t2
                ry0 += dwy * t0
                ry1 += dwy * t1
                ry2 += dwy * t2
                rz0 += wy * u0
                rz1 += wy * u1
                rz2 += wy * u2
            wx = lx[a]
            dwx = dlx[a]
            s00 += wx * r0
            s10 += wx * r1
            s20 += wx * r2
            s01 += dwx * r0
            s11 += dwx * r1
            s21 += dwx * r2
            s02 += wx * ry0
            s12 += wx * ry1
            s22 += wx * ry2
            s03 += wx * rz0
            s13 += wx * rz1
            s23 += wx * rz2
        sx, sy, sz = 1.0 / box[c, 3], 1.0 / box[c, 4], 1.0 / box[c, 5]
        out[0, i] += s22 * sy - s13 * sz
        out[1, i] += s03 * sz - s21 * sx
        out[2, i] += s11 * sx - s02 * sy
        out[3, i] += s00
        out[4, i] += s10
        out[5, i] += s20


@njit(cache=True, inline="always")
def _basis_deriv(t, nodes, weights, val, der):
    """Lagrange basis values and derivatives on ``nodes`` at t, in product form:
    l_k(t) = w_k Q_k(t) / S with Q_k = prod_{j != k} (t - x_j) and S = sum_k w_k Q_k(t), a
    constant, so l_k' = w_k Q_k' / S. Unlike the barycentric formula's derivative (which
    cancels catastrophically within rounding distance of a node, e.g. at t = 0 against the
    node cos(pi / 2) = 6e-17) the products stay accurate everywhere, on the nodes too."""
    n = nodes.shape[0]
    total = 0.0
    for k in range(n):
        v = 1.0
        dv = 0.0
        for j in range(n):
            if j != k:
                d = t - nodes[j]
                dv = dv * d + v
                v = v * d
        val[k] = weights[k] * v
        der[k] = weights[k] * dv
        total += val[k]
    for k in range(n):
        val[k] /= total
        der[k] /= total


@njit(cache=True, parallel=True)
def downward(values, tx, ty, tz, start, end, first, nch, level, box, proxy_id, nodes, weights, out, curl):
    """Interpolate proxy-target fields down the tree and onto the target points (out (6, m)).

    values (n_proxy_cells, k, P): B and A (k = 6, rows as in out), or with ``curl`` A alone
    (k = 3), whose interpolant's curl gives B (see :func:`_grid_to_points_curl`).
    Shallowest level first: a cell passes its grid values to children with proxies (tensor
    interpolation, transposed) and interpolates them straight onto the points of children
    without; a leaf with proxies interpolates onto its own points.
    """
    max_level = level.max() if level.shape[0] else 0
    n_rows = values.shape[1]
    for lev in range(max_level + 1):
        cells = np.nonzero((level == lev) & (proxy_id >= 0))[0]
        for ic in prange(cells.shape[0]):
            c = cells[ic]
            vals = values[proxy_id[c]]
            if nch[c] == 0:
                _onto_points(curl, vals, tx, ty, tz, start[c], end[c], box, c, nodes, weights, out)
                continue
            for ch in range(first[c], first[c] + nch[c]):
                if proxy_id[ch] >= 0:
                    mat = _transfer(box, ch, c, nodes, weights)
                    moved = np.zeros((vals.shape[1], n_rows))
                    _tensor_apply(mat, vals.T.copy(), moved, True)
                    dv = values[proxy_id[ch]]
                    for g in range(moved.shape[0]):
                        for k in range(n_rows):
                            dv[k, g] += moved[g, k]
                else:
                    _onto_points(curl, vals, tx, ty, tz, start[ch], end[ch], box, c, nodes, weights, out)


@njit(cache=True, inline="always")
def _onto_points(curl, vals, tx, ty, tz, i0, i1, box, c, nodes, weights, out):
    """:func:`_grid_to_points_curl` with ``curl``, else :func:`_grid_to_points`."""
    if curl:
        _grid_to_points_curl(vals, tx, ty, tz, i0, i1, box, c, nodes, weights, out)
    else:
        _grid_to_points(vals, tx, ty, tz, i0, i1, box, c, nodes, weights, out)


def _csr(owner: np.ndarray, n_cells: int) -> tuple[np.ndarray, np.ndarray]:
    """Order of the interactions by owning cell, and the CSR start of each cell."""
    order = np.argsort(owner, kind="stable")
    starts = np.searchsorted(owner[order], np.arange(n_cells + 1)).astype(np.int64)
    return order, starts


class SourceTree:
    """Sources sorted into an octree with their proxy charges, reusable for many target sets.

    positions (n, 3) m and charges (n, 3) A m; ``order`` p of the Chebyshev grids.
    """

    def __init__(self, positions: np.ndarray, charges: np.ndarray, order: int, leaf_size: int) -> None:
        self.nodes, self.weights = chebyshev_nodes(order)
        self.n_proxy = (order + 1) ** 3
        pos = np.ascontiguousarray(positions, dtype=np.float64)
        (perm, self.start, self.end, self.first, self.nch, self.parent, self.level,
         self.box) = build_tree(pos, leaf_size)
        self.x, self.y, self.z = (np.ascontiguousarray(pos[perm, k]) for k in range(3))
        self.q = np.ascontiguousarray(np.asarray(charges, dtype=np.float64)[perm].T)
        count = self.end - self.start
        self.count = count
        self.proxy = np.full(len(count), -1, np.int64)
        big = count > self.n_proxy
        self.proxy[big] = np.arange(int(big.sum()))
        charges = upward(self.x, self.y, self.z, self.q, self.start, self.end, self.first, self.nch,
                         self.level, self.box, self.proxy, int(big.sum()), self.nodes, self.weights)
        #: Proxy charges (n_proxy_cells, 3, P): each component contiguous for the pair sums.
        self.charges = np.ascontiguousarray(charges.transpose(0, 2, 1))


def tree_field(targets: np.ndarray, sources: SourceTree, theta: float, leaf_size: int,
               fields: str = "BA") -> np.ndarray:
    """B and A (rows Bx, By, Bz, Ax, Ay, Az; shape (6, m)) of the sources at targets (m, 3),
    without the factor mu0 / (4 pi). ``fields`` "A" or "B" sums that one alone (the other's
    rows stay zero; B alone costs about 0.8 of both)."""
    mode = FIELD_MODES[fields]
    src = sources
    pts = np.ascontiguousarray(targets, dtype=np.float64)
    perm, start, end, first, nch, parent, level, box = build_tree(pts, leaf_size)
    tx, ty, tz = (np.ascontiguousarray(pts[perm, k]) for k in range(3))
    count = end - start
    it_t, it_s, it_k = traverse(box, count, first, nch, src.box, src.count, src.first, src.nch, theta, src.n_proxy)
    to_points = (it_k == _DIRECT) | (it_k == _PROXY_SOURCES)
    out = np.zeros((6, len(pts)))
    order, csr = _csr(it_t[to_points], len(count))
    evaluate_points(tx, ty, tz, start, end, nch, parent, csr, it_s[to_points][order], it_k[to_points][order],
                    src.x, src.y, src.z, src.q[0], src.q[1], src.q[2], src.start, src.end, src.box, src.proxy,
                    src.charges, src.nodes, mode, out)
    t_proxy = np.full(len(count), -1, np.int64)
    big = count > src.n_proxy
    t_proxy[big] = np.arange(int(big.sum()))
    if big.any():
        order, csr = _csr(it_t[~to_points], len(count))
        values = evaluate_proxies(np.nonzero(big)[0], csr, it_s[~to_points][order], it_k[~to_points][order], box,
                                  t_proxy, int(big.sum()), src.x, src.y, src.z, src.q[0], src.q[1], src.q[2],
                                  src.start, src.end, src.box, src.proxy, src.charges, src.nodes, mode,
                                  numba.get_num_threads())
        downward(values, tx, ty, tz, start, end, first, nch, level, box, t_proxy, src.nodes, src.weights, out, False)
    result = np.empty_like(out)
    result[:, perm] = out
    return result
