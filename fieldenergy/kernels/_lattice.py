"""A lattice fast multipole method for the field of vector point sources (current elements).

Sums the same quantities as :mod:`fieldenergy.kernels._treecode` (A = sum q / r and
B = curl A, without mu0 / (4 pi)), but on cubic cells of one lattice, so that two cells of
the same level always see each other through one of a fixed set of offsets. The interaction of
such a pair is then a precomputed matrix, compressed once by a singular value decomposition:
the black-box FMM of Fong and Darve ("The black-box fast multipole method", J. Comput. Phys.
228, 8712 (2009)), with the Chebyshev grids and barycentric interpolation of the treecode.

Cells: the sources' bounding cube is the level-0 cell of the lattice; targets are grouped into
the level-0 cells (same size, any integer position) that hold them. Each cell with more than a
leaf's worth of points is cut into its eight octants. Every cell holding enough points carries
a Chebyshev grid: a source cell's grid charges (its multipole), a target cell's values of A at
the grid nodes (its local expansion). A pair of cells is *separated* when the gap between them,
along the axis where it is widest, is at least the larger cell's width; for two cells of the
same level that means they are not neighbours, and their offset lies in [-3, 3]^3 (the
children of neighbouring parents). Separated pairs interact by the cheapest of: the
compressed grid-to-grid matrix (same level, both with grids), source grid to target points,
source points to target grid, or points to points. Pairs that are not separated are split, both
cells when they share a level, and leaves that touch are summed point to point.

Only A is carried on target grids. B = curl A at a point comes from differentiating the
interpolant: measured on one separated pair with 10 nodes per axis, its error is within 1.2x
of interpolating the gradient kernel itself, so one compressed kernel (1/r) serves both.

The operators: with grid nodes g_i of a unit cube (width 1) and an offset d (target cell
minus source cell, in cell widths), K_d[i, j] = 1 / |g_i - g_j + d|, and a cell of width w sees
K_d / w. U (P x k) spans the ranges of all K_d to a relative tolerance; each K_d is stored as
C_d = U^T K_d U (k x k), applied to compressed grid charges U^T M.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from fieldenergy.kernels._treecode import (
    _PAIR_MATH,
    _grow_int,
    _p2p_a,
    _points_to_grid,
    _tensor_apply,
    _transfer,
    chebyshev_nodes,
    downward,
    upward,
)

# Kinds of cell interactions (the first four as in the treecode).
DIRECT, GRID_TO_POINTS, POINTS_TO_GRID, GRID_TO_GRID = 0, 1, 2, 3

#: Reach of the same-level offsets, in cell widths: offsets lie in [-OFFSET_REACH, OFFSET_REACH]^3.
OFFSET_REACH: int = 3
_SIDE = 2 * OFFSET_REACH + 1


def offset_index(dx: int, dy: int, dz: int) -> int:
    """Index of an offset in the operator table ((2 R + 1)^3 entries, x slowest)."""
    return ((dx + OFFSET_REACH) * _SIDE + dy + OFFSET_REACH) * _SIDE + dz + OFFSET_REACH


@njit(cache=True)
def unit_grid(nodes):
    """Grid nodes (P, 3) of the unit cube (width 1, centred at 0), x index slowest."""
    n = nodes.shape[0]
    g = np.empty((n * n * n, 3))
    q = 0
    for a in range(n):
        for b in range(n):
            for c in range(n):
                g[q, 0] = 0.5 * nodes[a]
                g[q, 1] = 0.5 * nodes[b]
                g[q, 2] = 0.5 * nodes[c]
                q += 1
    return g


@njit(cache=True, parallel=True)
def offset_matrix(grid, dx, dy, dz):
    """K_d (P, P): 1 / |g_i - g_j + d| on the unit grid."""
    p = grid.shape[0]
    k = np.empty((p, p))
    for i in prange(p):
        for j in range(p):
            rx = grid[i, 0] - grid[j, 0] + dx
            ry = grid[i, 1] - grid[j, 1] + dy
            rz = grid[i, 2] - grid[j, 2] + dz
            k[i, j] = 1.0 / math.sqrt(rx * rx + ry * ry + rz * rz)
    return k


@njit(cache=True)
def build_lattice_tree(points, lo, width, leaf_size, max_level):
    """Lattice octrees of points (m, 3): level-0 cells are the cubes lo + width * (i, j, k).

    Returns perm (points sorted by cell: cell c holds perm[start[c]:end[c]]) and per cell:
    start, end, first_child, n_children, parent (-1 for the level-0 roots), level, ijk
    (n_cells, 3) integer position at its level, and box (n_cells, 6): centre and half-widths.
    Cells are in breadth-first order from the roots; a cell with more than ``leaf_size``
    points and level below ``max_level`` gets its non-empty octants as children.
    """
    m = points.shape[0]
    key = np.empty((m, 3), np.int64)
    for i in range(m):
        for k in range(3):
            key[i, k] = math.floor((points[i, k] - lo[k]) / width)
    flat = np.empty(m, np.int64)
    kmin = np.empty(3, np.int64)
    kspan = np.empty(3, np.int64)
    for k in range(3):
        kmin[k] = key[:, k].min() if m else 0
        kspan[k] = (key[:, k].max() - kmin[k] + 1) if m else 1
    for i in range(m):
        flat[i] = ((key[i, 0] - kmin[0]) * kspan[1] + key[i, 1] - kmin[1]) * kspan[2] + key[i, 2] - kmin[2]
    perm = np.argsort(flat, kind="mergesort")
    cap = 16 + 4 * (m // max(1, leaf_size) + 1)
    start = np.empty(cap, np.int64)
    end = np.empty(cap, np.int64)
    first = np.full(cap, -1, np.int64)
    nch = np.zeros(cap, np.int64)
    parent = np.full(cap, -1, np.int64)
    level = np.zeros(cap, np.int64)
    ijk = np.zeros((cap, 3), np.int64)
    n_cells = 0
    i = 0
    while i < m:
        j = i
        while j < m and flat[perm[j]] == flat[perm[i]]:
            j += 1
        if n_cells == cap:
            cap = 2 * cap
            start, end, first, nch, parent, level, ijk = _grow(start, end, first, nch, parent, level, ijk, cap)
        start[n_cells] = i
        end[n_cells] = j
        for k in range(3):
            ijk[n_cells, k] = key[perm[i], k]
        n_cells += 1
        i = j
    scratch = np.empty(m, np.int64)
    codes = np.empty(m, np.int64)
    c = 0
    while c < n_cells:
        s, e = start[c], end[c]
        if e - s > leaf_size and level[c] < max_level:
            h = width / 2.0 ** level[c]
            centre = np.empty(3)
            for k in range(3):
                centre[k] = lo[k] + (ijk[c, k] + 0.5) * h
            counts = np.zeros(8, np.int64)
            for t in range(s, e):
                code = 0
                for k in range(3):
                    if points[perm[t], k] >= centre[k]:
                        code |= 4 >> k
                codes[t] = code
                counts[code] += 1
            offs = np.zeros(9, np.int64)
            for q in range(8):
                offs[q + 1] = offs[q] + counts[q]
            fill = offs[:8].copy()
            for t in range(s, e):
                scratch[s + fill[codes[t]]] = perm[t]
                fill[codes[t]] += 1
            for t in range(s, e):
                perm[t] = scratch[t]
            if n_cells + 8 > cap:
                cap = 2 * cap + 8
                start, end, first, nch, parent, level, ijk = _grow(start, end, first, nch, parent, level, ijk, cap)
            first[c] = n_cells
            for q in range(8):
                if counts[q] > 0:
                    start[n_cells] = s + offs[q]
                    end[n_cells] = s + offs[q + 1]
                    parent[n_cells] = c
                    level[n_cells] = level[c] + 1
                    ijk[n_cells, 0] = 2 * ijk[c, 0] + ((q >> 2) & 1)
                    ijk[n_cells, 1] = 2 * ijk[c, 1] + ((q >> 1) & 1)
                    ijk[n_cells, 2] = 2 * ijk[c, 2] + (q & 1)
                    nch[c] += 1
                    n_cells += 1
        c += 1
    box = np.empty((n_cells, 6))
    for c in range(n_cells):
        h = width / 2.0 ** level[c]
        for k in range(3):
            box[c, k] = lo[k] + (ijk[c, k] + 0.5) * h
            box[c, 3 + k] = 0.5 * h
    return (perm, start[:n_cells].copy(), end[:n_cells].copy(), first[:n_cells].copy(), nch[:n_cells].copy(),
            parent[:n_cells].copy(), level[:n_cells].copy(), ijk[:n_cells].copy(), box)


@njit(cache=True)
def _grow(start, end, first, nch, parent, level, ijk, cap):
    n = start.shape[0]
    a = np.empty(cap, np.int64)
    a[:n] = start
    b = np.empty(cap, np.int64)
    b[:n] = end
    f = np.full(cap, -1, np.int64)
    f[:n] = first
    g = np.zeros(cap, np.int64)
    g[:n] = nch
    p = np.full(cap, -1, np.int64)
    p[:n] = parent
    lv = np.zeros(cap, np.int64)
    lv[:n] = level
    q = np.zeros((cap, 3), np.int64)
    q[:n] = ijk
    return a, b, f, g, p, lv, q


@njit(cache=True)
def traverse_lattice(t_roots, t_box, t_level, t_ijk, t_count, t_first, t_nch, t_grid,
                     s_roots, s_box, s_level, s_ijk, s_count, s_first, s_nch, s_grid, n_grid, m2l_cost):
    """Interacting (target cell, source cell, kind, operator) lists of two lattice trees.

    Costs, in kernel evaluations: a compressed grid-to-grid pair costs ``m2l_cost``; grid to
    points and points to grid n_grid per point; points to points one per pair. ``t_grid`` and
    ``s_grid`` say which cells carry grids. The operator is the offset's table index for
    GRID_TO_GRID pairs of one level (else -1).
    """
    cap = 1024
    it_t = np.empty(cap, np.int64)
    it_s = np.empty(cap, np.int64)
    it_k = np.empty(cap, np.int64)
    it_o = np.empty(cap, np.int64)
    n_it = 0
    stack = np.empty((max(64, 2 * t_roots.shape[0] * s_roots.shape[0]), 2), np.int64)
    top = 0
    for a in range(t_roots.shape[0]):
        for b in range(s_roots.shape[0]):
            stack[top, 0] = t_roots[a]
            stack[top, 1] = s_roots[b]
            top += 1
    side = 2 * OFFSET_REACH + 1
    while top > 0:
        top -= 1
        t, s = stack[top, 0], stack[top, 1]
        ht, hs = t_box[t, 3], s_box[s, 3]
        gap = -1e300
        for k in range(3):
            gap = max(gap, abs(t_box[t, k] - s_box[s, k]) - ht - hs)
        t_leaf = t_nch[t] == 0
        s_leaf = s_nch[s] == 0
        kind = -1
        op = -1
        if gap >= 2.0 * max(ht, hs) * (1.0 - 1e-9):
            nt, ns = t_count[t], s_count[s]
            kind = DIRECT
            best = float(nt) * float(ns)
            if s_grid[s] and float(nt) * n_grid < best:
                kind = GRID_TO_POINTS
                best = float(nt) * n_grid
            if t_grid[t] and float(ns) * n_grid < best:
                kind = POINTS_TO_GRID
                best = float(ns) * n_grid
            if t_grid[t] and s_grid[s] and t_level[t] == s_level[s] and m2l_cost < best:
                dx = t_ijk[t, 0] - s_ijk[s, 0]
                dy = t_ijk[t, 1] - s_ijk[s, 1]
                dz = t_ijk[t, 2] - s_ijk[s, 2]
                if max(abs(dx), abs(dy), abs(dz)) <= OFFSET_REACH:
                    kind = GRID_TO_GRID
                    op = ((dx + OFFSET_REACH) * side + dy + OFFSET_REACH) * side + dz + OFFSET_REACH
        elif t_leaf and s_leaf:
            kind = DIRECT
        if kind >= 0:
            if n_it == cap:
                cap *= 2
                it_t = _grow_int(it_t, cap)
                it_s = _grow_int(it_s, cap)
                it_k = _grow_int(it_k, cap)
                it_o = _grow_int(it_o, cap)
            it_t[n_it] = t
            it_s[n_it] = s
            it_k[n_it] = kind
            it_o[n_it] = op
            n_it += 1
            continue
        if top + 64 > stack.shape[0]:
            bigger = np.empty((2 * stack.shape[0] + 64, 2), np.int64)
            bigger[:top] = stack[:top]
            stack = bigger
        split_t = not t_leaf and (s_leaf or t_level[t] <= s_level[s])
        split_s = not s_leaf and (t_leaf or s_level[s] <= t_level[t])
        if split_t and split_s:
            for a in range(t_nch[t]):
                for b in range(s_nch[s]):
                    stack[top, 0] = t_first[t] + a
                    stack[top, 1] = s_first[s] + b
                    top += 1
        elif split_t:
            for a in range(t_nch[t]):
                stack[top, 0] = t_first[t] + a
                stack[top, 1] = s
                top += 1
        else:
            for b in range(s_nch[s]):
                stack[top, 0] = t
                stack[top, 1] = s_first[s] + b
                top += 1
    return it_t[:n_it].copy(), it_s[:n_it].copy(), it_k[:n_it].copy(), it_o[:n_it].copy()


@njit(cache=True, parallel=True, fastmath=_PAIR_MATH, error_model="numpy")
def points_to_grids(cells, it_start, it_src, t_box, t_grid, n_t_grids, sx, sy, sz, qx, qy, qz, s_start, s_end,
                    nodes):
    """A (n_t_grids, 3, P) at the grid nodes of target cells from the source points of their
    POINTS_TO_GRID interactions (it_start: CSR by target cell)."""
    n = nodes.shape[0]
    p3 = n * n * n
    values = np.zeros((n_t_grids, 3, p3))
    for ic in prange(cells.shape[0]):
        c = cells[ic]
        if it_start[c] == it_start[c + 1]:
            continue
        x = np.empty(p3)
        y = np.empty(p3)
        z = np.empty(p3)
        q = 0
        for a in range(n):
            for b in range(n):
                for d in range(n):
                    x[q] = t_box[c, 0] + t_box[c, 3] * nodes[a]
                    y[q] = t_box[c, 1] + t_box[c, 4] * nodes[b]
                    z[q] = t_box[c, 2] + t_box[c, 5] * nodes[d]
                    q += 1
        out = values[t_grid[c]]
        for k in range(it_start[c], it_start[c + 1]):
            s = it_src[k]
            _p2p_a(x, y, z, sx, sy, sz, qx, qy, qz, s_start[s], s_end[s], out[0], out[1], out[2])
    return values


def m2l_operators(order: int, tol: float, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """The compressed same-level operators of grids of ``order`` (order + 1 nodes per axis).

    Returns U (P, k), orthonormal columns spanning the ranges of every K_d of a separated
    offset to relative tolerance ``tol`` (found from random samples of each range, a
    randomised range finder: Halko, Martinsson and Tropp, SIAM Review 53, 217 (2011)), and
    C ((2 R + 1)^3, k, k) with C_d = U^T K_d U (zero for offsets of neighbours).
    Uses K_{-d} = K_d^T, so half the products are transposes.
    """
    nodes, _ = chebyshev_nodes(order)
    grid = unit_grid(nodes)
    p = grid.shape[0]
    rng = np.random.default_rng(seed)
    sample = max(8, min(24, p // 40))
    r = OFFSET_REACH
    offsets = [(dx, dy, dz) for dx in range(-r, r + 1) for dy in range(-r, r + 1) for dz in range(-r, r + 1)
               if max(abs(dx), abs(dy), abs(dz)) >= 2]
    half = [d for d in offsets if d > (0, 0, 0)]
    ranges = []
    for d in half:
        k = offset_matrix(grid, *d)
        ranges.append(k @ rng.standard_normal((p, sample)))
        ranges.append(k.T @ rng.standard_normal((p, sample)))
    left, sv, _ = np.linalg.svd(np.hstack(ranges), full_matrices=False)
    rank = int(np.count_nonzero(sv > tol * sv[0]))
    u = np.ascontiguousarray(left[:, :rank])
    table = np.zeros((_SIDE**3, rank, rank))
    for d in half:
        c = u.T @ (offset_matrix(grid, *d) @ u)
        table[offset_index(*d)] = c
        table[offset_index(-d[0], -d[1], -d[2])] = c.T
    return u, table


@njit(cache=True, parallel=True)
def grids_from_points(cells, sx, sy, sz, q, start, end, box, nodes, weights):
    """Grid charges (len(cells), 3, P) of cells straight from all their points."""
    n = nodes.shape[0]
    p3 = n * n * n
    out = np.zeros((cells.shape[0], 3, p3))
    for ic in prange(cells.shape[0]):
        c = cells[ic]
        buf = np.zeros((p3, 3))
        _points_to_grid(sx, sy, sz, q, start[c], end[c], box, c, nodes, weights, buf)
        for g in range(p3):
            for k in range(3):
                out[ic, k, g] = buf[g, k]
    return out


#: Cells of more sources than this many times their grid's P keep their full grid charges,
#: for sums from their grids straight to target points (a smaller cell's are summed again
#: from its points when asked for). At most a few thousand cells, far less memory than all.
KEEP_FULL: int = 4

#: Most sources in a block of the upward pass: cells up to this size are summed up with their
#: whole subtree at once, so the full grid charges held at one time stay bounded.
UPWARD_BLOCK: int = 200_000


class LatticeSources:
    """Sources in a lattice octree with their compressed grid charges, reusable for many target sets.

    positions (n, 3) m and charges (n, 3) A m; ``order`` of the grids, ``operators`` the pair
    (U, C) of :func:`m2l_operators` for that order; cells of at least ``min_grid`` sources
    carry grids. Only the compressed charges (k per component) are kept: the full grid charges
    (P per component, 5x more at order 10) are summed up block by block (subtrees of at most
    :data:`UPWARD_BLOCK` sources, then the few cells above them) and dropped once compressed.
    """

    def __init__(self, positions: np.ndarray, charges: np.ndarray, order: int,
                 operators: tuple[np.ndarray, np.ndarray], leaf_size: int, min_grid: int, max_level: int = 40) -> None:
        self.order = order
        self.nodes, self.weights = chebyshev_nodes(order)
        self.n_grid = (order + 1) ** 3
        self.u, self.table = operators
        pos = np.ascontiguousarray(positions, dtype=np.float64)
        lo, hi = pos.min(axis=0), pos.max(axis=0)
        width = float(np.max(hi - lo)) * (1.0 + 1e-6) or 1.0
        centre = 0.5 * (lo + hi)
        self.lo = centre - 0.5 * width
        self.width = width
        self.max_level = max_level
        (perm, self.start, self.end, self.first, self.nch, self.parent, self.level, self.ijk,
         self.box) = build_lattice_tree(pos, self.lo, width, leaf_size, max_level)
        self.roots = np.flatnonzero(self.parent < 0)
        self.x, self.y, self.z = (np.ascontiguousarray(pos[perm, k]) for k in range(3))
        self.q = np.ascontiguousarray(np.asarray(charges, dtype=np.float64)[perm].T)
        self.count = self.end - self.start
        self.grid_id = np.full(len(self.count), -1, np.int64)
        has = self.count >= min_grid
        self.grid_id[has] = np.arange(int(has.sum()))
        #: Compressed grid charges over the cell width (n_grids, 3, k): K_d / w applies to them.
        self.compressed = np.zeros((int(has.sum()), 3, self.u.shape[1]))
        self._kept: dict[int, np.ndarray] = {}
        self._upward()

    def _compress(self, cells: np.ndarray, full: np.ndarray) -> None:
        """Store the compressed charges of cells from their full grid charges (len, 3, P), and
        the full ones of cells of more than :data:`KEEP_FULL` x P sources."""
        for i in np.flatnonzero(self.count[cells] > KEEP_FULL * self.n_grid):
            self._kept[int(cells[i])] = np.ascontiguousarray(full[i])
        k = self.u.shape[1]
        w = self.width / 2.0 ** self.level[cells]
        self.compressed[self.grid_id[cells]] = (full.reshape(-1, full.shape[2]) @ self.u).reshape(-1, 3, k) / w[:, None, None]

    def _upward(self) -> None:
        big = self.count > UPWARD_BLOCK
        parent_big = np.where(self.parent >= 0, big[np.maximum(self.parent, 0)], True)
        blocks = np.flatnonzero(~big & parent_big)
        tops: dict[int, np.ndarray] = {}
        in_block = np.full(len(self.count), -1, np.int64)
        for b in blocks:  # each block's subtree (cells are breadth-first: a subtree's cells lie after it)
            sub = _subtree(int(b), self.first, self.nch)
            grid = sub[self.grid_id[sub] >= 0]
            if not len(grid):
                continue
            in_block[grid] = np.arange(len(grid))
            full = upward(self.x, self.y, self.z, self.q, self.start, self.end, self.first, self.nch, self.level,
                          self.box, in_block, len(grid), self.nodes, self.weights).transpose(0, 2, 1)
            in_block[grid] = -1
            self._compress(grid, full)
            if self.grid_id[b] >= 0:
                tops[int(b)] = full[0].T.copy()  # (P, 3), not a view that keeps the block alive; its own cell is first
        for c in np.flatnonzero(big)[::-1]:  # the cells above the blocks, deepest first
            buf = np.zeros((self.n_grid, 3))
            for ch in range(self.first[c], self.first[c] + self.nch[c]):
                if ch in tops:
                    _tensor_apply(_transfer(self.box, ch, c, self.nodes, self.weights), tops.pop(ch), buf, False)
                else:
                    _points_to_grid(self.x, self.y, self.z, self.q, self.start[ch], self.end[ch], self.box, c,
                                    self.nodes, self.weights, buf)
            tops[int(c)] = buf
            if self.grid_id[c] >= 0:
                self._compress(np.array([c]), buf.T[None].copy())

    def grid_charges(self, cells: np.ndarray) -> np.ndarray:
        """Full grid charges (len(cells), 3, P) of cells with grids: kept, or summed from their points."""
        kept = np.array([int(c) in self._kept for c in cells], bool)
        out = np.empty((len(cells), 3, self.n_grid))
        out[~kept] = grids_from_points(cells[~kept], self.x, self.y, self.z, self.q, self.start, self.end, self.box,
                                       self.nodes, self.weights)
        for i in np.flatnonzero(kept):
            out[i] = self._kept[int(cells[i])]
        return out


def _subtree(c: int, first: np.ndarray, nch: np.ndarray) -> np.ndarray:
    """Cell c and all its descendants, c first, in breadth-first order."""
    out = [np.array([c], np.int64)]
    while True:
        parents = out[-1][nch[out[-1]] > 0]
        if not len(parents):
            return np.concatenate(out)
        out.append(np.concatenate([np.arange(first[x], first[x] + nch[x]) for x in parents]))


def lattice_field(targets: np.ndarray, sources: LatticeSources, leaf_size: int, min_grid: int,
                  m2l_cost: float, fields: str = "BA") -> np.ndarray:
    """B and A (rows Bx, By, Bz, Ax, Ay, Az; shape (6, m)) of the sources at targets (m, 3),
    without the factor mu0 / (4 pi). Target cells of at least ``min_grid`` points carry grids;
    ``m2l_cost`` is a compressed pair's cost in kernel evaluations (see :func:`traverse_lattice`).
    ``fields`` "B" leaves the A rows at zero (the sums over point pairs then skip A)."""
    from fieldenergy.kernels._treecode import _csr, evaluate_points

    src = sources
    pts = np.ascontiguousarray(targets, dtype=np.float64)
    perm, start, end, first, nch, parent, level, ijk, box = build_lattice_tree(
        pts, src.lo, src.width, leaf_size, src.max_level)
    tx, ty, tz = (np.ascontiguousarray(pts[perm, k]) for k in range(3))
    count = end - start
    t_grid = np.full(len(count), -1, np.int64)
    has = count >= min_grid
    n_t = int(has.sum())
    t_grid[has] = np.arange(n_t)
    it_t, it_s, it_k, it_o = traverse_lattice(
        np.flatnonzero(parent < 0), box, level, ijk, count, first, nch, has,
        src.roots, src.box, src.level, src.ijk, src.count, src.first, src.nch, src.grid_id >= 0,
        float(src.n_grid), float(m2l_cost))
    out = np.zeros((6, len(pts)))
    to_points = (it_k == DIRECT) | (it_k == GRID_TO_POINTS)
    order, csr = _csr(it_t[to_points], len(count))
    m2p = np.unique(it_s[it_k == GRID_TO_POINTS])
    m2p_id = np.full(len(src.count), -1, np.int64)
    m2p_id[m2p] = np.arange(len(m2p))
    evaluate_points(tx, ty, tz, start, end, nch, parent, csr, it_s[to_points][order], it_k[to_points][order],
                    src.x, src.y, src.z, src.q[0], src.q[1], src.q[2], src.start, src.end, src.box, m2p_id,
                    src.grid_charges(m2p), src.nodes, 2 if fields == "B" else 0, out)
    if n_t:
        p2l = it_k == POINTS_TO_GRID
        order, csr = _csr(it_t[p2l], len(count))
        values = points_to_grids(np.flatnonzero(has), csr, it_s[p2l][order], box, t_grid, n_t, src.x, src.y, src.z,
                                 src.q[0], src.q[1], src.q[2], src.start, src.end, src.nodes)
        m2l = it_k == GRID_TO_GRID
        local = np.zeros((n_t, 3, src.u.shape[1]))
        tg, sg, op = t_grid[it_t[m2l]], src.grid_id[it_s[m2l]], it_o[m2l]
        by_op = np.argsort(op, kind="stable")
        bounds = np.searchsorted(op[by_op], np.arange(src.table.shape[0] + 1))
        for o in range(src.table.shape[0]):
            sel = by_op[bounds[o]:bounds[o + 1]]
            if len(sel):
                k = src.u.shape[1]
                local[tg[sel]] += (src.compressed[sg[sel]].reshape(-1, k) @ src.table[o].T).reshape(-1, 3, k)
        values += (local.reshape(-1, local.shape[2]) @ src.u.T).reshape(values.shape)
        downward(values, tx, ty, tz, start, end, first, nch, level, box, t_grid, src.nodes, src.weights, out, True)
    if fields == "B":
        out[3:] = 0.0
    result = np.empty_like(out)
    result[:, perm] = out
    return result
