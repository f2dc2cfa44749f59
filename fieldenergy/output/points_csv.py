"""Point sets in CSV (columns x, y, z) and field tables written back as CSV."""

from __future__ import annotations

import csv
import io
import math
import os
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import CaseError
from fieldenergy.output.atomic import write_text

FIELD_COLUMNS: tuple[str, ...] = ("x", "y", "z", "Bx", "By", "Bz", "Ax", "Ay", "Az")


def read_points(path: str | os.PathLike[str]) -> NDArray[np.float64]:
    """Read points (m) from a CSV file with a header naming columns x, y, z (any order, others ignored).

    Raises
    ------
    CaseError
        If the file is missing, has no x, y, z columns, or holds a value that is not a finite number.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise CaseError(f"cannot read points file ({getattr(exc, 'strerror', None) or exc})", path=str(path)) from None
    rows = list(csv.reader(io.StringIO(text)))
    rows = [r for r in rows if r and any(c.strip() for c in r)]
    if not rows:
        raise CaseError("points file is empty; expected a header x,y,z and one row per point", path=str(path))
    header = [c.strip().lower() for c in rows[0]]
    missing = [c for c in ("x", "y", "z") if c not in header]
    if missing:
        raise CaseError(
            f"header {rows[0]} lacks column(s) {', '.join(missing)}; expected columns x,y,z (metres)",
            path=str(path),
        )
    cols = [header.index(c) for c in ("x", "y", "z")]
    points = np.empty((len(rows) - 1, 3))
    for k, row in enumerate(rows[1:]):
        for j, c in enumerate(cols):
            try:
                value = float(row[c])
            except (IndexError, ValueError):
                raise CaseError(
                    f"line {k + 2}: expected a number in column {'xyz'[j]}, got {row[c] if c < len(row) else 'nothing'!r}",
                    path=str(path),
                ) from None
            if not math.isfinite(value):
                raise CaseError(f"line {k + 2}: column {'xyz'[j]} is not finite ({value})", path=str(path))
            points[k, j] = value
    if len(points) == 0:
        raise CaseError("points file has a header but no points", path=str(path))
    return points


def write_field_table(path: str | os.PathLike[str], points: NDArray[np.float64], b: NDArray[np.float64], a: NDArray[np.float64]) -> None:
    """Write x, y, z (m), Bx, By, Bz (T), Ax, Ay, Az (T m) as CSV with full float precision."""
    table = np.hstack([points, b, a])
    buf = io.StringIO()
    buf.write(",".join(FIELD_COLUMNS) + "\n")
    np.savetxt(buf, table, delimiter=",", fmt="%.17g")
    write_text(path, buf.getvalue())
