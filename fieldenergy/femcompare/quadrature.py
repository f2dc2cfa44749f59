"""Quadrature over the cells of a finite-element mesh: points, weights and interpolation.

Every supported cell is the image of a reference cell under its linear (simplex) or
multilinear (quadrilateral, hexahedron, wedge) shape functions, with nodes in meshio's (VTK)
order. Rules on the reference cells are tensor products of Gauss-Legendre points from
:func:`numpy.polynomial.legendre.leggauss`; on triangles and tetrahedra the square and cube are
collapsed onto the simplex (Duffy's transformation), so that ``n`` points per axis integrate
polynomials of degree ``2 n - 1 - (dim - 1)`` or more exactly.

References
----------
M. G. Duffy, "Quadrature over a pyramid or cube of integrands with a singularity at a vertex",
SIAM J. Numer. Anal. 19(6), 1982 (the collapsed-coordinate map).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.sparse import csr_matrix

from fieldenergy.errors import CompareError

Array = NDArray[np.float64]

#: Gauss-Legendre points per reference axis: exact for the quadratic |B|^2 of linear
#: interpolation on every cell type, including the 2 pi r weight of an axisymmetric mesh.
DEFAULT_POINTS_PER_AXIS: int = 3

#: A cell whose Jacobian determinant is below this fraction of (its largest node distance)^dim
#: counts as having zero volume: a well-shaped cell has about 1/6 to 1.
DEGENERATE_JACOBIAN_RTOL: float = 1.0e-10

#: Corner coordinates of the tensor-product cells, in meshio (VTK) node order.
_TENSOR_CORNERS: dict[str, Array] = {
    "quad": np.array([[0, 0], [1, 0], [1, 1], [0, 1]], dtype=np.float64),
    "hexahedron": np.array(
        [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], dtype=np.float64
    ),
}

#: Cell types by dimension of the reference cell.
CELL_DIMENSION: dict[str, int] = {"triangle": 2, "quad": 2, "tetra": 3, "hexahedron": 3, "wedge": 3}


@dataclass(frozen=True, slots=True, eq=False)
class CellQuadrature:
    """Quadrature points of every cell of a mesh, in mesh coordinates.

    Attributes
    ----------
    points
        Quadrature points, shape (n_q, dim), m.
    weights
        Physical weights, shape (n_q,): volume (m^3) each point stands for, including the
        2 pi r factor on an axisymmetric mesh; they sum to the mesh volume.
    cell
        Index of the cell each point lies in, shape (n_q,), int64.
    interpolation
        Sparse matrix (n_q, n_points) of shape-function values: nodal values -> values at points.
    centroids
        Area- or volume-weighted centroid of each cell, shape (n_cells, dim), m.
    volumes
        Volume of each cell (with 2 pi r on an axisymmetric mesh), shape (n_cells,), m^3.
    """

    points: Array
    weights: Array
    cell: NDArray[np.int64]
    interpolation: csr_matrix
    centroids: Array
    volumes: Array


def reference_rule(cell_type: str, n: int = DEFAULT_POINTS_PER_AXIS) -> tuple[Array, Array]:
    """Points (shape (n_q, dim)) and weights (n_q,) on the reference cell of ``cell_type``.

    The weights sum to the reference cell's volume (1, 1/2 or 1/6).

    Examples
    --------
    >>> x, w = reference_rule("tetra", 2)
    >>> round(float(w.sum() * 6), 12), round(float(w @ x[:, 0] * 24), 12)   # volume, first moment
    (1.0, 1.0)
    """
    g, gw = np.polynomial.legendre.leggauss(n)
    g, gw = 0.5 * (g + 1.0), 0.5 * gw
    if cell_type in ("quad", "hexahedron"):
        dim = CELL_DIMENSION[cell_type]
        grids = np.meshgrid(*([g] * dim), indexing="ij")
        weights = np.prod(np.meshgrid(*([gw] * dim), indexing="ij"), axis=0)
        return np.stack([x.ravel() for x in grids], axis=1), weights.ravel()
    u, v, wt = np.meshgrid(g, g, g, indexing="ij")
    uw, vw, ww = np.meshgrid(gw, gw, gw, indexing="ij")
    if cell_type == "triangle":
        u, v, uw, vw = u[:, :, 0], v[:, :, 0], uw[:, :, 0], vw[:, :, 0]
        return np.stack([u.ravel(), (v * (1 - u)).ravel()], axis=1), (uw * vw * (1 - u)).ravel()
    if cell_type == "tetra":
        pts = np.stack([u, v * (1 - u), wt * (1 - u) * (1 - v)], axis=-1).reshape(-1, 3)
        return pts, (uw * vw * ww * (1 - u) ** 2 * (1 - v)).ravel()
    if cell_type == "wedge":
        pts = np.stack([u, v * (1 - u), wt], axis=-1).reshape(-1, 3)
        return pts, (uw * vw * ww * (1 - u)).ravel()
    raise CompareError(f"unsupported cell type {cell_type!r}; supported: {', '.join(CELL_DIMENSION)}")


def shape_functions(cell_type: str, xi: Array) -> tuple[Array, Array]:
    """Shape-function values (n_q, n_nodes) and derivatives (n_q, n_nodes, dim) at reference points."""
    if cell_type in _TENSOR_CORNERS:
        return _tensor_shape(_TENSOR_CORNERS[cell_type], xi)
    if cell_type in ("triangle", "tetra"):
        return _simplex_shape(xi)
    if cell_type == "wedge":
        tri_n, tri_d = _simplex_shape(xi[:, :2])
        line_n, line_d = _tensor_shape(np.array([[0.0], [1.0]]), xi[:, 2:])
        values = np.concatenate([tri_n * line_n[:, :1], tri_n * line_n[:, 1:]], axis=1)
        grads = [np.concatenate([tri_d * line_n[:, k : k + 1, None], tri_n[..., None] * line_d[:, k : k + 1]], axis=2)
                 for k in (0, 1)]
        return values, np.concatenate(grads, axis=1)
    raise CompareError(f"unsupported cell type {cell_type!r}; supported: {', '.join(CELL_DIMENSION)}")


def _simplex_shape(xi: Array) -> tuple[Array, Array]:
    n_q, dim = xi.shape
    values = np.concatenate([1.0 - xi.sum(axis=1, keepdims=True), xi], axis=1)
    grad = np.vstack([-np.ones((1, dim)), np.eye(dim)])
    return values, np.broadcast_to(grad, (n_q, dim + 1, dim)).copy()


def _tensor_shape(corners: Array, xi: Array) -> tuple[Array, Array]:
    factors = np.where(corners[None] == 1.0, xi[:, None, :], 1.0 - xi[:, None, :])
    slopes = np.where(corners[None] == 1.0, 1.0, -1.0) * np.ones_like(factors)
    values = np.prod(factors, axis=2)
    grads = np.empty_like(factors)
    for k in range(corners.shape[1]):
        others = np.prod(np.delete(factors, k, axis=2), axis=2)
        grads[..., k] = slopes[..., k] * others
    return values, grads


def cell_quadrature(
    points: Array,
    blocks: list[tuple[str, NDArray[np.int64]]],
    *,
    axisymmetric: bool = False,
    n: int = DEFAULT_POINTS_PER_AXIS,
) -> CellQuadrature:
    """Quadrature points and weights over all cells of the blocks (cells numbered block by block).

    Parameters
    ----------
    points
        Mesh node coordinates, shape (n_points, dim), m; on an axisymmetric mesh the columns
        are (r, z).
    blocks
        (cell type, connectivity of shape (n_cells, n_nodes)) per block, all of dimension ``dim``.
    axisymmetric
        Weight by 2 pi r (the volume swept by a turn about the axis).
    n
        Gauss points per reference axis.

    Raises
    ------
    CompareError
        A cell of zero volume, or one turned inside out against the rest of its block.

    Examples
    --------
    >>> sq = np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]])
    >>> q = cell_quadrature(sq, [("quad", np.array([[0, 1, 2, 3]]))], axisymmetric=True)
    >>> round(float(q.weights.sum() / np.pi), 12)    # 2 pi * (1/2) * 1: an annulus r < 1, height 1
    1.0
    """
    parts, first_cell = [], 0
    for cell_type, conn in blocks:
        parts.append(_block_quadrature(points, cell_type, conn, first_cell, axisymmetric, n))
        first_cell += len(conn)
    offsets = np.cumsum([0] + [len(p[0]) for p in parts])
    rows = np.concatenate([p[5] + off for p, off in zip(parts, offsets)])
    cols = np.concatenate([p[6] for p in parts])
    vals = np.concatenate([p[7] for p in parts])
    x_q = np.concatenate([p[0] for p in parts])
    interp = csr_matrix((vals, (rows, cols)), shape=(len(x_q), len(points)))
    return CellQuadrature(
        points=x_q,
        weights=np.concatenate([p[1] for p in parts]),
        cell=np.concatenate([p[2] for p in parts]),
        interpolation=interp,
        centroids=np.concatenate([p[3] for p in parts]),
        volumes=np.concatenate([p[4] for p in parts]),
    )


def _block_quadrature(
    points: Array, cell_type: str, conn: NDArray[np.int64], first_cell: int, axisymmetric: bool, n: int
) -> tuple[NDArray[Any], ...]:
    """Quadrature of one block: points, weights, cell, centroids, volumes, then sparse (rows, cols, vals).

    The rows count the block's own quadrature points from 0.
    """
    xi, w_ref = reference_rule(cell_type, n)
    values, grads = shape_functions(cell_type, xi)
    nodes = points[conn]  # (n_cells, n_nodes, dim)
    x_q = np.einsum("qn,cnd->cqd", values, nodes)
    det = np.linalg.det(np.einsum("qnk,cnd->cqdk", grads, nodes))
    _check_orientation(det, nodes, cell_type, first_cell)
    area = np.abs(det) * w_ref[None, :]
    centroids = np.einsum("cq,cqd->cd", area, x_q) / area.sum(axis=1)[:, None]
    weights = area * (2.0 * math.pi * x_q[..., 0]) if axisymmetric else area
    n_cells, n_q = det.shape
    cell = np.repeat(np.arange(first_cell, first_cell + n_cells, dtype=np.int64), n_q)
    q_index = np.arange(n_cells * n_q).reshape(n_cells, n_q)
    rows = np.broadcast_to(q_index[:, :, None], (n_cells, n_q, conn.shape[1])).ravel()
    cols = np.broadcast_to(conn[:, None, :], (n_cells, n_q, conn.shape[1])).ravel()
    vals = np.broadcast_to(values[None], (n_cells, n_q, conn.shape[1])).ravel()
    return (x_q.reshape(-1, x_q.shape[2]), weights.ravel(), cell, centroids, weights.sum(axis=1), rows, cols, vals)


def _check_orientation(det: Array, nodes: Array, cell_type: str, first_cell: int) -> None:
    """Raise for a cell of (nearly) zero volume or one whose Jacobian has the block's minority sign.

    Mesh writers differ in the sense they give a cell's nodes, so the sign shared by most
    cells of a 3D block counts as positive; a cell of the other sign is inverted. A 2D
    (r, z) cell may be drawn either way round, so there only a vanishing area is an error.
    """
    if det.size == 0:
        return
    dim = nodes.shape[2]
    size = np.max(np.linalg.norm(nodes - nodes[:, :1], axis=2), axis=1)
    scale = DEGENERATE_JACOBIAN_RTOL * size**dim
    if dim == 2:
        det = det * np.where(det[:, :1] < 0.0, -1.0, 1.0)
    sign = 1.0 if np.count_nonzero(det > 0) >= np.count_nonzero(det < 0) else -1.0
    signed = det * sign
    bad = np.flatnonzero(~np.all(signed > scale[:, None], axis=1))
    if len(bad):
        c = int(bad[0])
        worst = float(np.min(signed[c]))
        kind = "zero volume" if abs(worst) <= scale[c] else "negative volume (inverted node order or tangled)"
        raise CompareError(
            f"cell {first_cell + c} ({cell_type}, nodes {nodes[c].tolist()}) has {kind}: Jacobian determinant "
            f"{worst * sign:.3e}, expected the sign of the other cells and |det| > {scale[c]:.1e} "
            f"({len(bad)} such cells)"
        )
