"""Evaluate a case's field maps: points, exact-path field, quantities and an error estimate."""

from __future__ import annotations

from collections.abc import Callable
from contextlib import AbstractContextManager
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.discretise import discretise
from fieldenergy.fastfield import (
    ESTIMATE_LOW_TREE,
    ESTIMATE_TREE,
    TREE_SETTINGS,
    TREE_TARGET_LEAF,
    TreeSettings,
    TreeSum,
)
from fieldenergy.maps.exact_path import (
    MAX_SUBDIVISIONS,
    ExactElements,
    exact_elements,
    exact_field,
)
from fieldenergy.maps.grids import map_points, reference_point
from fieldenergy.maps.quantities import map_quantities
from fieldenergy.model import Case, FilamentModel
from fieldenergy.model.maps import MapSpec
from fieldenergy.model.options import SolveOptions

#: The error estimate compares the field with a second evaluation at this Gauss order (and
#: half the sub-chords on the conductor); the difference bounds the error of the finer one.
ESTIMATE_ORDER: int = 6

#: The error estimate is evaluated on at most this many points of a map (a seeded sample of
#: larger maps): summed directly, a point costs as much in the estimate as in the map.
ESTIMATE_POINTS: int = 4096

#: Automatic choice: the fast sum is used when the number of target x element pairs exceeds
#: this. Measured with benchmarks/bench_maps.py (2 cores): the lattice FMM already wins at 1e6
#: pairs (0.053 s against 0.072 s) and takes 0.022 of the direct time at 1e9; below 1e8 pairs
#: direct summation takes about a second and keeps its 1e-12 accuracy, so it is kept there.
FAST_MIN_PAIRS: float = 1.0e8

#: Ways to evaluate a map: ``auto`` chooses by size, ``direct`` sums every pair, ``fast`` uses
#: the built-in fast sums (:data:`fieldenergy.fastfield.TREE_SETTINGS`) and ``fmm`` the fast multipole method of fmm3dpy (an optional dependency).
METHODS: tuple[str, ...] = ("auto", "direct", "fast", "fmm")

#: A fast map whose estimated summation error, relative to the local |B|, exceeds this at a
#: sampled point farther from the conductors than :data:`NEAR_FRACTION_OF_SIZE` of their size
#: (or :data:`TREE_RETRY_TOLERANCE_NEAR` at a nearer one) is evaluated again with the next of
#: :data:`fieldenergy.fastfield.TREE_SETTINGS`: the 1e-6 that maps aim for away from the
#: conductors (homogeneity in ppm) and the 1e-4 next to them, where the field varies over the
#: section. The estimate is reported per zone, whichever setting passed.
TREE_RETRY_TOLERANCE: float = 1.0e-6
TREE_RETRY_TOLERANCE_NEAR: float = 1.0e-4

#: Before a large map's first dual-treecode pass (after the lattice FMM fell short), the
#: treecode's settings are chosen on a pilot of whole target leaves: the first of the rest of
#: :data:`fieldenergy.fastfield.TREE_SETTINGS` within this tolerance there (half the retry
#: tolerance, a margin for the leaves the pilot misses). Maps of fewer than
#: :data:`PILOT_MIN_LEAVES` leaves skip the pilot (a retry costs little there). The lattice
#: FMM gets no pilot: its cells are set by the lattice, so a pilot's sparse leaves would be cut
#: less finely than the map's and summed more accurately.
TREE_PILOT_TOLERANCE: float = 5.0e-7
PILOT_MIN_LEAVES: int = 50

#: |B| below this fraction of the map's largest |B| counts as zero for relative errors.
RELATIVE_FLOOR: float = 1.0e-9

#: A map's estimated error is also reported apart for points nearer to a conductor's surface
#: than this fraction of the conductors' size (bounding-box diagonal of the centre lines) and
#: for those farther: maps aim for 1e-6 relative far from the conductors (homogeneity in ppm)
#: and 1e-4 next to them, where the field varies over the section.
NEAR_FRACTION_OF_SIZE: float = 0.05

Array = NDArray[np.float64]
ProgressFactory = Callable[[str, int], AbstractContextManager[Callable[[int], None]]]


@dataclass(frozen=True, slots=True, eq=False)
class MapResult:
    """The field on one map.

    Attributes
    ----------
    spec
        The map.
    points
        Evaluation points, shape (m, 3), m (first grid axis fastest).
    shape
        Points along each grid axis (box: 3, plane: 2, line and points: 1).
    b, a
        B (T) and A (T m), shape (m, 3); A is None for a map summed fast that asks no A
        (the fast sum then sums B alone).
    values
        The map's quantities by name (see :data:`fieldenergy.model.maps.MAP_QUANTITIES`).
    b_reference
        B at the reference point (T), shape (3,).
    error_index, error
        Points where the error of B was estimated and the estimate there (T).
    error_near
        For each of those points, whether it is nearer to a conductor's surface than
        :data:`NEAR_FRACTION_OF_SIZE` of the conductors' size.
    near_distance
        That distance (m).
    method
        How the field was summed: ``direct``, ``tree`` (the built-in fast sums) or ``fmm``.
    tree
        The fast sum's settings (``tree`` only; the first of those tried whose estimated
        error was within :data:`TREE_RETRY_TOLERANCE` far from the conductors and
        :data:`TREE_RETRY_TOLERANCE_NEAR` near them, else the last).
    """

    spec: MapSpec
    points: Array
    shape: tuple[int, ...]
    b: Array
    a: Array | None
    values: dict[str, Array]
    b_reference: Array
    error_index: NDArray[np.int64]
    error: Array
    error_near: NDArray[np.bool_]
    near_distance: float
    method: str = "direct"
    tree: TreeSettings | None = None

    @property
    def relative_error(self) -> float:
        """Largest estimated error of B relative to the local |B| (floored at 1e-9 of the largest)."""
        return self._largest(np.ones(len(self.error), bool)) or 0.0

    @property
    def relative_error_far(self) -> float | None:
        """:attr:`relative_error` over the sampled points farther than :attr:`near_distance`
        from the conductors (None if there are none)."""
        return self._largest(~self.error_near)

    @property
    def relative_error_near(self) -> float | None:
        """:attr:`relative_error` over the sampled points nearer (None if there are none)."""
        return self._largest(self.error_near)

    def _largest(self, which: NDArray[np.bool_]) -> float | None:
        if not which.any():
            return None
        mag = np.linalg.norm(self.b[self.error_index[which]], axis=1)
        floor = _floor(np.linalg.norm(self.b, axis=1))
        return float(np.max(self.error[which] / np.maximum(mag, floor)))


def evaluate_map(
    case: Case,
    spec: MapSpec,
    *,
    model: FilamentModel | None = None,
    method: str = "auto",
    progress: ProgressFactory | None = None,
) -> MapResult:
    """B, A and the requested quantities on a map, with an estimate of the error of B.

    The field is integrated along the exact conductor paths (see
    :mod:`fieldenergy.maps.exact_path`); the error is estimated on up to
    :data:`ESTIMATE_POINTS` points (see :func:`_field_and_error`).

    Parameters
    ----------
    case
        The case (its circuit currents drive the field).
    spec
        The map.
    model
        The discretised case (default: ``discretise(case)``).
    method
        One of :data:`METHODS`.
    progress
        ``progress(description, total)`` returning a context manager that yields an
        ``update(n_done)`` callable (see :mod:`fieldenergy.cli._progress`).

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, CirclePath, RoundSection
    >>> from fieldenergy.model.maps import LineMap
    >>> coil = Coil("ring", "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> case = Case("demo", (Circuit("c", 1.0),), (coil,))
    >>> res = evaluate_map(case, LineMap("axis", [0, 0, -0.1], [0, 0, 0.1], 3))
    >>> round(float(res.b[1, 2]) * 1e6, 9)    # mu0 I / (2 R) = 2 pi uT
    6.283185307
    """
    model = discretise(case) if model is None else model
    points, shape = map_points(spec)
    elements = exact_elements(case, model)
    fast = _use_fast(method, len(points), elements)
    index = _estimate_index(len(points))
    low = exact_elements(case, model, ESTIMATE_ORDER)
    near, distance = _near_conductors(points[index], model)
    tolerance = np.where(near, TREE_RETRY_TOLERANCE_NEAR, TREE_RETRY_TOLERANCE)
    b, a, error, tree = _field_and_error(points, elements, low, index, f"map {spec.name!r}", progress, fast,
                                         "A" in spec.quantities, tolerance)
    ref = np.asarray(reference_point(spec), dtype=np.float64)[None, :]
    b_ref = exact_field(ref, elements)[0][0]
    values = map_quantities(spec.quantities, b, a, b_ref)
    return MapResult(spec, points, shape, b, a, values, b_ref, index, error, near, distance, fast or "direct", tree)


def evaluate_maps(case: Case, *, method: str = "auto", progress: ProgressFactory | None = None) -> list[MapResult]:
    """Every map the case declares, in order (one discretisation shared by all)."""
    if not case.maps:
        return []
    model = discretise(case)
    return [evaluate_map(case, spec, model=model, method=method, progress=progress) for spec in case.maps]


def _use_fast(method: str, n_points: int, elements: ExactElements) -> str | None:
    """The fast engine to use (``tree`` or ``fmm``), or None for direct summation (see :data:`METHODS`)."""
    if method not in METHODS:
        raise ValueError(f"unknown map method {method!r}; known: {', '.join(METHODS)}")
    if method == "auto":
        return "tree" if float(n_points) * len(elements.nodes) > FAST_MIN_PAIRS else None
    return {"direct": None, "fast": "tree", "fmm": "fmm"}[method]


def _field(
    points: Array, elements: ExactElements, label: str, progress: ProgressFactory | None,
    max_subdivisions: int = MAX_SUBDIVISIONS, fast: str | None = None, tree: TreeSum | None = None,
    potential: bool = True,
) -> tuple[Array, Array | None]:
    from fieldenergy.fastfield import fast_field

    def run(update: Callable[[int], None] | None) -> tuple[Array, Array | None]:
        if fast is not None:
            return fast_field(points, elements, engine=fast, tree=tree, max_subdivisions=max_subdivisions,
                              potential=potential, progress=update)
        return exact_field(points, elements, max_subdivisions=max_subdivisions, progress=update)

    if progress is None:
        return run(None)
    with progress(label, len(points)) as update:
        return run(update)


def _estimate_index(n_points: int) -> NDArray[np.int64]:
    """All points of a small map; a seeded sample (sorted) of a large one."""
    if n_points <= ESTIMATE_POINTS:
        return np.arange(n_points, dtype=np.int64)
    rng = np.random.default_rng(0)
    return np.sort(rng.choice(n_points, ESTIMATE_POINTS, replace=False)).astype(np.int64)



def reference_field(
    case: Case,
    points: ArrayLike,
    options: SolveOptions | None = None,
    *,
    method: str = "auto",
    progress: ProgressFactory | None = None,
) -> tuple[Array, Array, Array]:
    """B (T), A (T m) and a per-point error estimate of B (T) at many points.

    Below :data:`FAST_MIN_PAIRS` (or with ``method="direct"``) this is the Richardson
    evaluation over the two finest chord levels (:func:`fieldenergy.fieldmap.field_with_error`).
    Above it (or with ``method="fast"`` or ``"fmm"``), the field is integrated along the exact
    paths by fast summation (:func:`fieldenergy.fastfield.fast_field`) with exact near corrections; its error
    is estimated on a sample as for a map (:func:`_field_and_error`), and the largest relative
    error seen there is applied to every point (times its |B|).
    """
    from fieldenergy.fieldmap import field_with_error

    pts = np.ascontiguousarray(points, dtype=np.float64)
    model = discretise(case)
    elements = exact_elements(case, model)
    engine = _use_fast(method, len(pts), elements)
    if engine is None:
        return field_with_error(case, pts, options, progress)
    index = _estimate_index(len(pts))
    low = exact_elements(case, model, ESTIMATE_ORDER)
    b, a, error, _ = _field_and_error(pts, elements, low, index, f"reference field ({engine})", progress, engine)
    assert a is not None  # summed with the potential
    mag = np.linalg.norm(b, axis=1)
    floor = _floor(mag)
    return b, a, float(np.max(error / np.maximum(mag[index], floor), initial=0.0)) * np.maximum(mag, floor)


def _near_conductors(points: Array, model: FilamentModel) -> tuple[NDArray[np.bool_], float]:
    """Which points are nearer to a conductor's surface than :data:`NEAR_FRACTION_OF_SIZE` of
    the conductors' size, and that distance (m). The surface is taken at half the largest
    section dimension from the centre lines (so a point is counted near rather than far)."""
    from fieldenergy.femcompare.distance import conductor_distance, section_size

    dist = conductor_distance(model)
    reach = NEAR_FRACTION_OF_SIZE * dist.size
    half = 0.5 * max((section_size(s) for s in model.coil_sections), default=0.0)
    return dist(points) - half < reach, reach


def _floor(mag: Array) -> float:
    return max(float(mag.max(initial=0.0)) * RELATIVE_FLOOR, np.finfo(float).tiny)


def _pilot_choice(points: Array, elements: ExactElements, settings: tuple[tuple[str, int, float, int], ...]
                  ) -> tuple[int, TreeSum]:
    """The first of the dual-treecode ``settings`` (index, and its treecode) whose B on a pilot
    of whole target leaves (see :func:`fieldenergy.fastfield.pilot_points`) is within
    :data:`TREE_PILOT_TOLERANCE` of the :data:`fieldenergy.fastfield.ESTIMATE_TREE` treecode's;
    the last if none is."""
    from fieldenergy.fastfield import fast_field, pilot_points

    pts = np.ascontiguousarray(points[pilot_points(points)])
    ref = fast_field(pts, elements, tree=TreeSum(elements, *ESTIMATE_TREE), potential=False)[0]
    mag = np.linalg.norm(ref, axis=1)
    for k, setting in enumerate(settings):
        tree = TreeSum(elements, *setting)
        b = fast_field(pts, elements, tree=tree, potential=False)[0]
        if np.max(np.linalg.norm(b - ref, axis=1) / np.maximum(mag, _floor(mag)), initial=0.0) <= TREE_PILOT_TOLERANCE:
            break
    return k, tree


def _field_and_error(
    points: Array, elements: ExactElements, low: ExactElements, index: NDArray[np.int64], label: str,
    progress: ProgressFactory | None, fast: str | None, potential: bool = True, tolerance: Array | None = None,
) -> tuple[Array, Array | None, Array, TreeSettings | None]:
    """B and A at points (direct or ``fast``; A is None for ``fast`` without ``potential``),
    the error estimate of B at ``index`` (T) and the fast-sum settings used.

    Direct: the estimate is the difference from a lower-order evaluation (``low``, half the
    sub-chords). Fast: the sample is evaluated twice by the dual treecode, scattered samples
    being summed far more accurately than a dense map: once with the map's elements and
    :data:`fieldenergy.fastfield.ESTIMATE_TREE` (the summation error is the map's difference
    from it), once with ``low`` (the integration rule's error is the difference of the two);
    the estimate is the sum of both parts. The map is summed with the first of
    :data:`fieldenergy.fastfield.TREE_SETTINGS` (the lattice FMM), and again with the next
    while its summation error on the sample exceeds ``tolerance`` (relative, per sampled point;
    default :data:`TREE_RETRY_TOLERANCE` everywhere). Before a large map's first treecode pass
    a pilot skips the treecode settings that would fall short (see :func:`_pilot_choice`).
    Each source tree is built once.
    """
    if fast is None:
        b, a = _field(points, elements, label, progress)
        b_low = _field(points[index], low, f"{label}, error estimate", progress, MAX_SUBDIVISIONS // 2)[0]
        return b, a, np.linalg.norm(b[index] - b_low, axis=1), None
    tol = np.full(len(index), TREE_RETRY_TOLERANCE) if tolerance is None else tolerance
    sample = np.ascontiguousarray(points[index])
    b_ref = _field(sample, elements, f"{label}, error estimate", progress, fast="tree",
                   tree=TreeSum(elements, *ESTIMATE_TREE), potential=False)[0]
    b_low = _field(sample, low, f"{label}, error estimate", progress, MAX_SUBDIVISIONS // 2, "tree",
                   TreeSum(low, *ESTIMATE_LOW_TREE), potential=False)[0]
    tries: tuple[tuple[str, int, float, int] | None, ...] = TREE_SETTINGS if fast == "tree" else (None,)
    k, piloted = 0, False
    while True:
        setting = tries[k]
        tree = None
        if setting is not None:
            if setting[0] == "dual" and not piloted and len(points) > PILOT_MIN_LEAVES * TREE_TARGET_LEAF:
                piloted = True
                rest = tuple(t for t in tries[k:] if t is not None)
                skip, tree = _pilot_choice(points, elements, rest)
                k += skip
                setting = tries[k]
            tree = TreeSum(elements, *setting) if tree is None else tree  # type: ignore[misc]
        name = label if k == 0 else f"{label}, {tree.settings.describe()}"  # type: ignore[union-attr]
        b, a = _field(points, elements, name, progress, fast=fast, tree=tree, potential=potential)
        summed = np.linalg.norm(b[index] - b_ref, axis=1)
        scale = np.maximum(np.linalg.norm(b_ref, axis=1), _floor(np.linalg.norm(b, axis=1)))
        if k == len(tries) - 1 or np.all(summed / scale <= tol):
            break
        k += 1
        del tree  # free the last source tree before the next is built
    return b, a, summed + np.linalg.norm(b_ref - b_low, axis=1), None if tree is None else tree.settings
