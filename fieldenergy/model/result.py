"""The result of a solve: inductance matrix, stored energy, error estimate and the settings used."""

from __future__ import annotations

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

    @property
    def coupling(self) -> NDArray[np.float64]:
        """Coupling coefficients k_ij = L_ij / sqrt(L_ii L_jj)."""
        d = np.sqrt(np.abs(np.diag(self.inductance)))
        return self.inductance / np.outer(d, d)
