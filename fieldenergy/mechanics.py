"""Forces, peak conductor field and discharge of a solved case: the orchestration after a solve.

Forces and fields are evaluated on the finest level a solve used
(:func:`fieldenergy.run.single_level`); the discharge uses the solved, extrapolated circuit
inductance matrix. Nothing here touches the file system.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.cautions import mechanics_cautions
from fieldenergy.discharge import Discharge, discharge, discharge_or_note
from fieldenergy.forces import CoilForces, coil_forces
from fieldenergy.geometry import coil_instances, mapped_direction
from fieldenergy.model import Case, FilamentModel
from fieldenergy.model.options import SolveOptions
from fieldenergy.peak_field import PeakField, peak_field
from fieldenergy.run import single_level
from fieldenergy.winding_forces import ForceDistribution, force_distribution


@dataclass(frozen=True, slots=True, eq=False)
class Mechanics:
    """Forces, peak conductor fields and the discharge of a case.

    Attributes
    ----------
    model
        The discretised case the forces and fields were evaluated on.
    currents
        Circuit currents used (A).
    forces
        Net force and torque on each coil instance from the other coils.
    distribution
        Force per unit length along the windings, own field included.
    peak
        Largest |B| on each coil instance's surface.
    discharge
        The discharge of the circuits, or ``None`` (see ``discharge_note``).
    discharge_note
        Why no discharge was computed, or ``None``.
    about_given
        Whether the torques are about a point the user gave (else about each coil's centroid).
    """

    model: FilamentModel
    currents: NDArray[np.float64]
    forces: CoilForces
    distribution: ForceDistribution
    peak: PeakField
    discharge: Discharge | None
    discharge_note: str | None
    about_given: bool = False

    @property
    def coil_names(self) -> tuple[str, ...]:
        """Coil instance names, in model order."""
        return self.model.coil_names

    def cautions(self) -> list[str]:
        """Caution lines scaled to the peak discharge voltage and the forces."""
        voltage = float(np.max(self.discharge.peak_voltage)) if self.discharge is not None else None
        force = float(np.max(np.linalg.norm(self.forces.force, axis=1), initial=0.0))
        return mechanics_cautions(voltage, force, self.distribution.peak)


def instance_references(case: Case) -> list[NDArray[np.float64] | None]:
    """Section-frame reference direction of every coil instance, as the discretisation uses it."""
    out: list[NDArray[np.float64] | None] = []
    for coil in case.coils:
        for _, curve in coil_instances(coil):
            out.append(None if coil.reference is None else mapped_direction(curve, coil.reference))
    return out


def mechanics(
    case: Case,
    inductance: ArrayLike,
    options: SolveOptions | None = None,
    *,
    about: ArrayLike | None = None,
    require_discharge: bool = False,
) -> Mechanics:
    """Forces, torques, peak conductor fields and the discharge of a solved case.

    Parameters
    ----------
    case
        The case.
    inductance
        Its solved terminal inductance matrix (``Result.inductance``), H.
    options
        The solve's options (they fix the finest level the forces are evaluated on).
    about
        Point to take torques about (m), or one per coil instance; the coils' centroids if omitted.
    require_discharge
        Raise :class:`~fieldenergy.discharge.DischargeError` when the circuits cannot
        discharge, instead of returning a note.

    Returns
    -------
    Mechanics

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, RoundSection, CirclePath
    >>> ring = Coil("ring", "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> mech = mechanics(Case("ring", (Circuit("c", 10.0),), (ring,)), [[6.255e-7]])
    >>> mech.discharge is None, mech.discharge_note.startswith("discharge not computed")
    (True, True)
    """
    model = single_level(case, options)
    currents = case.currents
    l_matrix = np.asarray(inductance, dtype=np.float64)
    dis: Discharge | None = None
    note: str | None = None
    if require_discharge:
        dis = discharge(case.circuits, l_matrix)
    else:
        dis, note = discharge_or_note(case.circuits, l_matrix)
    return Mechanics(
        model=model,
        currents=currents,
        forces=coil_forces(model, currents, about),
        distribution=force_distribution(model, currents),
        peak=peak_field(model, currents, instance_references(case)),
        discharge=dis,
        discharge_note=note,
        about_given=about is not None,
    )
