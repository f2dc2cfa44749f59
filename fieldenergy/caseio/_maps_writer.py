"""``[[map]]`` tables written back: the inverse of :mod:`fieldenergy.caseio._maps`.

A points map's points go to a CSV file beside the case file (``<name>-points.csv``, the
name made safe for a file name), which the map table then names.
"""

from __future__ import annotations

import io
import re
from pathlib import Path as FilePath

import numpy as np

from fieldenergy.model.maps import BoxMap, LineMap, MapSpec, PlaneMap, PointsMap
from fieldenergy.output.atomic import write_text


def points_file_name(spec: PointsMap) -> str:
    """The CSV file name a points map is written to.

    Examples
    --------
    >>> points_file_name(PointsMap("probe set/1", np.zeros((1, 3))))
    'probe_set_1-points.csv'
    """
    return re.sub(r"[^A-Za-z0-9_.-]", "_", spec.name) + "-points.csv"


def map_table(spec: MapSpec) -> dict[str, object]:
    """The TOML table of one map, SI plain numbers."""
    table: dict[str, object] = {"name": spec.name}
    if isinstance(spec, BoxMap):
        table.update(kind="box", lower=_vec(spec.lower), upper=_vec(spec.upper), resolution=list(spec.resolution))
    elif isinstance(spec, PlaneMap):
        table.update(kind="plane", center=_vec(spec.center), u=_vec(spec.u), v=_vec(spec.v),
                     size=[float(s) for s in spec.size], resolution=list(spec.resolution))
    elif isinstance(spec, LineMap):
        table.update(kind="line", start=_vec(spec.start), end=_vec(spec.end), count=int(spec.count))
    elif isinstance(spec, PointsMap):
        table.update(kind="points", file=points_file_name(spec))
    else:
        raise TypeError(f"cannot write a map of type {type(spec).__name__}")
    table["quantities"] = list(spec.quantities)
    if spec.reference is not None:
        table["reference"] = _vec(spec.reference)
    return table


def write_points_files(maps: tuple[MapSpec, ...], folder: FilePath) -> None:
    """Write the CSV file of every points map into ``folder`` (atomically, full precision)."""
    for spec in maps:
        if isinstance(spec, PointsMap):
            buf = io.StringIO()
            buf.write("x,y,z\n")
            np.savetxt(buf, np.asarray(spec.points, dtype=np.float64).reshape(-1, 3), delimiter=",", fmt="%.17g")
            write_text(folder / points_file_name(spec), buf.getvalue())


def _vec(values: object) -> list[float]:
    return [float(v) for v in np.asarray(values, dtype=np.float64).reshape(-1)]
