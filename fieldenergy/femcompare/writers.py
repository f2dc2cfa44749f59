"""Writing a comparison: a JSON summary and the mesh annotated with the reference and the error."""

from __future__ import annotations

import json
import math
import os
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import ExportError
from fieldenergy.femcompare.compare import Comparison
from fieldenergy.femcompare.mesh import FemField
from fieldenergy.femcompare.metrics import RegionError
from fieldenergy.output.atomic import atomic_path, write_text

#: File suffixes the annotated mesh can be written to.
ANNOTATED_SUFFIXES: tuple[str, ...] = (".vtu", ".vtk")


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def _region(r: RegionError) -> dict[str, Any]:
    return {
        "name": r.name,
        "volume_m3": r.volume_m3,
        "relative_l2": _num(r.relative_l2),
        "error_l2_T_m1.5": r.error_l2,
        "max_abs_T": r.max_abs_T,
        "max_at_m": list(r.max_at_m),
        "energy_fem_J": r.energy_fem_J,
        "energy_reference_J": r.energy_reference_J,
    }


def _mesh_dict(fem: FemField, volume: float) -> dict[str, Any]:
    return {
        "file": fem.source,
        "field": fem.field_name,
        "location": fem.location,
        "n_points": len(fem.points),
        "n_cells": fem.n_cells,
        "cell_types": sorted({t for t, _ in fem.blocks}),
        "volume_m3": volume,
        "axisymmetric": fem.is_axisymmetric,
        "axis": None if fem.axis is None else {"origin_m": fem.axis.origin.tolist(),
                                              "direction": fem.axis.direction.tolist()},
    }


def summary_dict(comparison: Comparison, settings: dict[str, Any] | None = None) -> dict[str, Any]:
    """The comparison as plain JSON-ready data.

    The keys ``field_error.relative_l2``, ``field_error.max_abs_T``, ``field_error.max_at_m``,
    ``energy.fem_J`` and ``energy.reference_J`` are stable; more are present.
    """
    c, w = comparison, comparison.whole
    bounds = [0.0, *c.band_edges, math.inf]
    bands = [dict(_region(r), lower_m=lo * c.band_unit_m, upper_m=_num(hi * c.band_unit_m))
             for r, lo, hi in zip(c.bands, bounds[:-1], bounds[1:])]
    rel = c.relative_error
    return {
        "field_error": {
            "relative_l2": _num(w.relative_l2),
            "max_abs_T": w.max_abs_T,
            "max_at_m": list(w.max_at_m),
            "error_l2_T_m1.5": w.error_l2,
            "max_relative": float(rel.max(initial=0.0)),
            "norm_ratio_fem_to_reference": _num(c.norm_ratio),
        },
        "energy": {
            "fem_J": w.energy_fem_J,
            "reference_J": w.energy_reference_J,
            "relative_difference": _num((w.energy_fem_J - w.energy_reference_J) / w.energy_reference_J)
            if w.energy_reference_J > 0 else None,
        },
        "reference": {
            "method": "Biot-Savart of the discretised conductors, Richardson over the two finest levels",
            "relative_l2_estimate": _num(c.reference_relative_l2),
            "max_error_estimate_T": float(c.reference_error.max(initial=0.0)),
        },
        "mesh": _mesh_dict(c.fem, w.volume_m3),
        "bands": {"unit_m": c.band_unit_m, "edges_units": list(c.band_edges),
                  "conductor_size_m": c.conductor_size_m, "regions": bands},
        "cell_sets": [_region(r) for r in c.sets],
        "settings": settings or {},
    }


def write_summary_json(path: str | os.PathLike[str], comparison: Comparison, settings: dict[str, Any] | None = None) -> None:
    """Write :func:`summary_dict` as indented JSON, atomically."""
    write_text(path, json.dumps(summary_dict(comparison, settings), indent=2) + "\n")


def _as_3(v: NDArray[np.float64]) -> NDArray[np.float64]:
    """Vectors padded to 3 components: (B_r, B_z) becomes (B_r, B_z, 0) in the mesh's x-y plane."""
    return v if v.shape[1] == 3 else np.hstack([v, np.zeros((len(v), 3 - v.shape[1]))])


def write_annotated_mesh(path: str | os.PathLike[str], comparison: Comparison) -> None:
    """Write the compared mesh with B_fem, B_reference, B_error, relative_error, reference_error_T, distance_m.

    The data sit where the result's field was (point or cell data). Only nodes of volume cells
    are kept; coordinates are in metres (an axisymmetric mesh stays in its (r, z) plane).

    Raises
    ------
    ExportError
        Unknown suffix or an unwritable file.
    """
    import meshio  # heavy import, only where used

    path = Path(path)
    if path.suffix.lower() not in ANNOTATED_SUFFIXES:
        raise ExportError(f"{path}: unknown mesh suffix {path.suffix!r}; known: {', '.join(ANNOTATED_SUFFIXES)}")
    c, fem = comparison, comparison.fem
    used = fem.used_nodes()
    renumber = np.full(len(fem.points), -1, dtype=np.int64)
    renumber[used] = np.arange(len(used))
    data = {
        "B_fem": _as_3(c.b_fem),
        "B_reference": _as_3(c.b_reference),
        "B_error": _as_3(c.error),
        "relative_error": c.relative_error,
        "reference_error_T": c.reference_error,
        "distance_m": c.distance,
    }
    points = _as_3(fem.points[used])
    cells = [(t, renumber[conn]) for t, conn in fem.blocks]
    if fem.location == "point":
        mesh = meshio.Mesh(points, cells, point_data=data)
    else:
        splits = np.cumsum([len(conn) for _, conn in fem.blocks])[:-1]
        mesh = meshio.Mesh(points, cells, cell_data={k: np.split(v, splits) for k, v in data.items()})
    try:
        with atomic_path(path) as tmp:
            meshio.write(tmp, mesh, file_format="vtu" if path.suffix.lower() == ".vtu" else "vtk")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write ({exc})") from None
