"""B and A at many points by fast summation, with exact near-field corrections.

A = mu0/(4 pi) int I dl / r is three Laplace potentials: each element contributes a few
point "charges" I dr/ds w_i (a Gauss rule along its exact path). Their sum is evaluated by
one of two engines:

``tree`` (the default; no extra dependency)
    a fast multipole method on Chebyshev grids: the lattice FMM of
    :mod:`fieldenergy.kernels._lattice` (compressed operators between cells of one lattice),
    or for fields that nearly cancel the dual-tree treecode of
    :mod:`fieldenergy.kernels._treecode` (see :data:`TREE_SETTINGS`), each returning A and
    B = curl A, with :data:`TREE_SOURCES` point sources per element;
``fmm``
    fmm3dpy's Laplace fast multipole method (kernel 1/(4 pi r)), so A = mu0 * potential and
    B = curl A from the potential gradients, with :data:`FAST_ORDER` sources per element.
    fmm3dpy is an optional dependency (``pip install fieldenergy[fast]``), imported where used.

The Gauss rule is accurate only away from an element; for points within
:data:`NEAR_RATIO` element sizes the point-source part is subtracted and the element's
exact-path field added (:mod:`fieldenergy.kernels._fast_near`), so the accuracy next to the
conductors equals the direct method's. Targets are processed in chunks, so memory stays
bounded for any map size.

References
----------
L. Greengard and V. Rokhlin, "A fast algorithm for particle simulations", J. Comput. Phys.
73, 325 (1987): the fast multipole method.
L. Wilson, N. Vaughn and R. Krasny, Comput. Phys. Commun. 265, 108017 (2021): the barycentric
Lagrange dual tree traversal used by the treecode.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import MU0, MU0_OVER_4PI
from fieldenergy.errors import FieldEnergyError
from fieldenergy.fields import _check_finite_result, _points
from fieldenergy.kernels._biot_savart import _segment_table
from fieldenergy.kernels._fast_near import near_correction, near_segment_correction
from fieldenergy.kernels._lattice import LatticeSources, lattice_field
from fieldenergy.kernels._treecode import SourceTree, build_tree, tree_field
from fieldenergy.maps.exact_path import (
    FAR_RATIO,
    MAX_SUBDIVISIONS,
    ExactElements,
    gauss_rule,
)

#: Point sources per element in the multipole sum. With :data:`NEAR_RATIO` = 3 the rule's
#: error at the nearest far point is about (6 + sqrt 37)^(-2 x 6) ~ 1e-13 of the element's field.
FAST_ORDER: int = 6

#: Points closer than this many element sizes to an element get the exact-path correction.
NEAR_RATIO: float = 3.0

#: Requested relative precision of the multipole sum.
FMM_EPS: float = 1.0e-10

#: Targets per multipole call: bounds the memory of the outputs and of the target tree.
FAST_CHUNK: int = 200_000

#: Point sources per multipole call (the sum is linear, so source chunks are added up).
#: fmm3dpy's peak memory is set by the sources: measured 1.3 GiB for 6e4 sources (with
#: 2e4 or 1e5 targets alike) and 7.9 GiB for 3e5; this keeps one call near 1.3 GiB.
FAST_SOURCE_CHUNK: int = 60_000

#: Point sources per element for the treecode. With :data:`NEAR_RATIO` = 3 the rule's error
#: at the nearest far point is about (6 + sqrt 37)^(-2 x 4) ~ 2e-9 of the element's field,
#: below the treecode's own interpolation error.
TREE_SOURCES: int = 4

#: Chebyshev grid order p of the treecode's proxies ((p + 1)^3 points per cell), its
#: separation parameter (cells interact through proxies when (r_T + r_S) < theta R) and the
#: most points in a leaf cell. Measured on 3e5 targets from a stack of 100 loops of 1000
#: elements (2 cores; largest relative error of B on 1500 sampled targets, some next to the
#: wires): p = 7, theta = 0.5: 25 s, 1.4e-7; p = 9, theta = 0.7, leaves of 300: 19.5 s, 1.2e-7;
#: p = 7, theta = 0.55: 18 s, 5.2e-7; p = 6 or 7 at theta = 0.7: 9 to 10 s but 1e-5 to 6e-5.
#: On 1e6 targets the first two took 55 and 57 s (errors 1.4e-7 and 4.0e-7): the first is kept.
TREE_ORDER: int = 7
TREE_THETA: float = 0.5

#: The lattice FMM (:mod:`fieldenergy.kernels._lattice`): grid order, relative tolerance of
#: its compressed operators, most sources and targets in a leaf cell, fewest points in a cell
#: with a grid. Measured on 1e6 targets from the 1e5-element benchmark's 4e5 point sources
#: (2 cores, far sum only; largest relative error of B on 300 sampled targets against direct
#: summation of the same sources): order 9 (tolerance 1e-9, rank 266), leaves 64/64, grids
#: from 32 points: 9.0 s, 6.8e-7; order 10 (rank 267): 9.5 s, 2.9e-7; with target leaves of
#: 128 and grids from 48 points: 5.9 s, 2.9e-7. The dual treecode's default took 31.9 s.
#: The whole map with its estimate (benchmarks/bench_maps.py): 14.5 s (the treecode: 39.8 s),
#: largest error 5.5e-7 farther than 5 mm from the wires; 1e7 targets from 1e6 elements:
#: 143.6 s (the treecode, at the order its pilot chose: 1224.8 s), peak memory 3.76 GiB.
LATTICE_ORDER: int = 10
LATTICE_TOLERANCE: float = 1.0e-9
LATTICE_SOURCE_LEAF: int = 64
LATTICE_TARGET_LEAF: int = 128
LATTICE_MIN_GRID: int = 48

#: A compressed grid-to-grid pair's cost in kernel evaluations per multiply-add of its
#: k x k x 3 product (measured: batched products run about 15 times as many multiply-adds a
#: second as the pair sums run kernel evaluations).
LATTICE_PAIR_COST: float = 1.0 / 15.0

#: Fast-sum settings (scheme, grid order, theta, point sources per element) tried in turn for a
#: map whose estimated error is too large (see :mod:`fieldenergy.maps.evaluate`): the lattice
#: FMM, then the dual treecode for fields that nearly cancel (higher order, then more sources).
#: Both fast sums' errors and the point-source rule's are fractions of the sum of the
#: contributions' sizes, so where those cancel (just outside a long solenoid |B| is ~1e-3 of
#: its peak) they grow relative to the local field. The lattice's cells see each other at one
#: cell's gap; the treecode's at theta = 0.5, a wider separation at which its sums are more
#: accurate. Measured on 300 points around a solenoid of 1000 loops of 1000 elements (4e6
#: point sources, against direct summation of the same sources): lattice order 10, largest
#: error 2.5e-5 of the local |B| just outside the winding, where |B| is 4e-4 of its peak
#: (order 12: 6e-6); median 4e-8. On 3000 points 1 to 10 cm outside a solenoid of 1000 loops
#: of 25 elements, the treecode (7, 0.5, 4): 6.7e-6; (9, 0.5, 4) 6.6e-7, the source rule's
#: floor; (9, 0.5, 6) 7.3e-9 at 1.2x the time.
TREE_SETTINGS: tuple[tuple[str, int, float, int], ...] = (
    ("lattice", LATTICE_ORDER, 0.0, TREE_SOURCES), ("dual", 9, 0.5, TREE_SOURCES), ("dual", 9, 0.5, 6))

#: Target leaves (of :data:`TREE_TARGET_LEAF` points) drawn for a pilot of a large point set:
#: whole leaves, so that the pilot's cells are as small as the full set's and its treecode
#: error alike (a scattered sample's is far smaller, see :data:`ESTIMATE_TREE`).
PILOT_LEAVES: int = 12

#: Treecode settings of the error estimate's sample evaluations (see
#: :mod:`fieldenergy.maps.evaluate`). A sample of a few thousand points scattered over a map
#: gets large target cells, so most of its sum is direct and its error is far below a dense
#: map's: measured 7e-13 against direct summation on 4096 of the 1e5-element benchmark's
#: targets, in 4.7 s against 35 s for direct summation.
ESTIMATE_TREE: tuple[str, int, float, int] = ("dual", 11, 0.5, 8)

#: Treecode settings of the error estimate's lower-order evaluation, which measures the
#: integration rule next to the conductors; its own summation error on a scattered sample is
#: about 1e-11 (measured 5e-11 on the same 4096 targets).
ESTIMATE_LOW_TREE: tuple[str, int, float, int] = ("dual", 9, 0.5, 6)

TREE_SOURCE_LEAF: int = 200
TREE_TARGET_LEAF: int = 200

#: Targets per fast-sum call (spatially sorted, see fast_field): bounds the memory of the target
#: tree and its proxies and paces progress reports; measured 5 % slower than 1e6 per call.
TREE_CHUNK: int = 250_000

#: Fast summation engines (see the module docstring).
ENGINES: tuple[str, ...] = ("tree", "fmm")

#: Straight segments nearer to a point than this many core radii are summed in closed form
#: (inside a conductor the finite-core rule also applies to segments whose line passes within a
#: core radius of the point beyond their ends, where it differs from the line field by O((a/z)^2)
#: at axial distance z; at 8 radii the field energy of a rectangular pack of short chords came
#: within 1e-7 of direct summation).
NEAR_CORE_RADII: float = 8.0

#: Most grid cells along one axis of the near-element search grid.
MAX_GRID_CELLS: int = 256

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class TreeSettings:
    """Fast-sum settings: scheme (``lattice`` FMM or ``dual`` treecode), Chebyshev grid order,
    the treecode's separation parameter theta (unused by the lattice) and point sources per
    element (see :data:`TREE_SETTINGS`)."""

    scheme: str = "lattice"
    order: int = LATTICE_ORDER
    theta: float = 0.0
    sources: int = TREE_SOURCES

    def describe(self) -> str:
        """One line for reports, e.g. ``lattice FMM order 10, 4 sources per element``."""
        how = "lattice FMM" if self.scheme == "lattice" else f"dual treecode theta {self.theta}"
        return f"{how} order {self.order}, {self.sources} sources per element"


class FastFieldUnavailable(FieldEnergyError):
    """The fmm engine was asked for but fmm3dpy is not installed."""


def has_fmm() -> bool:
    """Whether fmm3dpy can be imported."""
    try:
        import fmm3dpy  # noqa: F401
    except ImportError:
        return False
    return True


class TreeSum:
    """The fast-sum field of a set of elements, built once and evaluated at many point sets.

    ``scheme`` is ``lattice`` (the lattice FMM; the default) or ``dual`` (the treecode, with
    separation parameter ``theta``), ``order`` the grid order (the defaults give about 1e-7
    relative; lower orders are cheaper and less accurate), ``sources`` the point sources per element.
    """

    def __init__(self, elements: ExactElements, scheme: str = "lattice", order: int | None = None,
                 theta: float | None = None, sources: int | None = None) -> None:
        if scheme not in ("lattice", "dual"):
            raise ValueError(f"unknown fast-sum scheme {scheme!r}; known: lattice, dual")
        order = (LATTICE_ORDER if scheme == "lattice" else TREE_ORDER) if order is None else order
        theta = (0.0 if scheme == "lattice" else TREE_THETA) if theta is None else theta
        sources = TREE_SOURCES if sources is None else sources
        self.settings = TreeSettings(scheme, order, theta, sources)
        self.elements = elements
        self.theta = theta
        self.src_pos, self.src_chg = point_sources(elements, sources)
        self.grid = _element_grid(elements)
        self.rule = gauss_rule(elements.order)[:3]
        pos, chg = self.src_pos.reshape(-1, 3), self.src_chg.reshape(-1, 3)
        if scheme == "lattice":
            from fieldenergy.operator_cache import lattice_operators

            ops = lattice_operators(order, LATTICE_TOLERANCE)
            self.lattice: LatticeSources | None = LatticeSources(pos, chg, order, ops, LATTICE_SOURCE_LEAF,
                                                                 LATTICE_MIN_GRID)
        else:
            self.lattice = None
            self.tree = SourceTree(pos, chg, order, TREE_SOURCE_LEAF)

    def far(self, points: Array, fields: str) -> Array:
        """The point sources' B and A (6, m), without mu0 / (4 pi), at points (m, 3)."""
        if self.lattice is not None:
            k = self.lattice.u.shape[1]
            return lattice_field(points, self.lattice, LATTICE_TARGET_LEAF, LATTICE_MIN_GRID,
                                 3.0 * k * k * LATTICE_PAIR_COST, fields)
        return tree_field(points, self.tree, self.theta, TREE_TARGET_LEAF, fields)

    def __call__(self, points: Array, b: Array, a: Array, max_subdivisions: int = MAX_SUBDIVISIONS,
                 potential: bool = True) -> None:
        """Write B (T) and A (T m) at points (m, 3), C-contiguous, into b and a (m, 3); without
        ``potential`` the far sum leaves A out (faster) and a holds only the near corrections."""
        out = self.far(points, "BA" if potential else "B")
        b[:] = MU0_OVER_4PI * out[:3].T
        a[:] = MU0_OVER_4PI * out[3:].T
        el = self.elements
        near_correction(points, el.nodes, el.tang, el.ends, el.sag, el.radii, self.src_pos, self.src_chg, *self.rule,
                        FAR_RATIO, max_subdivisions, NEAR_RATIO, *self.grid, b, a)


class SegmentTreeSum:
    """The treecode B of straight segments with finite cores, built once, evaluated at many point sets.

    Equal to :func:`fieldenergy.kernels._biot_savart.b_from_segments` (same closed form and
    core rule next to the segments) up to the treecode's tolerance: segments nearer to a
    point than :data:`NEAR_RATIO` lengths or :data:`NEAR_CORE_RADII` core radii are summed in
    closed form, the rest as :data:`TREE_SOURCES` Gauss point sources each.
    """

    def __init__(self, starts: Array, ends: Array, currents: Array, radii: Array, order: int | None = None,
                 theta: float | None = None) -> None:
        order = TREE_ORDER if order is None else order
        self.theta = TREE_THETA if theta is None else theta
        self.src_pos, chg = segment_sources(starts, ends, TREE_SOURCES)
        self.src_chg = np.ascontiguousarray(currents[:, None, None] * chg)
        d = ends - starts
        self.tab = _segment_table(starts, ends, currents, radii)
        lengths = np.linalg.norm(d, axis=1)
        self.reach = np.maximum(NEAR_RATIO * lengths, NEAR_CORE_RADII * radii)
        self.grid = _midpoint_grid(0.5 * (starts + ends), self.reach + 0.5 * lengths)
        self.tree = SourceTree(self.src_pos.reshape(-1, 3), self.src_chg.reshape(-1, 3), order, TREE_SOURCE_LEAF)

    def __call__(self, points: Array, b: Array) -> None:
        """Write B (T) at points (m, 3), C-contiguous, into b (m, 3)."""
        out = tree_field(points, self.tree, self.theta, TREE_TARGET_LEAF, "B")
        b[:] = MU0_OVER_4PI * out[:3].T
        near_segment_correction(points, self.tab, self.src_pos, self.src_chg, self.reach, *self.grid, b)


def pilot_points(points: Array, leaves: int | None = None) -> NDArray[np.int64]:
    """Indices of the points of ``leaves`` (default :data:`PILOT_LEAVES`) randomly drawn
    (seeded) leaf cells of the points' treecode target tree: clusters as dense as the full
    set's (sorted)."""
    leaves = PILOT_LEAVES if leaves is None else leaves
    perm, start, end, _, nch, _, _, _ = build_tree(np.ascontiguousarray(points, dtype=np.float64), TREE_TARGET_LEAF)
    leaf = np.flatnonzero(nch == 0)
    pick = np.random.default_rng(0).choice(leaf, min(leaves, len(leaf)), replace=False)
    return np.sort(np.concatenate([perm[start[c]:end[c]] for c in pick])).astype(np.int64)


def fast_field(
    points: ArrayLike, elements: ExactElements, *, engine: str = "tree", eps: float = FMM_EPS,
    settings: TreeSettings | None = None, tree: TreeSum | None = None, max_subdivisions: int = MAX_SUBDIVISIONS,
    potential: bool = True, progress: Callable[[int], None] | None = None,
) -> tuple[Array, Array | None]:
    """B (T) and A (T m) at points (m, shape (m, 3)) by fast summation with exact near corrections.

    Without ``potential`` the fast sum sums B alone (faster) and A is None.

    ``engine`` is ``tree`` (the built-in fast sums, with ``settings``: the lattice FMM's defaults if None; or ``tree``,
    one already built for these elements, which saves building its source tree again) or
    ``fmm`` (fmm3dpy, with requested precision eps); ``max_subdivisions`` is the exact-path
    rule's (see :func:`fieldenergy.maps.exact_path.exact_field`).

    Raises
    ------
    FastFieldUnavailable
        If the fmm engine is asked for and fmm3dpy is not installed.
    GeometryError
        For bad points, or a point on a zero-radius conductor.
    """
    if engine not in ENGINES:
        raise ValueError(f"unknown fast engine {engine!r}; known: {', '.join(ENGINES)}")
    pts = _points(points)
    el = elements
    b = np.empty((len(pts), 3))
    if engine == "tree":
        a = np.empty((len(pts), 3)) if potential else np.empty((0, 3))
        if tree is None:
            tree = TreeSum(el) if settings is None else TreeSum(el, settings.scheme, settings.order, settings.theta,
                                                                 settings.sources)
        # Chunks of spatially sorted targets (the octree's depth-first order), so that each
        # chunk is compact: random chunks of a large map each span the whole volume and
        # measured 35 % slower in chunks of 2.5e5 than in one call.
        order = build_tree(pts, TREE_TARGET_LEAF)[0]
        for i0 in range(0, len(pts), TREE_CHUNK):
            i1 = min(len(pts), i0 + TREE_CHUNK)
            idx = order[i0:i1]
            b_part, a_part = np.empty((len(idx), 3)), np.empty((len(idx), 3))
            tree(np.ascontiguousarray(pts[idx]), b_part, a_part, max_subdivisions, potential)
            b[idx] = b_part
            if potential:
                a[idx] = a_part
            if progress is not None:
                progress(i1)
        _check_finite_result(b, pts)
        return b, a if potential else None
    a = np.empty((len(pts), 3))
    try:
        import fmm3dpy
    except ImportError:
        raise FastFieldUnavailable("the fmm engine needs fmm3dpy: pip install 'fieldenergy[fast]'") from None
    src_pos, src_chg = point_sources(el, FAST_ORDER)
    grid = _element_grid(el)
    xg, wg, bary, _ = gauss_rule(el.order)
    sources = np.ascontiguousarray(src_pos.reshape(-1, 3).T)
    charges = np.ascontiguousarray(src_chg.reshape(-1, 3).T)
    for i0 in range(0, len(pts), FAST_CHUNK):
        i1 = min(len(pts), i0 + FAST_CHUNK)
        pot, g = _multipole_sum(fmm3dpy, eps, sources, charges, np.ascontiguousarray(pts[i0:i1].T))
        a[i0:i1] = MU0 * pot.T
        b[i0:i1] = MU0 * np.column_stack([g[2, 1] - g[1, 2], g[0, 2] - g[2, 0], g[1, 0] - g[0, 1]])
        near_correction(pts[i0:i1], el.nodes, el.tang, el.ends, el.sag, el.radii, src_pos, src_chg, xg, wg, bary,
                        FAR_RATIO, max_subdivisions, NEAR_RATIO, *grid, b[i0:i1], a[i0:i1])
        if progress is not None:
            progress(i1)
    _check_finite_result(b, pts)
    return b, a if potential else None


def _multipole_sum(fmm3dpy: object, eps: float, sources: Array, charges: Array, targets: Array) -> tuple[Array, Array]:
    """Potentials (3, m) and their gradients (3, 3, m) at targets, source chunk by source chunk."""
    pot = np.zeros((3, targets.shape[1]))
    grad = np.zeros((3, 3, targets.shape[1]))
    for j0 in range(0, sources.shape[1], FAST_SOURCE_CHUNK):
        j1 = min(sources.shape[1], j0 + FAST_SOURCE_CHUNK)
        out = fmm3dpy.lfmm3d(eps=eps, sources=np.ascontiguousarray(sources[:, j0:j1]),  # type: ignore[attr-defined]
                             charges=np.ascontiguousarray(charges[:, j0:j1]), targets=targets, pgt=2, nd=3)
        pot += out.pottarg
        grad += out.gradtarg  # (3 components of A, 3 derivatives, points)
    return pot, grad


def segment_sources(starts: Array, ends: Array, k: int) -> tuple[Array, Array]:
    """Gauss points (n, k, 3) of straight segments and their charges (omega / 2) (b - a), (n, k, 3), m."""
    xs, ws = np.polynomial.legendre.leggauss(k)
    d = ends - starts
    pos = starts[:, None, :] + 0.5 * (1.0 + xs)[None, :, None] * d[:, None, :]
    chg = (0.5 * ws)[None, :, None] * d[:, None, :]
    return np.ascontiguousarray(pos), np.ascontiguousarray(chg)


def point_sources(elements: ExactElements, order: int) -> tuple[Array, Array]:
    """Gauss points (n, order, 3) of each element and their weights x I dr/ds (n, order, 3)."""
    xg, _, bary, dmat = gauss_rule(elements.order)
    xs, ws = np.polynomial.legendre.leggauss(order)
    diff = xs[:, None] - xg[None, :]
    on_node = np.abs(diff) < 1e-15
    diff[on_node] = 1.0
    basis = bary[None, :] / diff
    dbasis = -bary[None, :] / diff**2
    den, dden = basis.sum(axis=1), dbasis.sum(axis=1)
    pos_basis = basis / den[:, None]
    der_basis = (dbasis - pos_basis * dden[:, None]) / den[:, None]
    hit, node = np.nonzero(on_node)  # a source on an interpolation node: the node's own rows
    pos_basis[hit] = np.eye(len(xg))[node]
    der_basis[hit] = dmat[node]
    pos = np.einsum("sj,ejk->esk", pos_basis, elements.nodes)
    der = np.einsum("sj,ejk->esk", der_basis, elements.nodes)
    chg = der * (ws[None, :, None] * elements.tang[:, :1, 3:4])
    return np.ascontiguousarray(pos), np.ascontiguousarray(chg)


def _element_grid(el: ExactElements) -> tuple[Array, float, NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """Uniform grid of element chord midpoints in CSR form (see the kernel's docstring)."""
    a, b = el.ends[:, :3], el.ends[:, 3:]
    h = np.linalg.norm(b - a, axis=1)
    return _midpoint_grid(0.5 * (a + b), (NEAR_RATIO + 0.5) * h + el.sag)


def _midpoint_grid(mid: Array, reach: Array) -> tuple[Array, float, NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """Uniform grid of midpoints in CSR form, cells no smaller than any reach (from a midpoint)."""
    far = float(np.max(reach)) if len(reach) else 1.0
    lo, hi = (mid.min(axis=0), mid.max(axis=0)) if len(mid) else (np.zeros(3), np.zeros(3))
    cell = max(far, float(np.max(hi - lo)) / MAX_GRID_CELLS) * (1.0 + 1e-9)
    dims = (np.floor((hi - lo) / cell).astype(np.int64) + 1)
    idx = np.floor((mid - lo) / cell).astype(np.int64)
    key = idx[:, 0] + dims[0] * (idx[:, 1] + dims[1] * idx[:, 2])
    order = np.argsort(key, kind="stable").astype(np.int64)
    start = np.searchsorted(key[order], np.arange(int(np.prod(dims)) + 1)).astype(np.int64)
    return lo.astype(np.float64), cell, dims, start, order
