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

Each diagonal entry L_pp gets an octree of its own, seeded towards circuit p's conductors
and summing circuit p's segments alone: |B_p|^2 needs fine cells only at p's core surfaces.
The mutual entries share one more octree over all circuits, seeded coarser (next to one
conductor the other circuits' fields are smooth, so B_p . B_q has a smaller kink). On the
two-circuit bundled cases this took 0.5 (wireless-link) and 0.75 (toroidal-set) of the time
of one octree for all entries, at the same tolerance.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.constants import MU0
from fieldenergy.energy.cubature import adaptive_octree, exterior_cube, seeded_cells
from fieldenergy.errors import FieldEnergyWarning, GeometryError
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

#: The mutual entries' octree is seeded only to cells this many core radii across: next to a
#: conductor B_p . B_q has a smaller kink than |B_p|^2 (the other circuit's field is smooth there).
MUTUAL_SEED_CORE_RADII: float = 16.0

#: The octrees spend the point budget in turn; each may use what is left less, for every octree
#: after it, this many times the cost of that octree's seeded cells (their first generation).
RESERVED_GENERATIONS: float = 4.0

#: The error estimate sums the cells' differences with their signs over cubes this many of the
#: octree's smallest core radius across (see :func:`fieldenergy.energy.cubature.block_sums`),
#: but never wider than ERROR_BLOCK_BOX_SHARE of the box: with thick conductors in a small box
#: a few blocks would hold all of it, and one signed sum over everything can cancel by chance
#: (measured 3.6 times under the true error on a kinked test integrand).
ERROR_BLOCK_CORE_RADII: float = 8.0
ERROR_BLOCK_BOX_SHARE: float = 1.0 / 16.0

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

    def __call__(self, points: Array, circuits: Sequence[int] | None = None) -> Array:
        """B of the given circuits (default all), shape (len(circuits), m, 3)."""
        chosen = range(len(self.parts)) if circuits is None else circuits
        out = np.zeros((len(chosen), len(points), 3))
        for k, p in enumerate(chosen):
            s, e, w, r = self.parts[p]
            if len(s) == 0:
                continue
            if len(s) >= FIELD_TREE_MIN_SEGMENTS and float(len(points)) * len(s) > FIELD_TREE_MIN_PAIRS:
                self._tree(p)(np.ascontiguousarray(points), out[k])
                continue
            for i0 in range(0, len(points), _CHUNK):
                pts = np.ascontiguousarray(points[i0 : i0 + _CHUNK])
                b_from_segments(pts, s, e, w, r, out[k, i0 : i0 + _CHUNK])
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


def _density(
    filaments: Filaments,
    entries: tuple[NDArray[np.int64], NDArray[np.int64]] | None = None,
    fields: _CircuitFields | None = None,
) -> tuple[Callable[[Array], Array], NDArray[np.int64], NDArray[np.int64]]:
    """Integrand of the entries B_p . B_q / mu0 and their (p, q) indices (default: the upper
    triangle). Only the circuits the entries name are evaluated."""
    rows, cols = np.triu_indices(filaments.n_circuits) if entries is None else entries
    fields = _CircuitFields(filaments) if fields is None else fields
    circuits = sorted(set(rows.tolist()) | set(cols.tolist()))
    where = {p: k for k, p in enumerate(circuits)}

    def f(points: Array) -> Array:
        b = fields(points, circuits)
        out = np.empty((len(points), len(rows)))
        for k, (p, q) in enumerate(zip(rows, cols)):
            out[:, k] = np.einsum("mi,mi->m", b[where[p]], b[where[q]])
        out *= 1.0 / MU0
        return out

    return f, rows, cols


def _seed_rule(
    filaments: Filaments, chosen: NDArray[np.bool_], core_radii: float
) -> Callable[[Array, Array], NDArray[np.bool_]]:
    """should_split(centres, halves) from distances to points sampled along the chosen segments."""
    from scipy.spatial import cKDTree  # a heavy import, needed here only

    starts, ends, radii = filaments.starts[chosen], filaments.ends[chosen], filaments.radii[chosen]
    lengths = np.linalg.norm(ends - starts, axis=1)
    spacing = np.maximum(radii, lengths.sum() / MAX_SAMPLES)
    counts = np.maximum(1, np.ceil(lengths / spacing).astype(np.int64))
    seg = np.repeat(np.arange(len(lengths)), counts)
    first = np.cumsum(counts) - counts
    t = (np.arange(len(seg)) - first[seg] + 0.5) / counts[seg]
    samples = starts[seg] + t[:, None] * (ends - starts)[seg]
    tree = cKDTree(samples)
    reach = core_radii * radii[seg] + 0.5 * (lengths / counts)[seg]

    def should_split(centres: Array, halves: Array) -> NDArray[np.bool_]:
        dist, idx = tree.query(centres)
        return 2.0 * halves > SEED_SIZE_OVER_DISTANCE * np.maximum(dist, reach[idx])

    return should_split


@dataclass(frozen=True, slots=True)
class _Group:
    """Matrix entries integrated on one octree: their positions in the upper triangle, the
    circuits whose fields they need, and the segments the octree is seeded towards."""

    entries: NDArray[np.int64]
    circuits: tuple[int, ...]
    segments: NDArray[np.bool_]
    seed_core_radii: float


def _groups(filaments: Filaments) -> list[_Group]:
    """One octree per diagonal entry (its own circuit's field only), then one for all mutual entries.

    A diagonal entry needs refinement only at its own circuit's core surfaces (where |B_p|^2
    has its kinks), and there only its own circuit's segments are summed; the mutual entries
    B_p . B_q are smaller next to any one conductor and share one octree over all circuits.
    """
    n = filaments.n_circuits
    rows, cols = np.triu_indices(n)
    out = [_Group(np.flatnonzero((rows == p) & (cols == p)), (p,), filaments.circuit == p, SEED_CORE_RADII)
           for p in range(n)]
    if n > 1:
        out.append(_Group(np.flatnonzero(rows != cols), tuple(range(n)), np.ones(filaments.n_segments, bool),
                          MUTUAL_SEED_CORE_RADII))
    return [g for g in out if g.segments.any()]


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
        Target relative error of every entry (its error over sqrt(L_pp L_qq)).
    max_points
        Budget of integrand evaluations, counted as points at which every segment is summed
        (an octree that sums only some circuits' segments spends their share of a point);
        the octrees share it in turn. Past it the result has ``converged=False``.
    progress
        Called after each refinement generation with the share of the work done, 0 to 1:
        per octree, the larger of its budget spent and the error's progress from its first
        value towards the tolerance, on a log scale (an estimate: the cubature does not know
        its end).

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
    _warn_if_open(filaments)
    t0 = time.perf_counter()
    fields = _CircuitFields(filaments)
    f_all, rows, cols = _density(filaments, fields=fields)
    lo = np.minimum(filaments.starts, filaments.ends).min(axis=0) - filaments.radii.max()
    hi = np.maximum(filaments.starts, filaments.ends).max(axis=0) + filaments.radii.max()
    centre, half = 0.5 * (lo + hi), BOX_HALF_SIZE * float(np.max(hi - lo))
    tail_fine, n_fine = exterior_cube(f_all, centre, half, *EXTERIOR_RULE)
    tail_coarse, n_coarse = exterior_cube(f_all, centre, half, *EXTERIOR_CHECK_RULE)
    groups = _groups(filaments)
    value, error = np.zeros(len(rows)), np.zeros(len(rows))
    pairs_left = float(max_points) * filaments.n_segments
    seeds = [_seeded(filaments, group, centre, half) for group in groups]
    # a first generation evaluates every seeded cell's rule and its eight children's
    first_cost = [9.0 * CELL_GAUSS_POINTS**3 * len(cells[1]) * int(g.segments.sum()) for cells, g in zip(seeds, groups)]
    evaluations, n_cells, converged = 0, 0, True
    diag_of = {p: int(np.flatnonzero((rows == p) & (cols == p))[0]) for p in range(filaments.n_circuits)}
    for k, group in enumerate(groups):
        n_seg = int(group.segments.sum())
        reserve = RESERVED_GENERATIONS * sum(first_cost[k + 1 :])
        budget = int(max(pairs_left - reserve, pairs_left / (len(groups) - k)) / n_seg)
        entries = (rows[group.entries], cols[group.entries])
        f, _, _ = _density(filaments, entries, fields)
        # scale of each entry: sqrt(L_pp L_qq), the diagonal from its own octree (it runs first)
        known = np.abs(value + tail_fine)
        fixed = np.sqrt(known[[diag_of[int(p)] for p in entries[0]]] * known[[diag_of[int(q)] for q in entries[1]]])
        own = tail_fine[group.entries]
        is_diag = entries[0] == entries[1]

        def scale(total: Array, fixed: Array = fixed, own: Array = own, is_diag: NDArray[np.bool_] = is_diag) -> Array:
            return np.where(is_diag, np.abs(total + own), fixed)

        near = adaptive_octree(
            f, *seeds[k], _cell_error(scale), tol=NEAR_TOLERANCE_SHARE * rel_tol,
            n=CELL_GAUSS_POINTS, max_points=budget, total_error=_entry_error(scale),
            on_generation=_reporter(progress, k, len(groups), budget, NEAR_TOLERANCE_SHARE * rel_tol),
            block=min(ERROR_BLOCK_CORE_RADII * float(filaments.radii[group.segments].min()),
                      ERROR_BLOCK_BOX_SHARE * 2.0 * half),
        )
        value[group.entries], error[group.entries] = near.value, near.error
        pairs_left -= float(near.n_points) * n_seg
        evaluations += near.n_points * len(group.circuits)
        n_cells += near.n_cells
        converged = converged and near.converged
    tail_err = np.abs(tail_fine - tail_coarse)
    seconds = time.perf_counter() - t0
    evaluations += (n_fine + n_coarse) * filaments.n_circuits
    return _packaged(filaments.n_circuits, (rows, cols), (value, error), (tail_fine, tail_err),
                     (evaluations, n_cells, converged), seconds)


def _seeded(filaments: Filaments, group: _Group, centre: Array, half: float) -> tuple[Array, Array]:
    """Starting cells of a group's octree over the cube, seeded towards its segments."""
    depth = math.ceil(math.log2(half / FIRST_GRID / float(filaments.radii[group.segments].min()))) + 3
    rule = _seed_rule(filaments, group.segments, group.seed_core_radii)
    return seeded_cells(centre, half, FIRST_GRID, rule, depth)


def _cell_error(scale: Callable[[Array], Array]) -> Callable[[Array, Array], Array]:
    """Per-cell error: the largest over the entries of |difference| / scale (cells are marked by it)."""
    return lambda delta, total: np.max(np.abs(delta) / scale(total), axis=1)


def _entry_error(scale: Callable[[Array], Array]) -> Callable[[Array, Array], float]:
    """The error compared with the tolerance: the largest entry's own summed error over its scale."""
    return lambda delta, total: float(np.max(np.abs(delta).sum(axis=0) / scale(total)))


def _reporter(
    progress: Callable[[float], None] | None, k: int, n_groups: int, budget: int, tol: float
) -> Callable[[int, float], None] | None:
    """on_generation for octree k of n_groups: reports the whole route's share of work done."""
    if progress is None:
        return None
    first: list[float] = []
    done = 0.0

    def on_generation(n_points: int, error: float) -> None:
        nonlocal done
        if not first:
            first.append(error)
        towards = math.log(first[0] / error) / math.log(first[0] / tol) if first[0] > tol and error > 0 else 1.0
        done = max(done, min(1.0, n_points / max(budget, 1)), min(1.0, max(0.0, towards)))
        progress(min(1.0, (k + done) / n_groups))

    return on_generation


def _packaged(
    n: int,
    entries: tuple[NDArray[np.int64], NDArray[np.int64]],
    near: tuple[Array, Array],
    tail: tuple[Array, Array],
    counts: tuple[int, int, bool],
    seconds: float,
) -> FieldInductance:
    """Full symmetric matrices from the upper-triangle entries (p, q) of the near region and the tail."""
    rows, cols = entries

    def full(v: Array) -> Array:
        m = np.zeros((n, n))
        m[rows, cols] = v
        m[cols, rows] = v
        return m

    matrix = full(near[0] + tail[0])
    error = full(near[1] + tail[1])
    d = np.sqrt(np.abs(np.diag(matrix)))
    rel = float(np.max(error / np.outer(d, d)))
    n_points, n_cells, converged = counts
    return FieldInductance(matrix, error, full(tail[0]), rel, n_points, n_cells, converged, seconds)


def _warn_if_open(filaments: Filaments) -> None:
    """Warn when some circuit's current does not flow in closed loops.

    The field energy of an open current path is not its partial inductance (the current
    would pile up at the loose ends), so the two routes then measure different things.
    A node is loose when the weights of the segments ending there and starting there do
    not cancel; nodes are matched exactly, as discretised chains join.
    """
    nodes = np.concatenate([filaments.ends, filaments.starts])
    flow = np.concatenate([filaments.weights, -filaments.weights])
    keys = np.column_stack([nodes, np.tile(filaments.circuit, 2)])
    _, which = np.unique(keys, axis=0, return_inverse=True)
    net = np.bincount(which.ravel(), weights=flow)
    loose = np.flatnonzero(np.abs(net) > 1e-9 * float(np.abs(filaments.weights).max()))
    if loose.size:
        first = int(np.flatnonzero(which.ravel() == loose[0])[0])
        x, y, z = nodes[first]
        warnings.warn(
            f"field route: circuit {int(keys[first, 3])} has {loose.size} loose end(s) (for example at "
            f"({x:.6g}, {y:.6g}, {z:.6g}) m): its current does not flow in closed loops, so the field energy "
            "differs from the A.J route's partial inductance",
            FieldEnergyWarning,
            stacklevel=3,
        )


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
