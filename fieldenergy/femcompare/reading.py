"""Reading a finite-element result (any format meshio reads) into a :class:`FemField`."""

from __future__ import annotations

import contextlib
import io
import os
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import CompareError
from fieldenergy.femcompare.detect import DataArray, choose_field
from fieldenergy.femcompare.mesh import Axis, FemField
from fieldenergy.femcompare.quadrature import CELL_DIMENSION

#: Relative out-of-plane extent (of the in-plane extent) below which a mesh counts as planar.
PLANAR_RTOL: float = 1.0e-9

#: meshio cell data holding gmsh physical-group tags; the file's field_data names the tags.
GMSH_PHYSICAL = "gmsh:physical"


def read_fem_result(
    path: str | os.PathLike[str],
    field: str | None = None,
    scale: float = 1.0,
    axis: Axis | None = None,
) -> FemField:
    """Read a mesh file and pick its B field.

    Parameters
    ----------
    path
        Any file meshio reads (VTK/VTU, Gmsh, XDMF, ...).
    field
        Name of the B field; ``None`` detects it (see :func:`~fieldenergy.femcompare.detect.choose_field`).
    scale
        Metres per mesh length unit (0.001 for a mesh drawn in millimetres). B must be in tesla.
    axis
        For a 2D axisymmetric mesh (x = r, y = z, B as (B_r, B_z)): the symmetry axis in the
        case's frame. ``None`` for a 3D mesh.

    Returns
    -------
    FemField

    Raises
    ------
    CompareError
        Unreadable file, no cells of the right dimension, no usable field, a bad scale.
    """
    import meshio  # heavy import, only where used

    where = str(path)
    if not (np.isfinite(scale) and scale > 0.0):
        raise CompareError(f"length scale must be a positive number of metres per mesh unit, got {scale!r}", where)
    if not Path(path).is_file():
        raise CompareError("no such file", where)
    said = io.StringIO()
    try:
        # Some meshio readers print and exit on a malformed file; keep that inside the error.
        with contextlib.redirect_stderr(said), contextlib.redirect_stdout(said):
            mesh = meshio.read(path)
    except (meshio.ReadError, OSError, ValueError, KeyError, IndexError, EOFError, UnicodeDecodeError,
            ImportError, SystemExit) as exc:
        detail = " ".join(f"{exc} {said.getvalue()}".split()) or type(exc).__name__
        raise CompareError(f"cannot read as a mesh ({detail})", where) from None
    dim = 2 if axis is not None else 3
    chosen = _volume_blocks(mesh.cells, dim, where)
    arrays = _data_arrays(mesh, chosen)
    data = choose_field(arrays, field, (2, 3) if axis is not None else (3,), where)
    points = _mesh_points(np.asarray(mesh.points, dtype=np.float64), dim, where) * scale
    return FemField(
        source=where,
        field_name=data.name,
        location=data.location,
        points=points,
        blocks=tuple((mesh.cells[k].type, np.asarray(mesh.cells[k].data, dtype=np.int64)) for k in chosen),
        values=np.asarray(data.values[:, :dim], dtype=np.float64),
        cell_sets=_cell_sets(mesh, chosen),
        axis=axis,
    )


def _volume_blocks(cells: list[Any], dim: int, where: str) -> list[int]:
    """Indices of the cell blocks of dimension ``dim``; lower-dimensional blocks (faces, edges) are skipped."""
    types = [block.type for block in cells]
    chosen = [k for k, t in enumerate(types) if CELL_DIMENSION.get(t) == dim]
    unknown = sorted({t for t in types if t not in CELL_DIMENSION and t not in ("vertex", "line", "line3")})
    if unknown:
        raise CompareError(
            f"unsupported cell types {', '.join(unknown)}; supported: {', '.join(CELL_DIMENSION)} "
            "(first-order cells; export a linear mesh)",
            where,
        )
    if not chosen:
        has_3d = any(CELL_DIMENSION.get(t) == 3 for t in types)
        hint = (" (a 3D mesh: drop --axisymmetric)" if has_3d else
                " (a 2D mesh: an (r, z) section needs --axisymmetric)" if dim == 3 else "")
        raise CompareError(f"no {dim}D cells to integrate over; cell types found: {', '.join(types) or 'none'}{hint}", where)
    if dim == 2 and any(CELL_DIMENSION.get(t) == 3 for t in types):
        raise CompareError("an axisymmetric result must be a 2D (r, z) mesh, but the file has 3D cells", where)
    return chosen


def _data_arrays(mesh: Any, chosen: list[int]) -> list[DataArray]:
    """Point data and the cell data of the chosen blocks, concatenated block by block."""
    arrays = [DataArray(name, "point", np.asarray(v)) for name, v in mesh.point_data.items()]
    for name, per_block in mesh.cell_data.items():
        if name.startswith("gmsh:"):
            continue
        parts = [np.asarray(per_block[k]) for k in chosen]
        if len({p.shape[1:] for p in parts}) == 1:
            arrays.append(DataArray(name, "cell", np.concatenate(parts)))
    return arrays


def _mesh_points(points: NDArray[np.float64], dim: int, where: str) -> NDArray[np.float64]:
    if dim == 3:
        if points.shape[1] != 3:
            raise CompareError(f"a 3D result needs points with 3 coordinates, got {points.shape[1]}", where)
        return points
    extent = float(np.ptp(points[:, :2], axis=0).max()) if len(points) else 0.0
    if points.shape[1] == 3 and float(np.abs(points[:, 2]).max(initial=0.0)) > PLANAR_RTOL * extent:
        raise CompareError(
            "an axisymmetric mesh must lie in the plane z = 0 with x = r and y = z; "
            f"got |z| up to {float(np.abs(points[:, 2]).max()):.3e}",
            where,
        )
    rz = np.ascontiguousarray(points[:, :2])
    negative = rz[:, 0] < -PLANAR_RTOL * extent
    if negative.any():
        i = int(np.flatnonzero(negative)[0])
        raise CompareError(
            f"an axisymmetric mesh needs r = x >= 0; point {i} has r = {rz[i, 0]:.6g} "
            f"({int(negative.sum())} such points)",
            where,
        )
    rz[:, 0] = np.maximum(rz[:, 0], 0.0)
    return rz


def _cell_sets(mesh: Any, chosen: list[int]) -> dict[str, NDArray[np.int64]]:
    """Named sets of volume cells (global numbering): meshio cell sets, else gmsh physical groups."""
    offsets = np.cumsum(np.array([0] + [len(mesh.cells[k].data) for k in chosen], dtype=np.int64))
    sets: dict[str, NDArray[np.int64]] = {}
    for name, per_block in getattr(mesh, "cell_sets", {}).items():
        if name.startswith("gmsh:"):
            continue
        idx = [np.asarray(per_block[k], dtype=np.int64) + off for k, off in zip(chosen, offsets) if per_block[k] is not None]
        members = np.concatenate(idx) if idx else np.zeros(0, dtype=np.int64)
        if len(members):
            sets[name] = np.unique(members)
    if sets or GMSH_PHYSICAL not in mesh.cell_data:
        return sets
    tags = np.concatenate([np.asarray(mesh.cell_data[GMSH_PHYSICAL][k]) for k in chosen]).astype(np.int64)
    dim = CELL_DIMENSION[mesh.cells[chosen[0]].type]
    names = {int(v[0]): n for n, v in getattr(mesh, "field_data", {}).items() if len(v) >= 2 and int(v[1]) == dim}
    for tag in np.unique(tags):
        sets[names.get(int(tag), f"physical {int(tag)}")] = np.flatnonzero(tags == tag).astype(np.int64)
    return sets
