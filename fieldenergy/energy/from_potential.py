"""Inductance matrices and stored energy by the 1/2 integral of A.J: Neumann's double sum.

With the winding cut into straight filament segments, the energy is
W = 1/2 sum_ij I_i I_j M_ij, M_ij the partial inductances of segments i and j (Neumann's
formula; Grover, Inductance Calculations, 1946). Grouping the segment currents by circuit,
I_i = w_i I_circuit(i), gives the circuit inductance matrix L_pq = sum_{i in p, j in q}
w_i w_j M_ij and W = 1/2 I^T L I. The double sum runs in a numba kernel
(:mod:`fieldenergy.kernels._neumann`) with memory O(n) in the number of segments.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import REPEATED_POINT_RTOL
from fieldenergy.errors import CaseError, DiscretisationError, GeometryError
from fieldenergy.kernels._neumann import grouped_mutual_sum, partial_inductance_matrix
from fieldenergy.model.filaments import Filaments

#: Relative accuracy asked of every pair integral. The kernel's rules are calibrated to stay
#: below it (observed worst case about half of it), so 1e-10 keeps each pair within 1e-9.
PAIR_RELATIVE_TOLERANCE: float = 1.0e-10

#: Largest segment count for which :func:`partial_inductances` builds the dense matrix
#: (5000^2 doubles are 200 MB).
MAX_DENSE_SEGMENTS: int = 5000

#: Number of outer-row blocks of the double sum; ``progress`` is called after each. Fixed, so
#: that the summation order, and the result to the last bit, do not depend on ``progress``.
_N_BLOCKS: int = 32

#: Largest count of per-chunk partial matrices, and the memory they may take (bytes).
_MAX_CHUNKS: int = 64
_CHUNK_BUDGET_BYTES: int = 64 * 2**20

__all__ = [
    "coil_inductance_matrix",
    "grouped_inductance",
    "inductance_matrix",
    "partial_inductances",
    "stored_energy",
]


def _checked(filaments: Filaments) -> Filaments:
    """Check what the kernels trust: shapes, finiteness, positive GMD, no zero-length segment."""
    if not isinstance(filaments, Filaments):
        raise TypeError(f"expected a Filaments object, got {type(filaments).__name__}")
    n = filaments.n_segments
    for name in ("starts", "ends"):
        arr = getattr(filaments, name)
        if arr.shape != (n, 3):
            raise GeometryError(f"Filaments.{name} must have shape ({n}, 3), got {arr.shape}")
    for name in ("starts", "ends", "weights", "gmd"):
        bad = np.flatnonzero(~np.isfinite(getattr(filaments, name)).reshape(n, -1).all(axis=1))
        if bad.size:
            raise GeometryError(
                f"segment {bad[0]}: {name} must be finite, got {getattr(filaments, name)[bad[0]]}"
            )
    bad = np.flatnonzero(filaments.gmd <= 0.0)
    if bad.size:
        raise GeometryError(
            f"segment {bad[0]}: gmd must be > 0 m (it sets the filament's self-inductance), "
            f"got {filaments.gmd[bad[0]]}; hint: a round wire of radius a has gmd a*exp(-1/4)"
        )
    lengths = np.linalg.norm(filaments.ends - filaments.starts, axis=1)
    if n:
        size = float(np.ptp(np.concatenate([filaments.starts, filaments.ends]), axis=0).max())
        bad = np.flatnonzero(lengths <= REPEATED_POINT_RTOL * size)
        if bad.size:
            raise GeometryError(
                f"segment {bad[0]} has zero length ({lengths[bad[0]]:.3g} m, start {filaments.starts[bad[0]]}); "
                "hint: remove repeated points from the path"
            )
    return filaments


def _checked_group(group: ArrayLike, n_groups: int, n: int) -> NDArray[np.int64]:
    """Group indices as int64 (n,), each in range(n_groups)."""
    arr = np.asarray(group)
    if arr.shape != (n,):
        raise GeometryError(f"group must have shape ({n},), one index per segment, got {arr.shape}")
    if not np.issubdtype(arr.dtype, np.integer):
        raise GeometryError(f"group must hold integers, got dtype {arr.dtype}")
    if n_groups < 1:
        raise GeometryError(f"n_groups must be >= 1, got {n_groups}")
    if n and (arr.min() < 0 or arr.max() >= n_groups):
        raise GeometryError(f"group indices must lie in range({n_groups}), got {arr.min()}..{arr.max()}")
    return np.ascontiguousarray(arr, dtype=np.int64)


def grouped_inductance(
    filaments: Filaments,
    group: ArrayLike,
    n_groups: int,
    *,
    rel_tol: float = PAIR_RELATIVE_TOLERANCE,
    progress: Callable[[int], None] | None = None,
) -> NDArray[np.float64]:
    """Inductance matrix between groups of segments: L_pq = sum_{i in p, j in q} w_i w_j M_ij.

    Parameters
    ----------
    filaments
        The segments; ``weights`` are ampere-turns per ampere of the group's current.
    group
        Group index of each segment, shape (n,), integers in ``range(n_groups)``.
    n_groups
        Number of groups.
    rel_tol
        Relative accuracy of each pair integral M_ij.
    progress
        Called with the number of outer rows done (out of n) after each block of rows.

    Returns
    -------
    numpy.ndarray
        Symmetric (n_groups, n_groups) matrix, H.

    Raises
    ------
    GeometryError
        Bad shapes, non-finite values, gmd <= 0, zero-length segments, bad group indices, or
        collinear segments of different filaments that overlap (the sum is then infinite).

    References
    ----------
    F. W. Grover, Inductance Calculations, 1946: partial inductances of straight filaments.

    Examples
    --------
    >>> import numpy as np
    >>> from fieldenergy.model.filaments import Filaments
    >>> square = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], dtype=float)
    >>> loop = Filaments.from_segments(square, np.roll(square, -1, axis=0), radii=1e-3)
    >>> print(f"{grouped_inductance(loop, np.zeros(4, dtype=int), 1)[0, 0] * 1e6:.4f} uH")
    5.1076 uH
    """
    _checked(filaments)
    n = filaments.n_segments
    groups = _checked_group(group, n_groups, n)
    if not (0.0 < rel_tol < 1.0):
        raise DiscretisationError(f"rel_tol must lie in (0, 1), got {rel_tol}")
    out = np.zeros((n_groups, n_groups))
    n_fold = (n + 1) // 2
    n_blocks = min(_N_BLOCKS, n_fold)
    per_matrix = 8 * n_groups * n_groups
    piece, arc, loop = filaments.chain_pieces()
    for b in range(n_blocks):
        k0, k1 = b * n_fold // n_blocks, (b + 1) * n_fold // n_blocks
        n_chunks = int(max(1, min(_MAX_CHUNKS, k1 - k0, _CHUNK_BUDGET_BYTES // per_matrix)))
        grouped_mutual_sum(
            filaments.starts, filaments.ends, filaments.weights, filaments.gmd, piece, arc, loop,
            groups, n_groups, rel_tol, k0, k1, n_chunks, out,
        )  # fmt: skip
        if progress is not None:
            progress(min(2 * k1, n))
    if not np.isfinite(out).all():
        raise GeometryError(
            "the inductance sum is not finite: segments of different filaments overlap "
            "(collinear and sharing a stretch of line)"
        )
    return out


def inductance_matrix(
    filaments: Filaments,
    *,
    rel_tol: float = PAIR_RELATIVE_TOLERANCE,
    progress: Callable[[int], None] | None = None,
) -> NDArray[np.float64]:
    """Circuit inductance matrix (H), shape (n_circuits, n_circuits).

    See :func:`grouped_inductance`; the groups are ``filaments.circuit``.

    Examples
    --------
    >>> import numpy as np
    >>> from fieldenergy.model.filaments import Filaments
    >>> t = np.linspace(0.0, 2.0 * np.pi, 65)
    >>> ring = np.stack([np.cos(t), np.sin(t), 0.0 * t], axis=1)
    >>> loop = Filaments.from_segments(ring[:-1], ring[1:], radii=1e-3)
    >>> print(f"{inductance_matrix(loop)[0, 0] * 1e6:.3f} uH")
    9.087 uH
    """
    _checked(filaments)
    return grouped_inductance(
        filaments, filaments.circuit, max(filaments.n_circuits, 1), rel_tol=rel_tol, progress=progress
    )[: filaments.n_circuits, : filaments.n_circuits]


def coil_inductance_matrix(
    filaments: Filaments,
    n_coils: int,
    *,
    rel_tol: float = PAIR_RELATIVE_TOLERANCE,
    progress: Callable[[int], None] | None = None,
) -> NDArray[np.float64]:
    """Inductance matrix between coil instances (H), shape (n_coils, n_coils), per ampere of
    each coil's circuit current; the groups are ``filaments.coil``.

    Examples
    --------
    >>> import numpy as np
    >>> from fieldenergy.model.filaments import Filaments
    >>> a = np.array([[0, 0, 0], [1, 0, 0]], dtype=float)
    >>> b = a + [0.0, 0.1, 0.0]
    >>> pair = Filaments.from_segments(np.vstack([a[:1], b[:1]]), np.vstack([a[1:], b[1:]]),
    ...                                radii=1e-3, filament=[0, 1], coil=[0, 1])
    >>> print(np.round(coil_inductance_matrix(pair, 2) * 1e9, 2))
    [[1370.34  418.65]
     [ 418.65 1370.34]]
    """
    _checked(filaments)
    return grouped_inductance(filaments, filaments.coil, n_coils, rel_tol=rel_tol, progress=progress)


def stored_energy(
    filaments: Filaments,
    circuit_currents: ArrayLike,
    *,
    rel_tol: float = PAIR_RELATIVE_TOLERANCE,
) -> float:
    """Stored magnetic energy W = 1/2 I^T L I (J) for the circuit terminal currents I (A).

    Examples
    --------
    >>> import numpy as np
    >>> from fieldenergy.model.filaments import Filaments
    >>> square = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], dtype=float)
    >>> loop = Filaments.from_segments(square, np.roll(square, -1, axis=0), radii=1e-3)
    >>> print(f"{stored_energy(loop, [10.0]) * 1e6:.2f} uJ")
    255.38 uJ
    """
    _checked(filaments)
    currents = np.asarray(circuit_currents, dtype=np.float64)
    if currents.shape != (filaments.n_circuits,):
        raise CaseError(
            f"expected {filaments.n_circuits} circuit currents, got shape {currents.shape}",
            where="circuit_currents",
        )
    if not np.isfinite(currents).all():
        raise CaseError(f"circuit currents must be finite, got {currents}", where="circuit_currents")
    return float(0.5 * currents @ inductance_matrix(filaments, rel_tol=rel_tol) @ currents)


def partial_inductances(
    filaments: Filaments, *, rel_tol: float = PAIR_RELATIVE_TOLERANCE
) -> NDArray[np.float64]:
    """Dense matrix of segment partial inductances M_ij (H), shape (n, n), without weights.

    Raises
    ------
    DiscretisationError
        More than ``MAX_DENSE_SEGMENTS`` segments: use :func:`grouped_inductance` instead.

    Examples
    --------
    >>> import numpy as np
    >>> from fieldenergy.model.filaments import Filaments
    >>> wire = Filaments.from_segments([[0, 0, 0]], [[1, 0, 0]], radii=1e-3)
    >>> print(f"{partial_inductances(wire)[0, 0] * 1e9:.2f} nH")
    1370.34 nH
    """
    _checked(filaments)
    n = filaments.n_segments
    if n > MAX_DENSE_SEGMENTS:
        raise DiscretisationError(
            f"partial_inductances builds a dense {n} x {n} matrix; at most {MAX_DENSE_SEGMENTS} segments "
            "are allowed. Hint: use grouped_inductance, which needs memory O(n)."
        )
    if not (0.0 < rel_tol < 1.0):
        raise DiscretisationError(f"rel_tol must lie in (0, 1), got {rel_tol}")
    out = np.zeros((n, n))
    partial_inductance_matrix(filaments.starts, filaments.ends, filaments.gmd, *filaments.chain_pieces(), rel_tol, out)
    if not np.isfinite(out).all():
        raise GeometryError(
            "a partial inductance is not finite: segments of different filaments overlap "
            "(collinear and sharing a stretch of line)"
        )
    return out
