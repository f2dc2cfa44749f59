"""solve(case) -> Result: the one place where reading, discretising and the A.J route meet.

Nothing here touches the file system. The inductance of every coil instance against every
other is assembled at each refinement level; circuit matrices are sums of coil blocks.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager, contextmanager
from dataclasses import replace

import numpy as np
from numpy.typing import NDArray

from fieldenergy.discretise import discretise
from fieldenergy.energy.extrapolate import richardson
from fieldenergy.energy.from_field import MAX_FIELD_POINTS, field_inductance
from fieldenergy.energy.fast_inductance import fast_grouped_inductance, progress_steps
from fieldenergy.energy.from_potential import grouped_inductance
from fieldenergy.energy.route_check import route_gap
from fieldenergy.model import Case, FilamentModel
from fieldenergy.model.case import Discretisation
from fieldenergy.model.options import FIELD_ROUTE_PAIR_BUDGET as DEFAULT_FIELD_BUDGET
from fieldenergy.model.options import SolveOptions
from fieldenergy.model.result import LevelRecord, Result
from fieldenergy.section_model import core_overlap_correction, gmd_correction, has_rect_grid

#: Relative accuracy of one partial mutual inductance (the kernels' quadrature target); the
#: floor of the error estimate when refinement changes nothing (all-straight conductors).
QUADRATURE_RELATIVE_ERROR: float = 1.0e-9

#: Segments from which ``aj_method = "auto"`` sums the A.J route by the treecode. Measured
#: (2 cores, benchmarks/bench_inductance.py): 5e3 segments 0.65 s direct against 0.30 s fast,
#: 2e4 segments 3.4 s against 1.3 s, 5e4 segments 17 s against 4.9 s; on close-wound helices
#: the direct sum is slower (4e4 segments 19 s). Below this size the direct sum's 1e-9 per
#: pair is worth its time.
FAST_AJ_MIN_SEGMENTS: int = 20_000

#: Relative error of the fast A.J sum: measured 1.0e-8 against the direct sum on the bundled
#: toroidal-set, 9e-8 on close-wound helices (see fieldenergy.energy.fast_inductance); the
#: floor of the error estimate when the fast sum is used carries a margin.
FAST_AJ_RELATIVE_ERROR: float = 1.0e-6

#: The section-grid check runs at chords this many times coarser in sagitta than level 0
#: (about 2.2 times fewer chords): the grid's error hardly depends on the chords, and the
#: doubled grid costs 16 times the pairs.
SECTION_CHECK_SAGITTA_FACTOR: float = 5.0

#: Default budget of the field route in point-segment pairs (about 90 s on 2 cores; the
#: ``field_budget`` solve option, ``--field-budget``). Its cost is points x segments, so a
#: case with many segments gets fewer cubature points; when the budget stops the cubature
#: first, the result says so and carries the error reached.
FIELD_ROUTE_PAIR_BUDGET: float = DEFAULT_FIELD_BUDGET

#: Fewest cubature points the field route is allowed, whatever the pair budget says.
FIELD_ROUTE_MIN_POINTS: int = 200_000

#: progress(description, total) -> a context manager yielding an update(n_done) callable.
ProgressFactory = Callable[[str, int], AbstractContextManager[Callable[[int], None]]]


@contextmanager
def _no_progress(description: str, total: int) -> Iterator[Callable[[int], None]]:
    yield lambda n: None


def settings_for(case: Case, options: SolveOptions) -> Discretisation:
    """The case's discretisation settings with the solve options' overrides applied."""
    disc = case.discretisation
    if options.sagitta_fraction is not None:
        disc = replace(disc, sagitta=None, sagitta_fraction=options.sagitta_fraction)
    if options.section_grid is not None:
        disc = replace(disc, section_grid=options.section_grid)
    return disc


def circuit_matrix(coil_matrix: NDArray[np.float64], coil_circuit: tuple[int, ...], n_circuits: int) -> NDArray[np.float64]:
    """Sum coil blocks into the terminal matrix of circuits (coils of a circuit are in series)."""
    incidence = np.zeros((n_circuits, len(coil_circuit)))
    incidence[list(coil_circuit), np.arange(len(coil_circuit))] = 1.0
    return incidence @ coil_matrix @ incidence.T


def solve(case: Case, options: SolveOptions | None = None, progress: ProgressFactory | None = None) -> Result:
    """Inductance matrix and stored energy of a case by the 1/2 integral of A.J route.

    The case is discretised at ``options.n_levels`` nested refinement levels; the coil
    inductance matrices are extrapolated by Richardson's method and the circuit matrix is
    summed from them. Unless ``options.field_route`` is off, the matrix is cross-checked by
    the field route, 1/mu0 * integral of B_p . B_q over all space (see
    :func:`fieldenergy.energy.from_field.field_inductance`), and the gap is reported.

    Parameters
    ----------
    case
        The case (see :func:`fieldenergy.load_case`).
    options
        Solve settings; the ``default`` preset if omitted.
    progress
        Optional progress-bar factory; nothing is shown without it.

    Returns
    -------
    Result

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, RoundSection, CirclePath
    >>> loop = Coil("loop", "c", RoundSection(0.001), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> r = solve(Case("one loop", (Circuit("c", 1.0),), (loop,)), SolveOptions.from_preset("fast"))
    >>> round(r.inductance[0, 0] * 1e9)   # mu0 R (ln(8R/a) - 7/4) = 620.1 nH
    620
    """
    options = options or SolveOptions()
    progress = progress or _no_progress
    disc = settings_for(case, options)
    start = time.perf_counter()
    records: list[LevelRecord] = []
    coil_matrices: list[NDArray[np.float64]] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        for level in range(options.base_level, options.base_level + options.n_levels):
            model, seconds = _solve_level(case, disc, level, progress, coil_matrices, options.aj_method)
            records.append(
                LevelRecord(
                    level=level,
                    n_segments=model.filaments.n_segments,
                    n_filaments=len(model.filament_coil),
                    inductance=circuit_matrix(coil_matrices[-1], model.coil_circuit, len(case.circuits)),
                    seconds=seconds,
                )
            )
        section_change, check_model, check_matrix = _section_check(case, disc, model, progress)
        if options.field_route and check_model is None:
            check_model = discretise(case, level=0, discretisation=_coarse_chords(disc))
            check_matrix = _coil_matrix(check_model, "field-route model (A.J)", progress)
    messages = tuple(dict.fromkeys(str(w.message) for w in caught))
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    result = _package(case, options, model, records, coil_matrices, section_change, messages, time.perf_counter() - start)
    if options.field_route:
        assert check_model is not None and check_matrix is not None
        aj_check = circuit_matrix(check_matrix, check_model.coil_circuit, len(case.circuits))
        result = _with_field_route(result, check_model, aj_check, options.field_tolerance, options.field_budget, progress)
        result = replace(result, seconds=time.perf_counter() - start)
    return result


def _with_field_route(
    result: Result, model: FilamentModel, aj_level: NDArray[np.float64], tolerance: float, pair_budget: float,
    progress: ProgressFactory,
) -> Result:
    """Add the field route (1/(2 mu0) integral of |B|^2) and its gap to the A.J route.

    Like with like (see :mod:`fieldenergy.energy.route_check`): the field matrix of a
    coarse-chord model (``model``: the section check's, chords SECTION_CHECK_SAGITTA_FACTOR times
    coarser in sagitta than level 0, since the field route's cost is points x segments),
    corrected for its overlapping pack cores (which the A.J model does not have) and plus the
    section-grid GMD correction (:mod:`fieldenergy.section_model`), against the A.J matrix of
    that same model (``aj_level``, with the same GMD correction); the field route is carried to
    the limit with the A.J route's chord correction from that model.
    """
    with progress(f"field route: {model.filaments.n_segments} segments (% of an estimate)", 100) as update:
        fi = field_inductance(model.filaments, rel_tol=tolerance, max_points=field_route_points(model, pair_budget),
                              progress=lambda share: update(int(100 * share)))
        update(100)
    n_circuits = len(result.circuit_names)
    # the field route's overlapping round cores, then the grid's GMD correction (section_model)
    section = circuit_matrix(np.diag(gmd_correction(model) - core_overlap_correction(model)), model.coil_circuit, n_circuits)
    field_level = fi.matrix + section
    gap = route_gap(field_level, aj_level, result.currents, fi.relative_error, result.relative_error, fi.converged)
    field_l = field_level + (result.inductance - aj_level)
    _, error, tail = fi.energy(result.currents)
    messages = result.warnings
    if not fi.converged:
        messages += (f"field route: the cubature stopped at its point budget with an estimated relative error of {fi.relative_error:.1e}",)
    return replace(
        result,
        field_inductance=field_l,
        field_energy=0.5 * float(result.currents @ field_l @ result.currents),
        field_energy_error=error,
        tail_energy=tail,
        field_relative_error=fi.relative_error,
        route_gap=gap.energy_gap,
        route_gap_matrix=gap.matrix_gap,
        route_gap_flag=gap.flagged,
        route_gap_hint=gap.hint,
        field_seconds=fi.seconds,
        field_segments=model.filaments.n_segments,
        field_points=fi.n_points,
        warnings=messages,
    )


def _solve_level(
    case: Case,
    disc: Discretisation,
    level: int,
    progress: ProgressFactory,
    coil_matrices: list[NDArray[np.float64]],
    aj_method: str = "auto",
) -> tuple[FilamentModel, float]:
    t0 = time.perf_counter()
    model = discretise(case, level=level, discretisation=disc)
    coil_matrices.append(_coil_matrix(model, f"level {level}", progress, aj_method))
    return model, time.perf_counter() - t0


def uses_fast_sum(aj_method: str, n_segments: int) -> bool:
    """Whether the A.J route of n_segments is summed by the treecode under ``aj_method``."""
    return aj_method == "fast" or (aj_method == "auto" and n_segments >= FAST_AJ_MIN_SEGMENTS)


def _coil_matrix(model: FilamentModel, label: str, progress: ProgressFactory, aj_method: str = "auto") -> NDArray[np.float64]:
    """Coil-instance inductance matrix of a model, with the section-grid GMD correction."""
    fil = model.filaments
    n_coils = len(model.coil_names)
    if uses_fast_sum(aj_method, fil.n_segments):
        with progress(f"{label}: {fil.n_segments} segments (treecode)", progress_steps(fil.n_segments, n_coils)) as update:
            matrix = fast_grouped_inductance(fil, fil.coil, n_coils, progress=update).matrix
    else:
        with progress(f"{label}: {fil.n_segments} segments", fil.n_segments) as update:
            matrix = grouped_inductance(fil, fil.coil, n_coils, progress=update)
    return matrix + np.diag(gmd_correction(model))


def field_route_model(case: Case, options: SolveOptions | None = None) -> FilamentModel:
    """The model the field route integrates in :func:`solve` (coarse chords, the case's grid)."""
    return discretise(case, level=0, discretisation=_coarse_chords(settings_for(case, options or SolveOptions())))


def field_route_points(model: FilamentModel, pairs: float = FIELD_ROUTE_PAIR_BUDGET) -> int:
    """The field route's point budget in :func:`solve`: the pair budget over the model's segments."""
    return min(MAX_FIELD_POINTS, max(FIELD_ROUTE_MIN_POINTS, int(pairs / max(model.filaments.n_segments, 1))))


def _coarse_chords(disc: Discretisation) -> Discretisation:
    """The settings with chords :data:`SECTION_CHECK_SAGITTA_FACTOR` times coarser in sagitta."""
    if disc.sagitta is not None:
        return replace(disc, sagitta=disc.sagitta * SECTION_CHECK_SAGITTA_FACTOR)
    return replace(disc, sagitta_fraction=min(0.5, disc.sagitta_fraction * SECTION_CHECK_SAGITTA_FACTOR))


def _section_check(
    case: Case, disc: Discretisation, model: FilamentModel, progress: ProgressFactory
) -> tuple[NDArray[np.float64] | None, FilamentModel | None, NDArray[np.float64] | None]:
    """|change| of the coil matrix when every rectangular grid is doubled, at coarse chords;
    with the coarse-chord model at the case's grid and its coil matrix (the field route's model).

    ``(None, None, None)`` when no coil has a rectangular grid (round sections carry no grid error).
    """
    if not has_rect_grid(model):
        return None, None, None
    coarse = _coarse_chords(disc)
    matrices = []
    models = []
    for refinement in (1, 2):
        models.append(discretise(case, level=0, discretisation=replace(coarse, section_refinement=refinement)))
        matrices.append(_coil_matrix(models[-1], f"section check x{refinement}", progress))
    return np.abs(matrices[1] - matrices[0]), models[0], matrices[0]


def _package(
    case: Case,
    options: SolveOptions,
    model: FilamentModel,
    records: list[LevelRecord],
    coil_matrices: list[NDArray[np.float64]],
    section_change: NDArray[np.float64] | None,
    messages: tuple[str, ...],
    seconds: float,
) -> Result:
    extrap = richardson(coil_matrices)
    coil_l = 0.5 * (extrap.value + extrap.value.T)
    n_circuits = len(case.circuits)
    circ_l = circuit_matrix(coil_l, model.coil_circuit, n_circuits)
    circ_err = circuit_matrix(extrap.error, model.coil_circuit, n_circuits)
    disc_err = _relative(circ_err, circ_l)  # nan for a single level: nothing to compare
    if math.isfinite(disc_err):
        fast = any(uses_fast_sum(options.aj_method, r.n_segments) for r in records)
        disc_err = max(disc_err, FAST_AJ_RELATIVE_ERROR if fast else QUADRATURE_RELATIVE_ERROR)
    sec_err = 0.0 if section_change is None else _relative(circuit_matrix(section_change, model.coil_circuit, n_circuits), circ_l)
    currents = case.currents
    energy = 0.5 * float(currents @ circ_l @ currents)
    rel = disc_err + sec_err
    scale = float(np.sum(np.sqrt(np.abs(np.diag(circ_l))) * np.abs(currents)))
    return Result(
        title=case.title,
        circuit_names=model.circuit_names,
        currents=currents,
        inductance=circ_l,
        coil_names=model.coil_names,
        coil_circuit=model.coil_circuit,
        coil_inductance=coil_l,
        energy=energy,
        energy_error=rel * 0.5 * scale**2,
        relative_error=rel,
        discretisation_error=disc_err,
        section_error=sec_err,
        observed_order=extrap.observed_order,
        levels=tuple(records),
        options=options,
        seconds=seconds,
        warnings=messages,
    )


def _relative(error: NDArray[np.float64], matrix: NDArray[np.float64]) -> float:
    """Largest entry error over the geometric mean of the matching diagonal entries."""
    d = np.sqrt(np.abs(np.diag(matrix)))
    scale = np.outer(d, d)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(scale > 0, error / scale, 0.0)
    return float(np.max(rel)) if rel.size else 0.0


def single_level(case: Case, options: SolveOptions | None = None) -> FilamentModel:
    """The discretised model at the finest level a solve with ``options`` would use."""
    options = options or SolveOptions()
    level = options.base_level + options.n_levels - 1
    return discretise(case, level=level, discretisation=settings_for(case, options))

