"""compare_fem(case, fem) -> Comparison: a finite-element B field against the Biot-Savart reference.

The reference is the case's field as drawn, extrapolated over the two finest refinement levels
of the solve options (:func:`fieldenergy.fieldmap.field_with_error`), evaluated at the mesh's
sample points (nodes for point data, cell centroids for cell data) and at the quadrature points
of every cell. On an axisymmetric mesh the errors and both energies use (B_r, B_z) at
phi = 0; the reference's B_phi (zero for an axisymmetric case) is not part of the comparison.
Nothing here touches the file system.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.discretise import discretise
from fieldenergy.errors import CompareError
from fieldenergy.femcompare.distance import conductor_distance
from fieldenergy.femcompare.mesh import FemField
from fieldenergy.femcompare.metrics import (
    RegionError,
    Sampled,
    band_errors,
    fem_values_at,
    quadrature_of,
    region_error,
    set_errors,
)
from fieldenergy.femcompare.quadrature import DEFAULT_POINTS_PER_AXIS
from fieldenergy.maps.evaluate import reference_field
from fieldenergy.model import Case
from fieldenergy.model.options import SolveOptions
from fieldenergy.run import ProgressFactory, settings_for

Array = NDArray[np.float64]

#: Upper edges of the distance bands, in band units (see :class:`~fieldenergy.femcompare.distance.ConductorDistance`).
DEFAULT_BAND_EDGES: tuple[float, ...] = (1.0, 2.0, 4.0, 8.0, 16.0, 32.0)

#: A ratio ||B_fem||_L2 / ||B_ref||_L2 over the mesh beyond this factor (either way) is a set-up
#: mismatch (units, current, turns, placement), not a discretisation error; the comparison stops.
UNIT_MISMATCH_FACTOR: float = 20.0

#: A ratio within this factor of 1000 or 1/1000 is reported as a likely mT/T mix-up.
THOUSAND_HINT_FACTOR: float = 3.0

#: A mesh larger than this many times the conductors' size suggests it was drawn in mm: a
#: truncated FEM box is commonly 5 to 20 conductor sizes across (common practice).
MM_HINT_SIZE_RATIO: float = 50.0

#: Floor of the denominator of the per-point relative error, as a fraction of the largest |B_ref|.
RELATIVE_ERROR_FLOOR: float = 1.0e-6


@dataclass(frozen=True, slots=True, eq=False)
class Comparison:
    """A finite-element B field compared with the Biot-Savart reference.

    Attributes
    ----------
    fem
        The compared result.
    whole
        Errors and energies over the whole mesh volume.
    bands
        The same by distance from the nearest conductor centre line, in bands of ``band_unit_m``.
    sets
        The same by the mesh's cell sets (empty if it has none).
    band_unit_m, band_edges
        Band unit (m) and the band edges in units.
    conductor_size_m
        Bounding-box diagonal of the conductor centre lines, m.
    sample_points
        Where the fields are compared point by point (nodes or cell centroids), case frame, m.
    b_fem, b_reference
        The compared components of B at the sample points, T (3, or (B_r, B_z)).
    reference_error
        Estimated error of the reference at each sample point (Richardson correction), T.
    distance
        Distance of each sample point from the nearest conductor centre line, m.
    reference_relative_l2
        Estimated relative L2 error of the reference over the mesh volume.
    norm_ratio
        ||B_fem||_L2 / ||B_ref||_L2 over the mesh volume (the square root of the energy ratio).
    """

    fem: FemField
    whole: RegionError
    bands: tuple[RegionError, ...]
    sets: tuple[RegionError, ...]
    band_unit_m: float
    band_edges: tuple[float, ...]
    conductor_size_m: float
    sample_points: Array
    b_fem: Array
    b_reference: Array
    reference_error: Array
    distance: Array
    reference_relative_l2: float
    norm_ratio: float

    @property
    def error(self) -> Array:
        """B_fem - B_ref at the sample points, T."""
        return self.b_fem - self.b_reference

    @property
    def relative_error(self) -> Array:
        """|B_fem - B_ref| / |B_ref| at the sample points (denominator floored at 1e-6 of the largest)."""
        ref = np.linalg.norm(self.b_reference, axis=1)
        floor = max(RELATIVE_ERROR_FLOOR * float(ref.max(initial=0.0)), float(np.finfo(np.float64).tiny))
        return np.linalg.norm(self.error, axis=1) / np.maximum(ref, floor)


def compare_fem(
    case: Case,
    fem: FemField,
    options: SolveOptions | None = None,
    *,
    points_per_axis: int = DEFAULT_POINTS_PER_AXIS,
    band_edges: tuple[float, ...] = DEFAULT_BAND_EDGES,
    method: str = "auto",
    progress: ProgressFactory | None = None,
) -> Comparison:
    """Compare a finite-element B field with the case's Biot-Savart field on the same mesh.

    Parameters
    ----------
    case
        The conductors as drawn, with their circuit currents.
    fem
        The finite-element result (see :func:`~fieldenergy.femcompare.read_fem_result`).
    options
        Solve settings of the reference; the ``default`` preset if omitted.
    points_per_axis
        Gauss points per reference-cell axis.
    band_edges
        Upper edges of the distance bands, in band units (increasing).
    method
        How the reference is evaluated: ``auto`` (the fast multipole method on the exact
        paths for large meshes, if fmm3dpy is installed), ``direct`` or ``fast`` (see
        :func:`fieldenergy.maps.evaluate.reference_field`).
    progress
        Optional progress-bar factory for the reference evaluation.

    Raises
    ------
    CompareError
        Degenerate cells, or a field norm ratio that points to mismatched units or set-up.
    """
    options = options or SolveOptions()
    quad = quadrature_of(fem, points_per_axis)
    samples = fem.points[fem.used_nodes()] if fem.location == "point" else quad.centroids
    fem_s = fem.values[fem.used_nodes()] if fem.location == "point" else fem.values
    pts_s, pts_q = fem.to_3d(samples), fem.to_3d(quad.points)
    b, _, err = reference_field(case, np.concatenate([pts_s, pts_q]), options, method=method, progress=progress)
    ns = len(pts_s)
    data = Sampled(quad.weights, fem_values_at(fem, quad), fem.components(b[ns:]), fem_s, fem.components(b[:ns]), pts_s)
    model = discretise(case, level=0, discretisation=settings_for(case, options))
    dist = conductor_distance(model)
    whole = region_error("mesh", data, np.ones(len(pts_q), dtype=bool), np.ones(ns, dtype=bool))
    ratio = math.sqrt(whole.energy_fem_J / whole.energy_reference_J) if whole.energy_reference_J > 0 else math.nan
    _check_units(fem, ratio, pts_s, dist.size)
    d_s, d_q = dist(pts_s), dist(pts_q)
    ref_sq = float(np.sum(quad.weights * np.einsum("ij,ij->i", data.ref_q, data.ref_q)))
    ref_err = math.sqrt(float(np.sum(quad.weights * err[ns:] ** 2)) / ref_sq) if ref_sq > 0 else math.nan
    return Comparison(
        fem=fem,
        whole=whole,
        bands=tuple(band_errors(data, d_q, d_s, dist.unit, band_edges)),
        sets=tuple(set_errors(data, fem.cell_sets, fem, quad.cell)),
        band_unit_m=dist.unit,
        band_edges=tuple(band_edges),
        conductor_size_m=dist.size,
        sample_points=pts_s,
        b_fem=data.fem_s,
        b_reference=data.ref_s,
        reference_error=err[:ns],
        distance=d_s,
        reference_relative_l2=ref_err,
        norm_ratio=ratio,
    )


def _check_units(fem: FemField, ratio: float, pts: Array, case_size: float) -> None:
    """Stop with a hint when the field ratio shows a set-up or unit mismatch rather than an error."""
    if not math.isfinite(ratio) or 1.0 / UNIT_MISMATCH_FACTOR <= ratio <= UNIT_MISMATCH_FACTOR:
        return
    extent = float(np.linalg.norm(np.ptp(pts, axis=0))) if len(pts) else 0.0
    hints = []
    if abs(math.log10(ratio / 1.0e3)) < math.log10(THOUSAND_HINT_FACTOR) or abs(
        math.log10(ratio * 1.0e3)
    ) < math.log10(THOUSAND_HINT_FACTOR):
        hints.append("the ratio is about a factor of 1000: is B in mT or kT instead of tesla?")
    size_ratio = extent / case_size if case_size > 0 else math.nan
    if math.isfinite(size_ratio) and size_ratio > MM_HINT_SIZE_RATIO:
        hints.append(f"the mesh is {size_ratio:.3g} times the conductors' size: drawn in mm? use --length-unit mm")
    elif math.isfinite(size_ratio) and size_ratio < 1.0 / MM_HINT_SIZE_RATIO:
        hints.append(f"the mesh is only {size_ratio:.3g} times the conductors' size: check --length-unit / --scale")
    hints = hints or ["check the length unit, the currents and turns, and where the mesh sits relative to the case"]
    raise CompareError(
        f"field {fem.field_name!r}: ||B_fem||/||B_ref|| over the mesh is {ratio:.3g}, expected within a factor "
        f"{UNIT_MISMATCH_FACTOR:g} of 1 (mesh extent {extent:.3g} m, conductors {case_size:.3g} m); "
        + "; ".join(hints),
        fem.source,
    )
