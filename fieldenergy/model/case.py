"""The case: circuits, coils and discretisation settings, in SI units.

A :class:`Case` is what :func:`fieldenergy.caseio.read_case` returns. It holds no arrays
of segments: :func:`fieldenergy.discretise.discretise` turns it into :class:`Filaments`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import DEFAULT_MAX_ANGLE, DEFAULT_SAGITTA_FRACTION
from fieldenergy.model.maps import MapSpec
from fieldenergy.model.paths import Path
from fieldenergy.model.transforms import Repeat, Transform


@dataclass(frozen=True, slots=True)
class Circuit:
    """A circuit: coils in series carrying one terminal ``current`` (A).

    ``resistance`` is its series resistance (ohm); ``dump_resistance`` a resistor switched in
    at the start of a discharge (ohm), if any. A ``passive`` circuit is a closed loop with no
    supply (a shorted ring, a support cylinder modelled as loops): it carries zero current
    until a discharge induces one, and it needs a resistance > 0.
    """

    name: str
    current: float
    resistance: float = 0.0
    dump_resistance: float | None = None
    passive: bool = False


@dataclass(frozen=True, slots=True)
class RoundSection:
    """A round conductor of ``radius`` (m) with uniform current density."""

    radius: float


@dataclass(frozen=True, slots=True)
class RectSection:
    """A rectangular conductor or winding pack, ``width`` × ``height`` (m), uniform current density.

    For a planar path the width lies in the path's plane and the height along its normal;
    for a non-planar path the section follows a rotation-minimising frame.
    """

    width: float
    height: float


Section = RoundSection | RectSection


@dataclass(frozen=True, slots=True)
class Coil:
    """One conductor or winding pack on one path.

    Parameters
    ----------
    name
        Unique among the case's coils.
    circuit
        Name of the circuit the coil is in series with.
    turns
        Number of turns of the winding pack; the pack carries ``turns`` × circuit current.
    section
        Cross-section of the conductor or pack.
    path
        The centre line.
    transforms
        Rigid transforms applied to the path in order.
    repeat
        Copies of the (transformed) coil, in series in the same circuit.
    reverse
        Run the current against the path's direction.
    reference
        Optional reference direction for the section frame of a non-planar path: the frame's
        width axis starts as close to it as possible.
    """

    name: str
    circuit: str
    section: Section
    path: Path
    turns: float = 1.0
    transforms: tuple[Transform, ...] = ()
    repeat: Repeat | None = None
    reverse: bool = False
    reference: NDArray[np.float64] | None = None


@dataclass(frozen=True, slots=True)
class Discretisation:
    """How paths and sections are cut into straight filament segments.

    Parameters
    ----------
    sagitta
        Largest distance (m) between a chord and the exact path; ``None`` means
        ``sagitta_fraction`` × coil size.
    sagitta_fraction
        Default sagitta relative to each coil's bounding-box diagonal.
    max_angle
        Largest turning angle between consecutive chords (rad).
    section_grid
        Filaments across a rectangular section (across the width, across the height);
        ``None`` chooses from the aspect ratio. A round section is one filament at its
        centre whose geometric mean distance carries the section's size.
    section_refinement
        Multiplies both counts of every rectangular grid (given or chosen); the solve uses 2
        to estimate the error of the section grid.
    """

    sagitta: float | None = None
    sagitta_fraction: float = DEFAULT_SAGITTA_FRACTION
    max_angle: float = DEFAULT_MAX_ANGLE
    section_grid: tuple[int, int] | None = None
    section_refinement: int = 1


@dataclass(frozen=True, slots=True)
class Case:
    """A complete case: the circuits, their coils and the discretisation settings.

    ``source`` is the case file it was read from, if any; ``folder`` the case folder;
    ``maps`` the field maps it declares (see :mod:`fieldenergy.model.maps`).
    """

    title: str
    circuits: tuple[Circuit, ...]
    coils: tuple[Coil, ...]
    discretisation: Discretisation = field(default_factory=Discretisation)
    source: str | None = None
    folder: str | None = None
    maps: tuple[MapSpec, ...] = ()

    def circuit_index(self, name: str) -> int:
        """Position of circuit ``name`` in :attr:`circuits`."""
        for k, circuit in enumerate(self.circuits):
            if circuit.name == name:
                return k
        raise KeyError(name)

    @property
    def currents(self) -> NDArray[np.float64]:
        """Terminal currents of the circuits (A), in circuit order."""
        return np.array([c.current for c in self.circuits], dtype=np.float64)
