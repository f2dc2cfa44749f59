"""Evaluate a case's field maps: points, exact-path field, quantities and an error estimate."""

from __future__ import annotations

from collections.abc import Callable
from contextlib import AbstractContextManager
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.discretise import discretise
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
#: larger maps), since it costs about as much as the map itself.
ESTIMATE_POINTS: int = 4096

#: Automatic choice: the treecode is used when the number of target x element pairs exceeds
#: this. Measured with benchmarks/bench_maps.py (2 cores): the treecode already wins at 1e6
#: pairs (0.056 s against 0.083 s) and takes 0.035 of the direct time at 1e9; below 1e8 pairs
#: direct summation takes about a second and keeps its 1e-12 accuracy, so it is kept there.
FAST_MIN_PAIRS: float = 1.0e8

#: Ways to evaluate a map: ``auto`` chooses by size, ``direct`` sums every pair, ``fast`` uses
#: the treecode and ``fmm`` the fast multipole method of fmm3dpy (an optional dependency).
METHODS: tuple[str, ...] = ("auto", "direct", "fast", "fmm")

#: |B| below this fraction of the map's largest |B| counts as zero for relative errors.
RELATIVE_FLOOR: float = 1.0e-9

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
        B (T) and A (T m), shape (m, 3).
    values
        The map's quantities by name (see :data:`fieldenergy.model.maps.MAP_QUANTITIES`).
    b_reference
        B at the reference point (T), shape (3,).
    error_index, error
        Points where the error of B was estimated and the estimate there (T).
    """

    spec: MapSpec
    points: Array
    shape: tuple[int, ...]
    b: Array
    a: Array
    values: dict[str, Array]
    b_reference: Array
    error_index: NDArray[np.int64]
    error: Array

    @property
    def relative_error(self) -> float:
        """Largest estimated error of B relative to the local |B| (floored at 1e-9 of the largest)."""
        if len(self.error) == 0:
            return 0.0
        mag = np.linalg.norm(self.b[self.error_index], axis=1)
        floor = max(float(np.linalg.norm(self.b, axis=1).max()) * RELATIVE_FLOOR, np.finfo(float).tiny)
        return float(np.max(self.error / np.maximum(mag, floor)))


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
    :data:`ESTIMATE_POINTS` points as the difference from a lower-order evaluation.

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
    b, a = _field(points, elements, f"map {spec.name!r}", progress, fast=fast)
    ref = np.asarray(reference_point(spec), dtype=np.float64)[None, :]
    b_ref = exact_field(ref, elements)[0][0]
    index = _estimate_index(len(points))
    low = exact_elements(case, model, ESTIMATE_ORDER)
    b_low = _field(points[index], low, f"map {spec.name!r}, error estimate", progress, MAX_SUBDIVISIONS // 2)[0]
    error = np.linalg.norm(b[index] - b_low, axis=1)
    values = map_quantities(spec.quantities, b, a, b_ref)
    return MapResult(spec, points, shape, b, a, values, b_ref, index, error)


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
    max_subdivisions: int = MAX_SUBDIVISIONS, fast: str | None = None,
) -> tuple[Array, Array]:
    from fieldenergy.fastfield import fast_field

    def run(update: Callable[[int], None] | None) -> tuple[Array, Array]:
        if fast is not None:
            return fast_field(points, elements, engine=fast, progress=update)
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
    is estimated on a sample against a lower-order rule, and the largest relative error seen
    there is applied to every point (times its |B|).
    """
    from fieldenergy.fieldmap import field_with_error
    from fieldenergy.fastfield import fast_field

    pts = np.ascontiguousarray(points, dtype=np.float64)
    model = discretise(case)
    elements = exact_elements(case, model)
    engine = _use_fast(method, len(pts), elements)
    if engine is None:
        return field_with_error(case, pts, options, progress)
    if progress is None:
        b, a = fast_field(pts, elements, engine=engine)
    else:
        with progress(f"reference field ({engine})", len(pts)) as update:
            b, a = fast_field(pts, elements, engine=engine, progress=update)
    index = _estimate_index(len(pts))
    b_low = exact_field(pts[index], exact_elements(case, model, ESTIMATE_ORDER), max_subdivisions=MAX_SUBDIVISIONS // 2)[0]
    mag = np.linalg.norm(b, axis=1)
    floor = max(float(mag.max(initial=0.0)) * RELATIVE_FLOOR, np.finfo(float).tiny)
    rel = np.linalg.norm(b[index] - b_low, axis=1) / np.maximum(mag[index], floor)
    return b, a, float(rel.max(initial=0.0)) * np.maximum(mag, floor)
