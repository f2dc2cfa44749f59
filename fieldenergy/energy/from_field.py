"""Inductance matrix and stored energy by the field route: W = 1/(2 mu0) * integral of |B|^2 dV.

This is the second, independent route beside the 1/2 integral of A.J (Neumann's double sum,
:mod:`fieldenergy.energy.from_potential`): it uses nothing but the Biot-Savart field of the
discretised model. With B_p the field of circuit p carrying one ampere (its segments carry
their ``weights``), the circuit inductance matrix is

    L_pq = 1/mu0 * integral over all space of B_p . B_q dV,   W = 1/2 I^T L I,

so the whole matrix is cross-checked, not only the total. Inside a segment's core radius the
kernel gives the field of a round conductor of uniform current density, so the internal
energy is counted.

The space is cut into a cube about the conductors (adaptive octree, tensor Gauss rules;
:mod:`fieldenergy.energy.cubature`) and the rest of space (the exterior of the cube mapped
onto a finite interval, no truncation). The octree is first seeded towards the conductors,
down to a fraction of the core radius, by distances to points sampled along the segments
(a k-d tree), then refined where the error estimate is largest. Every point of one
refinement generation is evaluated in one batch, one Biot-Savart call per circuit; the cost
is (points) x (segments).
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import MU0
from fieldenergy.energy.cubature import CubatureResult, adaptive_octree, exterior_cube, seeded_cells
from fieldenergy.errors import GeometryError
from fieldenergy.fastfield import SegmentTreeSum
from fieldenergy.kernels._biot_savart import b_from_segments
from fieldenergy.model.filaments import Filaments

Array = NDArray[np.float64]

#: Default relative accuracy asked of the field-route inductance matrix (largest entry error
#: over sqrt(L_pp L_qq)), the accuracy goal of the route; the estimate is conservative (on
#: the bundled cases the value moved far less than it between tolerances).
FIELD_RELATIVE_TOLERANCE: float = 1.0e-3

#: Share of the tolerance given to the near region; the exterior rule is far more accurate.
NEAR_TOLERANCE_SHARE: float = 0.9

#: Half-size of the cube about the conductors, in units of the conductors' largest extent:
#: the conductors stay a quarter extent from its faces, so the mapped exterior is smooth.
BOX_HALF_SIZE: float = 0.75

#: Seeding: a cell is split while its size exceeds this fraction of its centre's distance to
#: the nearest conductor (or of SEED_CORE_RADII core radii, whichever is larger).
SEED_SIZE_OVER_DISTANCE: float = 1.0

#: Seeding stops at cells this many core radii across; error-driven refinement goes further
#: only where the estimate asks for it.
SEED_CORE_RADII: float = 4.0

#: Cells along each axis of the first uniform grid of the cube.
FIRST_GRID: int = 4

#: Gauss-Legendre points per axis in every cell (27 per cell): B^2 is smooth away from the
#: core surfaces, and cells are small where it is not.
CELL_GAUSS_POINTS: int = 3

#: Exterior product rule (s, and u and v on each face) and the coarser rule it is checked by.
EXTERIOR_RULE: tuple[int, int] = (16, 16)
EXTERIOR_CHECK_RULE: tuple[int, int] = (11, 11)

#: Largest number of conductor sample points for the distance tree.
MAX_SAMPLES: int = 400_000

#: Integrand evaluations allowed before the refinement stops unconverged.
MAX_FIELD_POINTS: int = 60_000_000

#: Points per Biot-Savart call: bounds the scratch memory (n_circuits x 3 doubles per point).
_CHUNK: int = 1 << 18


@dataclass(frozen=True, slots=True)
class FieldInductance:
    """Circuit inductance matrix by the field route, with its error estimate.

    Attributes
    ----------
    matrix
        L_pq = 1/mu0 * integral of B_p . B_q (H), shape (n_circuits, n_circuits).
    error
        Estimated absolute error of each entry (H): near-region refinement plus exterior rule.
    tail
        The part of ``matrix`` from outside the cube (H).
    relative_error
        Largest entry of ``error`` over sqrt(L_pp L_qq).
    n_points, n_cells
        Field evaluations (points x circuits) and leaf cells of the octree.
    converged
        Whether the refinement met its tolerance within the point budget.
    seconds
        Wall time (s).
    """

    matrix: Array
    error: Array
    tail: Array
    relative_error: float
    n_points: int
    n_cells: int
    converged: bool
    seconds: float

    def energy(self, currents: ArrayLike) -> tuple[float, float, float]:
        """(W, error of W, tail part of W) in J for the given circuit currents (A)."""
        i = np.asarray(currents, dtype=np.float64)
        energy = 0.5 * float(i @ self.matrix @ i)
        return energy, 0.5 * float(np.abs(i) @ self.error @ np.abs(i)), 0.5 * float(i @ self.tail @ i)


#: One B evaluation of a circuit uses the treecode (:class:`fieldenergy.fastfield.SegmentTreeSum`)
#: instead of direct summation when the circuit has at least FIELD_TREE_MIN_SEGMENTS segments
#: and points x segments exceeds FIELD_TREE_MIN_PAIRS. Measured (2 cores): on 1e5 uniform
#: points the treecode took 0.58, 0.87 and 0.51 of the direct time for 2e3, 2e4 and 1e5 segments,
#: but the field route's points crowd around the conductors, where the closed-form near sums
#: dominate: on the 2256-segment demo case the whole route took 37 s with it against 26 s without.
FIELD_TREE_MIN_SEGMENTS: int = 50_000
FIELD_TREE_MIN_PAIRS: float = 2.0e8

#: Grid order and separation parameter of the field route's treecode: B to about 2e-5 of the
#: largest |B| (measured on stacks of loops), so the energy density to a few 1e-5, far below the
#: route's tolerance; cheaper than the maps' settings.
FIELD_TREE_ORDER: int = 6
FIELD_TREE_THETA: float = 0.6


class _CircuitFields:
    """B of each circuit at one ampere at point sets; each circuit's treecode is built on first use."""

    def __init__(self, filaments: Filaments) -> None:
        self.parts = []
        for p in range(filaments.n_circuits):
            sel = filaments.circuit == p
            self.parts.append(tuple(np.ascontiguousarray(x[sel]) for x in
                                    (filaments.starts, filaments.ends, filaments.weights, filaments.radii)))
        self.trees: dict[int, SegmentTreeSum] = {}

    def __call__(self, points: Array) -> Array:
        out = np.zeros((len(self.parts), len(points), 3))
        for p, (s, e, w, r) in enumerate(self.parts):
            if len(s) == 0:
                continue
            if len(s) >= FIELD_TREE_MIN_SEGMENTS and float(len(points)) * len(s) > FIELD_TREE_MIN_PAIRS:
                self._tree(p)(np.ascontiguousarray(points), out[p])
                continue
            for i0 in range(0, len(points), _CHUNK):
                pts = np.ascontiguousarray(points[i0 : i0 + _CHUNK])
                b_from_segments(pts, s, e, w, r, out[p, i0 : i0 + _CHUNK])
        return out

    def _tree(self, p: int) -> SegmentTreeSum:
        if p not in self.trees:
            starts, ends, weights, radii = self.parts[p]
            self.trees[p] = SegmentTreeSum(starts, ends, weights, radii, order=FIELD_TREE_ORDER, theta=FIELD_TREE_THETA)
        return self.trees[p]


def circuit_fields(points: Array, filaments: Filaments) -> Array:
    """B of each circuit at one ampere, shape (n_circuits, m, 3), T/A.

    Large evaluations (see :data:`FIELD_TREE_MIN_SEGMENTS`) use the treecode.

    Examples
    --------
    >>> fil = Filaments.from_segments([[0, 0, -1e3]], [[0, 0, 1e3]])
    >>> round(float(circuit_fields(np.array([[0.1, 0.0, 0.0]]), fil)[0, 0, 1]) * 1e6, 6)
    2.0
    """
    return _CircuitFields(filaments)(points)


def _density(filaments: Filaments) -> tuple[Callable[[Array], Array], NDArray[np.int64], NDArray[np.int64]]:
    """Integrand of the upper-triangle entries B_p . B_q / mu0 and their (p, q) indices."""
    rows, cols = np.triu_indices(filaments.n_circuits)
    fields = _CircuitFields(filaments)

    def f(points: Array) -> Array:
        b = fields(points)
        out = np.empty((len(points), len(rows)))
        for k, (p, q) in enumerate(zip(rows, cols)):
            out[:, k] = np.einsum("mi,mi->m", b[p], b[q])
        out *= 1.0 / MU0
        return out

    return f, rows, cols


def _seed_rule(filaments: Filaments) -> Callable[[Array, Array], NDArray[np.bool_]]:
    """should_split(centres, halves) from distances to points sampled along the segments."""
    from scipy.spatial import cKDTree  # a heavy import, needed here only

    lengths = np.linalg.norm(filaments.ends - filaments.starts, axis=1)
    spacing = np.maximum(filaments.radii, lengths.sum() / MAX_SAMPLES)
    counts = np.maximum(1, np.ceil(lengths / spacing).astype(np.int64))
    seg = np.repeat(np.arange(len(lengths)), counts)
    first = np.cumsum(counts) - counts
    t = (np.arange(len(seg)) - first[seg] + 0.5) / counts[seg]
    samples = filaments.starts[seg] + t[:, None] * (filaments.ends - filaments.starts)[seg]
    tree = cKDTree(samples)
    reach = SEED_CORE_RADII * filaments.radii[seg] + 0.5 * (lengths / counts)[seg]

    def should_split(centres: Array, halves: Array) -> NDArray[np.bool_]:
        dist, idx = tree.query(centres)
        return 2.0 * halves > SEED_SIZE_OVER_DISTANCE * np.maximum(dist, reach[idx])

    return should_split


def field_inductance(
    filaments: Filaments,
    *,
    rel_tol: float = FIELD_RELATIVE_TOLERANCE,
    max_points: int = MAX_FIELD_POINTS,
    progress: Callable[[float], None] | None = None,
) -> FieldInductance:
    """Circuit inductance matrix of the filaments by integrating |B|^2 over all space.

    Parameters
    ----------
    filaments
        The discretised conductors (cores of radius ``radii``; ``weights`` ampere-turns per A).
    rel_tol
        Target relative error of the matrix (largest entry error over sqrt(L_pp L_qq)).
    max_points
        Budget of integrand evaluations; past it the result has ``converged=False``.
    progress
        Called after each refinement generation with the share of the work done, 0 to 1:
        the larger of the budget spent and the error's progress from its first value towards
        the tolerance, on a log scale (an estimate: the cubature does not know its end).

    Returns
    -------
    FieldInductance

    Raises
    ------
    GeometryError
        No segments, or a segment of zero core radius (its field energy is infinite).

    Examples
    --------
    >>> square = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], dtype=float)
    >>> loop = Filaments.from_segments(square, np.roll(square, -1, axis=0), radii=0.05)
    >>> r = field_inductance(loop, rel_tol=1e-3)
    >>> print(f"{r.matrix[0, 0] * 1e6:.2f} uH")   # A.J route of the same model: 2.008 uH
    2.00 uH
    """
    _check(filaments, rel_tol)
    t0 = time.perf_counter()
    f, rows, cols = _density(filaments)
    lo = np.minimum(filaments.starts, filaments.ends).min(axis=0) - filaments.radii.max()
    hi = np.maximum(filaments.starts, filaments.ends).max(axis=0) + filaments.radii.max()
    centre, half = 0.5 * (lo + hi), BOX_HALF_SIZE * float(np.max(hi - lo))
    depth = int(math.ceil(math.log2(half / FIRST_GRID / float(filaments.radii.min())))) + 3
    cells = seeded_cells(centre, half, FIRST_GRID, _seed_rule(filaments), depth)
    diag = rows == cols
    tail_fine, n_fine = exterior_cube(f, centre, half, *EXTERIOR_RULE)
    tail_coarse, n_coarse = exterior_cube(f, centre, half, *EXTERIOR_CHECK_RULE)

    def scale(total: Array) -> Array:
        d = np.abs(total + tail_fine)[diag]  # L_pp in circuit order (triu_indices lists (p, p) in order)
        return np.sqrt(d[rows] * d[cols])

    def cell_error(delta: Array, total: Array) -> Array:
        return np.max(np.abs(delta) / scale(total), axis=1)

    def entry_error(delta: Array, total: Array) -> float:
        # the largest entry's own error, as reported in relative_error (cells are marked by cell_error)
        return float(np.max(np.abs(delta).sum(axis=0) / scale(total)))

    near_tol = NEAR_TOLERANCE_SHARE * rel_tol
    first: list[float] = []
    done = 0.0

    def on_generation(n_points: int, error: float) -> None:
        nonlocal done
        if progress is None:
            return
        first.append(first[0] if first else error)
        towards = math.log(first[0] / error) / math.log(first[0] / near_tol) if first[0] > near_tol and error > 0 else 1.0
        done = max(done, min(1.0, n_points / max_points), min(1.0, max(0.0, towards)))
        progress(done)

    near = adaptive_octree(
        f, *cells, cell_error, tol=near_tol, n=CELL_GAUSS_POINTS, max_points=max_points,
        total_error=entry_error, on_generation=on_generation,
    )
    tail_err = np.abs(tail_fine - tail_coarse)
    seconds = time.perf_counter() - t0
    return _packaged(filaments.n_circuits, (rows, cols), near, (tail_fine, tail_err), n_fine + n_coarse, seconds)


def _packaged(
    n: int,
    entries: tuple[NDArray[np.int64], NDArray[np.int64]],
    near: CubatureResult,
    tail: tuple[Array, Array],
    n_tail: int,
    seconds: float,
) -> FieldInductance:
    """Full symmetric matrices from the upper-triangle entries (p, q) of the near region and the tail."""
    rows, cols = entries
    def full(v: Array) -> Array:
        m = np.zeros((n, n))
        m[rows, cols] = v
        m[cols, rows] = v
        return m

    matrix = full(near.value + tail[0])
    error = full(near.error + tail[1])
    d = np.sqrt(np.abs(np.diag(matrix)))
    rel = float(np.max(error / np.outer(d, d)))
    n_points = (near.n_points + n_tail) * n
    return FieldInductance(matrix, error, full(tail[0]), rel, n_points, near.n_cells, near.converged, seconds)


def _check(filaments: Filaments, rel_tol: float) -> None:
    if filaments.n_segments == 0:
        raise GeometryError("the field route needs at least one segment, got none")
    bad = np.flatnonzero(~(filaments.radii > 0.0))
    if bad.size:
        raise GeometryError(
            f"segment {bad[0]}: the field route needs a core radius > 0 m (the field energy of a line "
            f"current is infinite), got {filaments.radii[bad[0]]}"
        )
    if not rel_tol > 0.0:
        raise ValueError(f"rel_tol must be > 0, got {rel_tol}")
