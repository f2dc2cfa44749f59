"""Write evaluated maps: VTK for ParaView (meshio), CSV tables, PNG plots and a summary.

A box becomes a ``.vtu`` grid of hexahedra, a plane a ``.vtu`` grid of quads (meshio writes
no structured VTK formats), each with the map's quantities as point data; lines and point
sets become CSV tables; planes and lines also get PNG plots. The conductors go beside them
as ``geometry.vtu`` (line cells with their currents). All values are SI.
"""

from __future__ import annotations

import io
import json
import os
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import ExportError
from fieldenergy.maps.evaluate import MapResult
from fieldenergy.maps.grids import grid_axes
from fieldenergy.maps.quantities import QUANTITY_NAMES, QUANTITY_UNITS
from fieldenergy.model import Filaments
from fieldenergy.output.atomic import atomic_path, write_text
from fieldenergy.output.geometry_vtk import write_geometry

#: Name of the conductor geometry file written beside the maps.
GEOMETRY_FILE: str = "geometry.vtu"

#: Name of the summary of all maps written (JSON).
SUMMARY_FILE: str = "maps.json"


def export_maps(
    folder: str | os.PathLike[str], results: list[MapResult], filaments: Filaments, circuit_currents: NDArray[np.float64]
) -> list[Path]:
    """Write every map's files, the conductor geometry and a summary into ``folder``.

    Returns
    -------
    list of Path
        The files written, in order.

    Raises
    ------
    ExportError
        If a file cannot be written.
    """
    folder = Path(folder)
    written: list[Path] = []
    entries = []
    for res in results:
        files = export_map(folder, res, filaments)
        written += files
        entries.append(_summary_entry(res, files))
    geometry = folder / GEOMETRY_FILE
    write_geometry(geometry, filaments, circuit_currents)
    written.append(geometry)
    write_text(folder / SUMMARY_FILE, json.dumps({"maps": entries}, indent=2) + "\n")
    written.append(folder / SUMMARY_FILE)
    return written


def export_map(folder: str | os.PathLike[str], result: MapResult, filaments: Filaments | None = None) -> list[Path]:
    """Write one map's files into ``folder`` (named after the map); return their paths.

    Box and plane: ``NAME.vtu`` (plane also ``NAME_<quantity>.png``); line: ``NAME.csv`` and
    ``NAME.png``; points: ``NAME.csv``. ``filaments`` are drawn on plane plots if given.
    """
    from fieldenergy.maps import _plot

    folder = Path(folder)
    kind = result.spec.kind
    base = folder / _safe(result.spec.name)
    if kind in ("box", "plane"):
        files = [write_grid_vtk(base.with_suffix(".vtu"), result)]
        if kind == "plane":
            files += _plot.plot_plane(base, result, filaments)
        return files
    files = [write_table(base.with_suffix(".csv"), result)]
    if kind == "line":
        files.append(_plot.plot_line(base.with_suffix(".png"), result))
    return files


def write_grid_vtk(path: Path, result: MapResult) -> Path:
    """A box (hexahedra) or plane (quads) map as a VTK unstructured grid with point data."""
    import meshio  # heavy import, only where used

    cells = _grid_cells(result.shape)
    data = {QUANTITY_NAMES[q]: np.ascontiguousarray(v) for q, v in result.values.items()}
    mesh = meshio.Mesh(result.points, [cells], point_data=data)
    try:
        with atomic_path(path) as tmp:
            meshio.write(tmp, mesh, file_format="vtu")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write map {result.spec.name!r} ({exc})") from None
    return path


def write_table(path: Path, result: MapResult) -> Path:
    """A line or points map as CSV: coordinates (m), the line's arc position s (m), quantities (SI)."""
    columns = ["x_m", "y_m", "z_m"]
    blocks = [result.points]
    if result.spec.kind == "line":
        columns.append("s_m")
        blocks.append(grid_axes(result.spec)[0][:, None])
    for q, v in result.values.items():
        unit = QUANTITY_UNITS[q].replace(" ", "")
        if v.ndim == 2:
            columns += [f"{q}{c}_{unit}" for c in "xyz"]
            blocks.append(v)
        else:
            columns.append(QUANTITY_NAMES[q])
            blocks.append(v[:, None])
    buf = io.StringIO()
    buf.write(",".join(columns) + "\n")
    np.savetxt(buf, np.hstack(blocks), delimiter=",", fmt="%.17g")
    write_text(path, buf.getvalue())
    return path


def _grid_cells(shape: tuple[int, ...]) -> tuple[str, NDArray[np.int64]]:
    """Quads of an (nu, nv) grid or hexahedra of an (nx, ny, nz) grid, first axis fastest."""
    if len(shape) == 2:
        nu, nv = shape
        i, j = np.meshgrid(np.arange(nu - 1), np.arange(nv - 1), indexing="ij")
        p = (i + nu * j).T.ravel()
        return "quad", np.column_stack([p, p + 1, p + 1 + nu, p + nu]).astype(np.int64)
    nx, ny, nz = shape
    kk, jj, ii = np.meshgrid(np.arange(nz - 1), np.arange(ny - 1), np.arange(nx - 1), indexing="ij")
    p = (ii + nx * (jj + ny * kk)).ravel()
    up = nx * ny
    quad = [p, p + 1, p + 1 + nx, p + nx]
    return "hexahedron", np.column_stack(quad + [c + up for c in quad]).astype(np.int64)


def _summary_entry(res: MapResult, files: list[Path]) -> dict[str, object]:
    mag = np.linalg.norm(res.b, axis=1)
    return {
        "name": res.spec.name,
        "kind": res.spec.kind,
        "n_points": len(res.points),
        "quantities": list(res.values),
        "B_max_T": float(mag.max()),
        "B_min_T": float(mag.min()),
        "B_reference_T": res.b_reference.tolist(),
        "estimated_relative_error": res.relative_error,
        "estimated_relative_error_far": res.relative_error_far,
        "estimated_relative_error_near": res.relative_error_near,
        "near_distance_m": res.near_distance,
        "settings": _settings(res),
        "files": [f.name for f in files],
    }


def _settings(res: MapResult) -> dict[str, object]:
    """How the map's field was summed (and, for the treecode, its checked settings)."""
    out: dict[str, object] = {"method": res.method}
    if res.tree is not None:
        out.update(fast_scheme=res.tree.scheme, grid_order=res.tree.order, sources_per_element=res.tree.sources)
        if res.tree.scheme == "dual":
            out.update(tree_theta=res.tree.theta)
    return out


def _safe(name: str) -> str:
    """A map name as a file stem: letters, digits, '-', '_' and '.' kept, anything else '_'."""
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in name) or "map"
