"""Safety cautions printed with every result, scaled to the stored energy of the case.

The thresholds are common practice for laboratory magnets, not a standard: they decide how
strongly the output words its warning, never whether a design is safe.
"""

from __future__ import annotations

#: Stored energy (J) above which a sudden discharge can burn, arc or melt leads (common practice).
SIGNIFICANT_ENERGY_J: float = 10.0

#: Stored energy (J) above which a dedicated protection (dump resistor, detection) is needed
#: in most laboratory practice (common practice).
LARGE_ENERGY_J: float = 1.0e3

GENERAL_CAUTION = (
    "Design estimate only. fieldenergy assumes an air core (mu = mu0 everywhere), "
    "quasi-static uniform current density and no eddy currents. Check every result against "
    "local codes and have the design reviewed by a qualified, licensed practitioner."
)


def cautions(energy_j: float) -> list[str]:
    """Caution lines for a case storing ``energy_j`` joules.

    Examples
    --------
    >>> len(cautions(0.01)), len(cautions(5e4))
    (1, 3)
    """
    lines = [GENERAL_CAUTION]
    if abs(energy_j) >= SIGNIFICANT_ENERGY_J:
        lines.append(
            f"The circuits store {energy_j:.3g} J: opening a circuit under current produces a "
            "high inductive voltage; discharge through a rated resistor and never break the "
            "circuit by hand."
        )
    if abs(energy_j) >= LARGE_ENERGY_J:
        lines.append(
            "Stored energy above 1 kJ: plan quench or fault detection and an energy dump, size "
            "leads and supports for the forces on the windings, and follow your site's "
            "electrical safety rules."
        )
    return lines
