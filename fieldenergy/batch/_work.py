"""What a batch worker runs: one solve with its failure caught, and a warm-up before the first.

Both the local worker processes and the workers of a Dask cluster call :func:`compute`, so a
case fails the same way wherever it runs. This module is preloaded by the local process
server, so that a worker starts with the solver imported.
"""

from __future__ import annotations

import logging
import time
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from fieldenergy.discretise import discretise
from fieldenergy.errors import FieldEnergyError
from fieldenergy.fields import b_field
from fieldenergy.maps.evaluate import evaluate_maps
from fieldenergy.mechanics import mechanics
from fieldenergy.model import Case, CirclePath, Circuit, Coil, RoundSection
from fieldenergy.model.options import SolveOptions
from fieldenergy.model.result import Result
from fieldenergy.output.mechanics_out import mechanics_document
from fieldenergy.run import solve

log = logging.getLogger(__name__)

#: The statuses of a solve in a batch; ``skipped`` is decided before any solve.
STATUSES = ("ok", "failed", "skipped", "timeout")


@dataclass(frozen=True, slots=True)
class Outcome:
    """How one solve ended.

    Attributes
    ----------
    status
        ``ok``, ``failed`` or ``timeout``.
    message
        The error message of a failure, or the solve's warnings joined by ``; ``.
    seconds
        Wall time of the solve (s); for a timeout, the time limit.
    result
        The result when ``status`` is ``ok``.
    extra
        The result-JSON entries of the case's mechanics (forces, peak fields, discharge):
        plain data, so it travels from any worker.
    maps
        The field maps the case declares, evaluated (written by the client).
    filaments
        The conductors the maps were evaluated on (for the maps' geometry file).
    """

    status: str
    message: str
    seconds: float
    result: Result | None = None
    extra: dict[str, Any] | None = None
    maps: tuple[Any, ...] = ()
    filaments: Any = None


def compute(case: Case, options: SolveOptions) -> Outcome:
    """Solve one case and report how it ended; a failure is returned, never raised.

    Examples
    --------
    >>> loop = Coil("loop", "c", RoundSection(0.001), CirclePath(0.1, np.zeros(3), np.array([0.0, 0.0, 1.0])))
    >>> options = SolveOptions.from_preset("fast").with_changes(field_route=False)
    >>> outcome = compute(Case("t", (Circuit("c", 1.0),), (loop,)), options)
    >>> outcome.status, round(outcome.result.inductance[0, 0] * 1e9)  # mu0 R (ln(8R/a) - 7/4) = 620.1 nH
    ('ok', 620)
    """
    start = time.perf_counter()
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # solve() records its warnings in the result
            result = solve(case, options)
            extra, maps, filaments = _declared_work(case, result, options)
    except FieldEnergyError as exc:
        return Outcome("failed", str(exc), time.perf_counter() - start)
    except Exception as exc:  # one case's bug must not stop the batch; the type is kept
        log.debug("case %r failed", case.title, exc_info=True)
        return Outcome("failed", f"{type(exc).__name__}: {exc}", time.perf_counter() - start)
    return Outcome("ok", "; ".join(result.warnings), time.perf_counter() - start, result, extra, maps, filaments)


def _declared_work(case: Case, result: Result, options: SolveOptions) -> tuple[dict[str, Any], tuple[Any, ...], Any]:
    """What a case asks for beyond the solve: its mechanics (as JSON entries) and its maps.

    Mechanics are returned as plain data because the discretised model holds compiled path
    expressions, which do not travel between processes.
    """
    mech = mechanics(case, result.inductance, options)
    maps = tuple(evaluate_maps(case)) if case.maps else ()
    return mechanics_document(mech), maps, (mech.model.filaments if maps else None)


def prepare_worker(n_threads: int) -> None:
    """Set the worker's kernel threads and load the compiled kernels before the first case.

    Loading the kernels from numba's cache takes about a second; doing it here keeps that
    second out of the first case's run time and time limit. The warm-up solves two coarse
    round-wire loops by the A.J route and evaluates B at one point (the kernel of the field
    route), without the field route's cubature; kernels that only rectangular sections use
    load with the first such case.
    """
    import numba

    numba.set_num_threads(max(1, min(n_threads, numba.get_num_threads())))
    axis = np.array([0.0, 0.0, 1.0])
    circle = CirclePath(0.1, np.zeros(3), axis)
    lifted = CirclePath(0.1, 0.05 * axis, axis)
    coils = (Coil("lower", "c", RoundSection(1.0e-3), circle), Coil("upper", "c", RoundSection(1.0e-3), lifted))
    case = Case("warm-up", (Circuit("c", 1.0),), coils)
    compute(case, SolveOptions(preset="custom", n_levels=1, sagitta_fraction=1e-2, field_route=False))
    b_field(0.3 * axis[None, :], discretise(case).filaments, case.currents)
