"""The result of a solve: inductance matrix, stored energy, error estimate and the settings used."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from fieldenergy.model.options import SolveOptions


@dataclass(frozen=True, slots=True)
class LevelRecord:
    """One refinement level of a solve: its size, its raw inductance matrix and its run time."""

    level: int
    n_segments: int
    n_filaments: int
    inductance: NDArray[np.float64]
    seconds: float


@dataclass(frozen=True, slots=True, eq=False)
class Result:
    """Inductance and energy of a case, with the error estimate and the settings that produced them.

    Attributes
    ----------
    title
        The case title.
    circuit_names, currents
        Circuits and their terminal currents (A).
    inductance
        Terminal inductance matrix of the circuits (H), extrapolated over the levels.
    coil_names, coil_inductance
        Per-coil-instance self and mutual inductances (H, for one ampere-turn per turn of the
        coil's circuit current), extrapolated.
    coil_circuit
        Circuit index of each coil instance.
    energy
        Stored energy 1/2 I^T L I (J) from the A.J route.
    energy_error
        Bound on the energy error implied by ``relative_error`` (J).
    relative_error
        Estimated relative error of the inductance matrix (largest entry error over the
        geometric mean of the matching diagonal entries), from the levels and the section model.
    discretisation_error, section_error
        The two parts of ``relative_error``: chord refinement (Richardson) and section filaments.
    observed_order
        Convergence order observed over the last three levels (``nan`` when not measurable).
    levels
        The raw solves, coarsest first.
    options
        The settings used.
    seconds
        Total wall time (s).
    warnings
        Warnings raised while reading, discretising and solving.
    field_inductance
        Circuit inductance matrix by the field route, 1/mu0 * integral of B_p . B_q over all
        space (H), carried to the limit with the A.J route's chord correction; ``None`` when
        the field route was skipped.
    field_energy, field_energy_error, tail_energy
        Stored energy by the field route (J), its error estimate from the cubature (J), and
        the part of it from outside the box about the conductors (J).
    field_relative_error
        The field route's own relative error estimate of its matrix.
    route_gap, route_gap_matrix
        |W_field - W_aj| / W_aj at the case currents, and the largest matrix-entry gap over
        sqrt(L_pp L_qq); ``nan`` when the field route was skipped.
    route_gap_flag, route_gap_hint
        Whether a gap exceeds the tolerance, and which route to refine.
    field_seconds
        Wall time of the field route (s).
    field_segments, field_points
        Segments of the model the field route integrated (coarser chords than the solve's
        levels) and its integrand evaluations (points x circuits); 0 when skipped.
    """

    title: str
    circuit_names: tuple[str, ...]
    currents: NDArray[np.float64]
    inductance: NDArray[np.float64]
    coil_names: tuple[str, ...]
    coil_circuit: tuple[int, ...]
    coil_inductance: NDArray[np.float64]
    energy: float
    energy_error: float
    relative_error: float
    discretisation_error: float
    section_error: float
    observed_order: float
    levels: tuple[LevelRecord, ...]
    options: SolveOptions
    seconds: float
    warnings: tuple[str, ...] = field(default=())
    field_inductance: NDArray[np.float64] | None = None
    field_energy: float = math.nan
    field_energy_error: float = math.nan
    tail_energy: float = math.nan
    field_relative_error: float = math.nan
    route_gap: float = math.nan
    route_gap_matrix: float = math.nan
    route_gap_flag: bool = False
    route_gap_hint: str = ""
    field_seconds: float = math.nan
    field_segments: int = 0
    field_points: int = 0

    @property
    def coupling(self) -> NDArray[np.float64]:
        """Coupling coefficients k_ij = L_ij / sqrt(L_ii L_jj)."""
        d = np.sqrt(np.abs(np.diag(self.inductance)))
        return self.inductance / np.outer(d, d)
