"""B and A at many points by fast summation, with exact near-field corrections.

A = mu0/(4 pi) int I dl / r is three Laplace potentials: each element contributes a few
point "charges" I dr/ds w_i (a Gauss rule along its exact path). Their sum is evaluated by
one of two engines:

``tree`` (the default; no extra dependency)
    the dual-tree treecode of :mod:`fieldenergy.kernels._treecode` (barycentric Lagrange
    interpolation on Chebyshev grids), which returns A and B = curl A directly, with
    :data:`TREE_SOURCES` point sources per element;
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

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import MU0, MU0_OVER_4PI
from fieldenergy.errors import FieldEnergyError
from fieldenergy.fields import _check_finite_result, _points
from fieldenergy.kernels._fast_near import near_correction
from fieldenergy.kernels._treecode import SourceTree, tree_field
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

#: Chebyshev grid order p of the treecode's proxies ((p + 1)^3 points per cell) and its
#: separation parameter: cells interact through proxies when (r_T + r_S) < theta R.
#: Measured on a stack of 100 loops (benchmarks/bench_maps.py): p = 7, theta = 0.5 gives a
#: largest relative error of B of about 1e-7 on targets in and around the winding.
TREE_ORDER: int = 7
TREE_THETA: float = 0.5

#: Most points in a leaf cell of the source and of the target tree.
TREE_SOURCE_LEAF: int = 200
TREE_TARGET_LEAF: int = 200

#: Targets per treecode call: bounds the memory of the target tree and its proxies.
TREE_CHUNK: int = 1_000_000

#: Fast summation engines (see the module docstring).
ENGINES: tuple[str, ...] = ("tree", "fmm")

#: Most grid cells along one axis of the near-element search grid.
MAX_GRID_CELLS: int = 256

Array = NDArray[np.float64]


class FastFieldUnavailable(FieldEnergyError):
    """The fmm engine was asked for but fmm3dpy is not installed."""


def has_fmm() -> bool:
    """Whether fmm3dpy can be imported."""
    try:
        import fmm3dpy  # noqa: F401
    except ImportError:
        return False
    return True


def fast_field(
    points: ArrayLike, elements: ExactElements, *, engine: str = "tree", eps: float = FMM_EPS,
    progress: Callable[[int], None] | None = None,
) -> tuple[Array, Array]:
    """B (T) and A (T m) at points (m, shape (m, 3)) by fast summation with exact near corrections.

    ``engine`` is ``tree`` (the treecode) or ``fmm`` (fmm3dpy, with requested precision eps).

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
    if engine == "fmm":
        try:
            import fmm3dpy
        except ImportError:
            raise FastFieldUnavailable("the fmm engine needs fmm3dpy: pip install 'fieldenergy[fast]'") from None
        n_src, chunk = FAST_ORDER, FAST_CHUNK
    else:
        n_src, chunk = TREE_SOURCES, TREE_CHUNK
    src_pos, src_chg = point_sources(el, n_src)
    grid = _element_grid(el)
    xg, wg, bary, _ = gauss_rule(el.order)
    sources = np.ascontiguousarray(src_pos.reshape(-1, 3))
    charges = np.ascontiguousarray(src_chg.reshape(-1, 3))
    tree = SourceTree(sources, charges, TREE_ORDER, TREE_SOURCE_LEAF) if engine == "tree" else None
    b = np.empty((len(pts), 3))
    a = np.empty((len(pts), 3))
    for i0 in range(0, len(pts), chunk):
        i1 = min(len(pts), i0 + chunk)
        if tree is not None:
            out = tree_field(pts[i0:i1], tree, TREE_THETA, TREE_TARGET_LEAF)
            b[i0:i1] = MU0_OVER_4PI * out[:3].T
            a[i0:i1] = MU0_OVER_4PI * out[3:].T
        else:
            pot, g = _multipole_sum(fmm3dpy, eps, np.ascontiguousarray(sources.T), np.ascontiguousarray(charges.T),
                                    np.ascontiguousarray(pts[i0:i1].T))
            a[i0:i1] = MU0 * pot.T
            b[i0:i1] = MU0 * np.column_stack([g[2, 1] - g[1, 2], g[0, 2] - g[2, 0], g[1, 0] - g[0, 1]])
        near_correction(pts[i0:i1], el.nodes, el.tang, el.ends, el.sag, el.radii, src_pos, src_chg, xg, wg, bary,
                        FAR_RATIO, MAX_SUBDIVISIONS, NEAR_RATIO, *grid, b[i0:i1], a[i0:i1])
        if progress is not None:
            progress(i1)
    _check_finite_result(b, pts)
    return b, a


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
    mid = 0.5 * (a + b)
    h = np.linalg.norm(b - a, axis=1)
    reach = float(np.max((NEAR_RATIO + 0.5) * h + el.sag)) if len(h) else 1.0
    lo, hi = (mid.min(axis=0), mid.max(axis=0)) if len(h) else (np.zeros(3), np.zeros(3))
    cell = max(reach, float(np.max(hi - lo)) / MAX_GRID_CELLS) * (1.0 + 1e-9)
    dims = (np.floor((hi - lo) / cell).astype(np.int64) + 1)
    idx = np.floor((mid - lo) / cell).astype(np.int64)
    key = idx[:, 0] + dims[0] * (idx[:, 1] + dims[1] * idx[:, 2])
    order = np.argsort(key, kind="stable").astype(np.int64)
    start = np.searchsorted(key[order], np.arange(int(np.prod(dims)) + 1)).astype(np.int64)
    return lo.astype(np.float64), cell, dims, start, order
