"""Stored energy and inductance: the 1/2 integral of A.J route (Neumann's double sum)."""

from __future__ import annotations

from fieldenergy.energy.from_potential import (
    coil_inductance_matrix,
    grouped_inductance,
    inductance_matrix,
    partial_inductances,
    stored_energy,
)

__all__ = [
    "coil_inductance_matrix",
    "grouped_inductance",
    "inductance_matrix",
    "partial_inductances",
    "stored_energy",
]
