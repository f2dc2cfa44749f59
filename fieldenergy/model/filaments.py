"""The discretised model: straight filament segments as a struct of arrays.

This is all the numerical kernels see. Each coil instance's path is cut into chords; each
chord is repeated once per filament of the section, offset across the section. A filament
is the chain of segments that follows one point of the section all the way round.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray


@dataclass(frozen=True, slots=True, eq=False)
class Filaments:
    """Straight filament segments, ``n`` of them, as parallel arrays (SI units).

    Attributes
    ----------
    starts, ends
        Segment end points, shape (n, 3), m. Current flows from start to end.
    weights
        Ampere-turns per ampere of the segment's circuit current, shape (n,): the coil's turns
        times the filament's share of the section. The segment current is
        ``weights * circuit_current``.
    radii
        Core radius for field evaluation, shape (n,), m: inside it the field is that of a
        conductor of uniform current density (the section's radius for a round conductor, the
        radius of the round conductor with the GMD of the filament's sub-section for a
        rectangular pack).
    gmd
        Geometric mean distance of the filament's sub-section from itself, shape (n,), m.
        Used for the self-interaction of a filament (partial self-inductance).
    filament
        Index of the filament chain each segment belongs to, shape (n,), int64.
    coil
        Index of the coil instance (after repeats), shape (n,), int64.
    circuit
        Index of the circuit, shape (n,), int64.
    t0, t1
        Parameter interval of the chord on its filament's exact curve, shape (n,).
    n_circuits
        Number of circuits (the circuit indices lie in ``range(n_circuits)``).
    """

    starts: NDArray[np.float64]
    ends: NDArray[np.float64]
    weights: NDArray[np.float64]
    radii: NDArray[np.float64]
    gmd: NDArray[np.float64]
    filament: NDArray[np.int64]
    coil: NDArray[np.int64]
    circuit: NDArray[np.int64]
    t0: NDArray[np.float64]
    t1: NDArray[np.float64]
    n_circuits: int

    def __post_init__(self) -> None:
        n = len(self.weights)
        for name in ("starts", "ends"):
            arr = np.ascontiguousarray(getattr(self, name), dtype=np.float64)
            if arr.shape != (n, 3):
                raise ValueError(f"Filaments.{name} must have shape ({n}, 3), got {arr.shape}")
            object.__setattr__(self, name, arr)
        for name in ("weights", "radii", "gmd", "t0", "t1"):
            arr = np.ascontiguousarray(getattr(self, name), dtype=np.float64)
            if arr.shape != (n,):
                raise ValueError(f"Filaments.{name} must have shape ({n},), got {arr.shape}")
            object.__setattr__(self, name, arr)
        for name in ("filament", "coil", "circuit"):
            arr = np.ascontiguousarray(getattr(self, name), dtype=np.int64)
            if arr.shape != (n,):
                raise ValueError(f"Filaments.{name} must have shape ({n},), got {arr.shape}")
            object.__setattr__(self, name, arr)

    @property
    def n_segments(self) -> int:
        """Number of straight segments."""
        return len(self.weights)

    def chain_pieces(self) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
        """Connected pieces of the filament chains, and arc coordinates along them.

        A chain's segments are taken in array order; a piece is a run of them in which each
        segment starts where the one before it ends (to 1e-9 of their lengths), so disjoint
        loops given one filament index are separate pieces. Returns, each of shape (n,): the
        piece index of each segment (int64), the arc coordinate of its midpoint along the
        piece (m), and the piece's length if it is closed (its last segment ends where its
        first starts), else 0 (m).
        """
        n = self.n_segments
        if n == 0:
            return np.zeros(0, np.int64), np.zeros(0), np.zeros(0)
        lengths = np.linalg.norm(self.ends - self.starts, axis=1)
        order = np.argsort(self.filament, kind="stable")
        fil, st, en, ln = self.filament[order], self.starts[order], self.ends[order], lengths[order]
        joined = np.linalg.norm(st[1:] - en[:-1], axis=1) <= 1e-9 * (ln[1:] + ln[:-1])
        first = np.flatnonzero(np.r_[True, (fil[1:] != fil[:-1]) | ~joined])
        last = np.r_[first[1:], n] - 1
        group = np.repeat(np.arange(len(first)), np.diff(np.r_[first, n]))
        cum = np.cumsum(ln)
        before = (cum - ln)[first]
        total = cum[last] - before
        closed = np.linalg.norm(en[last] - st[first], axis=1) <= 1e-9 * total
        piece, arc, loop = np.empty(n, np.int64), np.empty(n), np.empty(n)
        piece[order] = group
        arc[order] = cum - 0.5 * ln - before[group]
        loop[order] = np.where(closed, total, 0.0)[group]
        return piece, arc, loop

    def currents(self, circuit_currents: NDArray[np.float64]) -> NDArray[np.float64]:
        """Segment currents (A) for the given circuit terminal currents (A), shape (n,)."""
        circuit_currents = np.asarray(circuit_currents, dtype=np.float64)
        if circuit_currents.shape != (self.n_circuits,):
            raise ValueError(
                f"expected {self.n_circuits} circuit currents, got shape {circuit_currents.shape}"
            )
        return self.weights * circuit_currents[self.circuit]

    @classmethod
    def from_segments(
        cls,
        starts: NDArray[np.float64],
        ends: NDArray[np.float64],
        *,
        weights: NDArray[np.float64] | float = 1.0,
        radii: NDArray[np.float64] | float = 0.0,
        gmd: NDArray[np.float64] | float | None = None,
        filament: NDArray[np.int64] | int = 0,
        coil: NDArray[np.int64] | int = 0,
        circuit: NDArray[np.int64] | int = 0,
        n_circuits: int | None = None,
    ) -> Filaments:
        """Build from bare segment arrays, broadcasting scalars (handy in tests and notebooks).

        ``gmd`` defaults to ``radii * exp(-1/4)``, the geometric mean distance of a round
        section from itself.
        """
        starts = np.asarray(starts, dtype=np.float64).reshape(-1, 3)
        n = len(starts)

        def full(v: object, dtype: type) -> NDArray:
            return np.broadcast_to(np.asarray(v, dtype=dtype), (n,)).copy()

        radii_a = full(radii, np.float64)
        gmd_a = radii_a * np.exp(-0.25) if gmd is None else full(gmd, np.float64)
        circuit_a = full(circuit, np.int64)
        return cls(
            starts=starts,
            ends=np.asarray(ends, dtype=np.float64).reshape(-1, 3),
            weights=full(weights, np.float64),
            radii=radii_a,
            gmd=gmd_a,
            filament=full(filament, np.int64),
            coil=full(coil, np.int64),
            circuit=circuit_a,
            t0=np.zeros(n),
            t1=np.ones(n),
            n_circuits=int(circuit_a.max(initial=-1) + 1) if n_circuits is None else n_circuits,
        )


@dataclass(frozen=True, slots=True, eq=False)
class FilamentModel:
    """A discretised case: the segments plus what is needed to name and re-trace them.

    Attributes
    ----------
    filaments
        The segments.
    circuit_names
        Circuit names, by circuit index.
    coil_names
        Coil instance names, by coil index (a repeated coil ``c`` gives ``c``, ``c[2]``, ...).
    coil_circuit
        Circuit index of each coil instance.
    curves
        The exact centre-line curve of each coil instance (objects of
        :mod:`fieldenergy.geometry`), by coil index.
    filament_coil
        Coil index of each filament chain, shape (n_filaments,).
    filament_offset
        Offset of each filament across the section, (u, v) in the section frame, m,
        shape (n_filaments, 2).
    level
        Refinement level the model was built at (0 is the base; each level halves the chords).
    sagittas
        Chord sagitta used for each coil instance at this level (m).
    coil_sections
        The cross-section of each coil instance (a ``RoundSection`` or ``RectSection``).
    """

    filaments: Filaments
    circuit_names: tuple[str, ...]
    coil_names: tuple[str, ...]
    coil_circuit: tuple[int, ...]
    curves: tuple[object, ...]
    filament_coil: NDArray[np.int64]
    filament_offset: NDArray[np.float64]
    level: int
    sagittas: tuple[float, ...]
    coil_sections: tuple[object, ...] = ()
