"""A summary of a discretised case: per coil instance and per circuit (no I/O)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fieldenergy.model import Case, FilamentModel


@dataclass(frozen=True, slots=True)
class CoilSummary:
    """One coil instance: its circuit, turns, lengths, ampere-turns and counts."""

    name: str
    circuit: str
    turns: float
    path_length_m: float
    conductor_length_m: float
    ampere_turns: float
    n_segments: int
    n_filaments: int
    sagitta_m: float


@dataclass(frozen=True, slots=True)
class CaseSummary:
    """A discretised case at a glance."""

    title: str
    coils: tuple[CoilSummary, ...]
    circuits: tuple[tuple[str, float, int], ...]
    n_segments: int
    n_filaments: int
    bbox_min: tuple[float, float, float]
    bbox_max: tuple[float, float, float]


def describe(case: Case, model: FilamentModel) -> CaseSummary:
    """Summarise ``model`` (discretised from ``case``).

    The path length is the length of the exact centre line; the conductor length is that times
    the number of turns; ampere-turns are turns times the circuit current.
    """
    fil = model.filaments
    _, first = np.unique(fil.filament, return_index=True)
    currents = case.currents
    coils = []
    for k, name in enumerate(model.coil_names):
        chains = np.flatnonzero(model.filament_coil == k)
        turns = float(np.sum(fil.weights[first[chains]]))
        circuit = model.coil_circuit[k]
        length = float(model.curves[k].length())  # type: ignore[attr-defined]
        coils.append(
            CoilSummary(
                name=name,
                circuit=model.circuit_names[circuit],
                turns=turns,
                path_length_m=length,
                conductor_length_m=length * turns,
                ampere_turns=turns * float(currents[circuit]),
                n_segments=int(np.count_nonzero(fil.coil == k)),
                n_filaments=len(chains),
                sagitta_m=float(model.sagittas[k]),
            )
        )
    circuits = tuple(
        (name, float(currents[j]), sum(1 for c in model.coil_circuit if c == j))
        for j, name in enumerate(model.circuit_names)
    )
    pts = np.vstack([fil.starts, fil.ends])
    return CaseSummary(
        title=case.title,
        coils=tuple(coils),
        circuits=circuits,
        n_segments=fil.n_segments,
        n_filaments=len(first),
        bbox_min=tuple(float(v) for v in pts.min(axis=0)),  # type: ignore[arg-type]
        bbox_max=tuple(float(v) for v in pts.max(axis=0)),  # type: ignore[arg-type]
    )
