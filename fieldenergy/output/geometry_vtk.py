"""The discretised conductors as a VTK unstructured grid of line cells (opens in ParaView)."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import ExportError
from fieldenergy.model import Filaments
from fieldenergy.output.atomic import atomic_path

#: File suffixes meshio writes VTK line cells to.
GEOMETRY_SUFFIXES: tuple[str, ...] = (".vtu", ".vtk")


def write_geometry(path: str | os.PathLike[str], filaments: Filaments, circuit_currents: NDArray[np.float64]) -> None:
    """Write every filament segment as a line cell with its current (A), coil, circuit and filament.

    Raises
    ------
    ExportError
        If the suffix is not one of :data:`GEOMETRY_SUFFIXES` or the file cannot be written.
    """
    import meshio  # heavy import, only where used

    path = Path(path)
    if path.suffix.lower() not in GEOMETRY_SUFFIXES:
        raise ExportError(f"{path}: unknown geometry suffix {path.suffix!r}; known: {', '.join(GEOMETRY_SUFFIXES)}")
    n = filaments.n_segments
    points = np.empty((2 * n, 3))
    points[0::2] = filaments.starts
    points[1::2] = filaments.ends
    cells = np.arange(2 * n, dtype=np.int64).reshape(n, 2)
    mesh = meshio.Mesh(
        points,
        [("line", cells)],
        cell_data={
            "current_A": [filaments.currents(circuit_currents)],
            "ampere_turns_per_A": [filaments.weights],
            "coil": [filaments.coil.astype(np.int32)],
            "circuit": [filaments.circuit.astype(np.int32)],
            "filament": [filaments.filament.astype(np.int32)],
            "radius_m": [filaments.radii],
        },
    )
    try:
        with atomic_path(path) as tmp:
            meshio.write(tmp, mesh, file_format="vtu" if path.suffix.lower() == ".vtu" else "vtk")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write ({exc})") from None
