"""Points files: a polygon's corners as CSV rows ``x,y,z``, with an optional header row."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from fieldenergy.caseio._tables import Table
from fieldenergy.caseio._units import scaled
from fieldenergy.errors import CaseError

_HEADER = ["x", "y", "z"]


def points_file_path(table: Table, key: str, folder: Path) -> Path:
    """The points file named at ``key``, resolved against the case folder; it must exist."""
    name = table.text(key)
    try:
        file = folder / name
        is_file = file.is_file()
    except (OSError, ValueError):
        raise table.error(f"{name!r} is not a usable file name", key) from None
    if not is_file:
        raise table.error(f"points file {name!r} not found in the case folder {str(folder)!r}", key)
    return file


def read_points_file(file: Path, table: Table) -> tuple[NDArray[np.float64], list[int]]:
    """Read a points file; return the points in metres (scaled by the path's unit) and their line numbers.

    Parameters
    ----------
    file
        The CSV file: one point ``x,y,z`` per line, blank lines ignored, optionally a first
        row ``x,y,z``.
    table
        The path table (for its length unit and for messages).

    Returns
    -------
    The points, shape (n, 3), in metres, and the 1-based line number of each.

    Raises
    ------
    CaseError
        If the file cannot be read, is not UTF-8 text, or a row is not three finite numbers.
    """
    where = f"{table.owner}, points file" if table.owner else "points file"
    try:
        text = file.read_bytes().decode("utf-8-sig")
    except OSError as exc:
        raise CaseError(f"cannot read the points file: {exc.strerror}", path=str(file), where=where) from None
    except UnicodeDecodeError as exc:
        raise CaseError(f"the points file is not UTF-8 text (byte {exc.start})", path=str(file), where=where) from None
    rows: list[list[float]] = []
    lines: list[int] = []
    is_first = True
    for number, line in enumerate(text.splitlines(), start=1):
        fields = [f.strip() for f in line.split(",")]
        if fields == [""]:
            continue
        if not (is_first and [f.lower() for f in fields] == _HEADER):
            rows.append(_row(fields, line, file, f"{where}, line {number}"))
            lines.append(number)
        is_first = False
    if len(rows) < 3:
        raise CaseError(f"expected at least 3 points, got {len(rows)}", path=str(file), where=where)
    with np.errstate(over="ignore"):
        points = scaled(np.array(rows, dtype=np.float64), table.unit)
    if not np.isfinite(points).all():
        raise CaseError(
            f"coordinates in {table.unit_name} out of range: too large to hold in metres", path=str(file), where=where
        )
    return points, lines


def _row(fields: list[str], line: str, file: Path, where: str) -> list[float]:
    expected = "three numbers x,y,z separated by commas (a first row 'x,y,z' is allowed)"
    shown = line if len(line) <= 60 else line[:57] + "..."
    if len(fields) != 3:
        raise CaseError(f"expected {expected}, got {shown!r}", path=str(file), where=where)
    try:
        values = [float(f) for f in fields]
    except ValueError:
        raise CaseError(f"expected {expected}, got {shown!r}", path=str(file), where=where) from None
    if not all(math.isfinite(v) for v in values):
        raise CaseError(f"expected finite numbers, got {shown!r}", path=str(file), where=where)
    return values
