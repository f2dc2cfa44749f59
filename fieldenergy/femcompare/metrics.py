"""Error norms, largest errors and magnetic energy of a field sampled at cell quadrature points."""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import MU0
from fieldenergy.errors import CompareError
from fieldenergy.femcompare.mesh import FemField
from fieldenergy.femcompare.quadrature import (
    DEFAULT_POINTS_PER_AXIS,
    CellQuadrature,
    cell_quadrature,
)

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class RegionError:
    """How far the finite-element field is from the reference over one region.

    Attributes
    ----------
    name
        The region: ``"mesh"``, a distance band such as ``"1-2 units"`` or a cell-set name.
    volume_m3
        Volume of the region (with 2 pi r on an axisymmetric mesh), m^3.
    relative_l2
        ||B_fem - B_ref||_L2 / ||B_ref||_L2 over the region (NaN if the reference vanishes there).
    error_l2
        ||B_fem - B_ref||_L2 over the region, T m^(3/2).
    max_abs_T
        Largest |B_fem - B_ref| at the region's sample points (nodes or cell centroids), T.
    max_at_m
        Where that largest error is, in the case's frame, m (empty if the region has no samples).
    energy_fem_J, energy_reference_J
        Integral of |B|^2 / (2 mu0) over the region for either field, J.
    """

    name: str
    volume_m3: float
    relative_l2: float
    error_l2: float
    max_abs_T: float
    max_at_m: tuple[float, ...]
    energy_fem_J: float
    energy_reference_J: float


def fem_values_at(fem: FemField, quad: CellQuadrature) -> Array:
    """The finite-element B at the quadrature points: interpolated nodal values, or the cell's value."""
    if fem.location == "point":
        return np.asarray(quad.interpolation @ fem.values)
    return fem.values[quad.cell]


def magnetic_energy(b: Array, weights: Array) -> float:
    """Integral of |B|^2 / (2 mu0) by quadrature (J): B (T) at the points, weights in m^3.

    Examples
    --------
    >>> round(magnetic_energy(np.array([[0.0, 0.0, 1.0]]), np.array([MU0])), 12)   # B^2 V / (2 mu0)
    0.5
    """
    return float(np.sum(weights * np.einsum("ij,ij->i", b, b)) / (2.0 * MU0))


def fem_energy(fem: FemField, n: int = DEFAULT_POINTS_PER_AXIS) -> float:
    """Magnetic energy of the finite-element field in its mesh volume (J).

    Cells are integrated with ``n`` Gauss points per reference axis; an axisymmetric mesh
    includes the 2 pi r weight of the swept volume.
    """
    quad = quadrature_of(fem, n)
    return magnetic_energy(fem_values_at(fem, quad), quad.weights)


def quadrature_of(fem: FemField, n: int = DEFAULT_POINTS_PER_AXIS) -> CellQuadrature:
    """The cell quadrature of a result's mesh; a degenerate cell's error names the result file."""
    try:
        return cell_quadrature(fem.points, list(fem.blocks), axisymmetric=fem.is_axisymmetric, n=n)
    except CompareError as exc:
        raise CompareError(exc.message, fem.source) from None


@dataclass(frozen=True, slots=True, eq=False)
class Sampled:
    """Both fields where they are compared: at quadrature points (q) and at sample points (s).

    Sample points are the mesh nodes for point data and the cell centroids for cell data;
    ``sample_points`` are in the case's frame (m).
    """

    weights: Array
    fem_q: Array
    ref_q: Array
    fem_s: Array
    ref_s: Array
    sample_points: Array


def region_error(name: str, data: Sampled, in_q: NDArray[np.bool_], in_s: NDArray[np.bool_]) -> RegionError:
    """Errors and energies over the quadrature points ``in_q`` and sample points ``in_s`` of a region."""
    w = data.weights[in_q]
    err_q = data.fem_q[in_q] - data.ref_q[in_q]
    err_sq = float(np.sum(w * np.einsum("ij,ij->i", err_q, err_q)))
    ref_sq = float(np.sum(w * np.einsum("ij,ij->i", data.ref_q[in_q], data.ref_q[in_q])))
    err_s = np.linalg.norm(data.fem_s[in_s] - data.ref_s[in_s], axis=1)
    if len(err_s):
        k = int(np.argmax(err_s))
        max_abs, where = float(err_s[k]), tuple(float(x) for x in data.sample_points[in_s][k])
    else:
        max_abs, where = 0.0, ()
    return RegionError(
        name=name,
        volume_m3=float(w.sum()),
        relative_l2=math.sqrt(err_sq / ref_sq) if ref_sq > 0.0 else math.nan,
        error_l2=math.sqrt(err_sq),
        max_abs_T=max_abs,
        max_at_m=where,
        energy_fem_J=magnetic_energy(data.fem_q[in_q], w),
        energy_reference_J=magnetic_energy(data.ref_q[in_q], w),
    )


def band_errors(
    data: Sampled, distance_q: Array, distance_s: Array, unit: float, edges: tuple[float, ...]
) -> list[RegionError]:
    """Errors in bands of distance from the conductors: [0, e0), [e0, e1), ..., [e_last, inf) units."""
    bounds = [0.0, *edges, math.inf]
    out = []
    for lo, hi in itertools.pairwise(bounds):
        in_q = (distance_q >= lo * unit) & (distance_q < hi * unit)
        in_s = (distance_s >= lo * unit) & (distance_s < hi * unit)
        label = f"{lo:g}-{hi:g} units" if math.isfinite(hi) else f">= {lo:g} units"
        out.append(region_error(label, data, in_q, in_s))
    return out


def set_errors(
    data: Sampled, sets: dict[str, NDArray[np.int64]], fem: FemField, quad_cell: NDArray[np.int64]
) -> list[RegionError]:
    """Errors over each named cell set (its samples: the set's cells, or the nodes of its cells)."""
    out = []
    for name, members in sets.items():
        in_cells = np.zeros(fem.n_cells, dtype=bool)
        in_cells[members] = True
        if fem.location == "cell":
            in_s = in_cells
        else:
            in_s = np.zeros(len(fem.points), dtype=bool)
            for conn, first in _blocks_with_offsets(fem):
                in_s[conn[in_cells[first : first + len(conn)]].ravel()] = True
            in_s = in_s[fem.used_nodes()]
        out.append(region_error(name, data, in_cells[quad_cell], in_s))
    return out


def _blocks_with_offsets(fem: FemField) -> list[tuple[NDArray[np.int64], int]]:
    out, first = [], 0
    for _, conn in fem.blocks:
        out.append((conn, first))
        first += len(conn)
    return out

