"""The lattice FMM's compressed operators, computed once per machine and kept on disk.

Building the operators of one grid order takes seconds to tens of seconds (about 10 s for
order 10 on 2 cores: :func:`fieldenergy.kernels._lattice.m2l_operators`), and they depend on
nothing but the order and the tolerance, so they are kept in memory for the process and in a
cache folder: ``$FIELDENERGY_CACHE`` if set, else ``$XDG_CACHE_HOME/fieldenergy`` or
``~/.cache/fieldenergy``. Files are written to a temporary name and renamed, so a crash leaves
no half-written file. A folder that cannot be written only means the operators are built again
next time; a file that cannot be read back is rebuilt.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np

from fieldenergy.kernels._lattice import OFFSET_REACH, m2l_operators, offset_index

#: Bumped when the operators' definition changes, so stale files are not read.
_FORMAT = 1

_MEMORY: dict[tuple[int, float], tuple[np.ndarray, np.ndarray]] = {}


def cache_folder() -> Path:
    """Where operator files are kept (see the module docstring)."""
    if os.environ.get("FIELDENERGY_CACHE"):
        return Path(os.environ["FIELDENERGY_CACHE"])
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "fieldenergy"


def lattice_operators(order: int, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """U and the operator table of grid ``order`` at ``tol`` (see
    :func:`fieldenergy.kernels._lattice.m2l_operators`): from memory, the cache folder, or built."""
    key = (order, float(tol))
    if key in _MEMORY:
        return _MEMORY[key]
    path = cache_folder() / f"lattice-operators-v{_FORMAT}-order{order}-tol{tol:.0e}.npz"
    ops = _read(path, order)
    if ops is None:
        ops = m2l_operators(order, tol)
        _write(path, ops)
    _MEMORY[key] = ops
    return ops


def _positive() -> list[int]:
    """Table indices of the separated offsets greater than zero (the rest are transposes)."""
    r = OFFSET_REACH
    return [offset_index(dx, dy, dz) for dx in range(-r, r + 1) for dy in range(-r, r + 1) for dz in range(-r, r + 1)
            if max(abs(dx), abs(dy), abs(dz)) >= 2 and (dx, dy, dz) > (0, 0, 0)]


def _read(path: Path, order: int) -> tuple[np.ndarray, np.ndarray] | None:
    try:
        with np.load(path) as data:
            u, half = data["u"], data["half"]
    except (OSError, KeyError, ValueError):
        return None
    pos = _positive()
    if u.ndim != 2 or u.shape[0] != (order + 1) ** 3 or half.shape != (len(pos), u.shape[1], u.shape[1]):
        return None
    side = 2 * OFFSET_REACH + 1
    table = np.zeros((side**3, u.shape[1], u.shape[1]))
    table[pos] = half
    table[[side**3 - 1 - i for i in pos]] = half.transpose(0, 2, 1)  # offset -d is the mirror index
    return np.ascontiguousarray(u), table


def _write(path: Path, ops: tuple[np.ndarray, np.ndarray]) -> None:
    u, table = ops
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".npz.part")
        try:
            with os.fdopen(fd, "wb") as f:
                np.savez(f, u=u, half=table[_positive()])
            os.replace(tmp, path)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    except OSError:
        return
