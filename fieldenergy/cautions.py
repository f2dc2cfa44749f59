"""Safety cautions printed with every result, scaled to the stored energy, the peak discharge
voltage and the forces of the case.

The thresholds are common practice for laboratory magnets, not a standard: they decide how
strongly the output words its warning, never whether a design is safe.
"""

from __future__ import annotations

#: Stored energy (J) above which a sudden discharge can burn, arc or melt leads (common practice).
SIGNIFICANT_ENERGY_J: float = 10.0

#: Stored energy (J) above which a dedicated protection (dump resistor, detection) is needed
#: in most laboratory practice (common practice).
LARGE_ENERGY_J: float = 1.0e3

#: Peak discharge voltage (V) above which the circuit is a shock hazard: the usual limit of
#: extra-low voltage for dry conditions (common practice).
SIGNIFICANT_VOLTAGE_V: float = 50.0

#: Peak discharge voltage (V) above which insulation to earth and between turns must be
#: rated and tested as for a high-voltage circuit (common practice).
HIGH_VOLTAGE_V: float = 1.0e3

#: Net force on a coil (N) above which it can move, pinch hands or tear loose unless its
#: supports are designed for it (common practice; about the weight of 10 kg).
SIGNIFICANT_FORCE_N: float = 100.0

#: Net force on a coil (N) above which the supports are a structural design in their own
#: right (common practice; about the weight of a tonne).
LARGE_FORCE_N: float = 1.0e4

#: Force per unit length on a winding (N/m) above which the conductor's own hoop stress and
#: the winding's bonding must be checked (common practice).
SIGNIFICANT_FORCE_PER_LENGTH_N_PER_M: float = 1.0e3

GENERAL_CAUTION = (
    "Design estimate only. fieldenergy assumes an air core (mu = mu0 everywhere), "
    "quasi-static uniform current density and no eddy currents except in circuits declared "
    "passive. Check every result against "
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


def mechanics_cautions(peak_voltage_v: float | None, max_force_n: float, max_force_per_length: float) -> list[str]:
    """Caution lines for the peak discharge voltage (V; ``None`` if not computed) and the forces.

    Examples
    --------
    >>> len(mechanics_cautions(None, 1.0, 1.0)), len(mechanics_cautions(2e3, 5e4, 5e3))
    (0, 3)
    """
    lines = []
    if peak_voltage_v is not None and peak_voltage_v >= HIGH_VOLTAGE_V:
        lines.append(
            f"The discharge reaches {peak_voltage_v:.3g} V across the resistances: a high-voltage "
            "hazard. Rate, test and guard the insulation of the leads, the dump resistor and the "
            "windings to earth for it."
        )
    elif peak_voltage_v is not None and peak_voltage_v >= SIGNIFICANT_VOLTAGE_V:
        lines.append(
            f"The discharge reaches {peak_voltage_v:.3g} V across the resistances: above the "
            "extra-low voltage limit, a shock hazard. Guard the terminals and the dump resistor."
        )
    if max_force_n >= LARGE_FORCE_N:
        lines.append(
            f"A coil carries a net force of {max_force_n:.3g} N: its supports are a structural "
            "design in their own right, to be checked for fault cases (one circuit lost) too."
        )
    elif max_force_n >= SIGNIFICANT_FORCE_N:
        lines.append(
            f"A coil carries a net force of {max_force_n:.3g} N: fix it so it cannot move, and "
            "keep hands and tools clear while it is energised."
        )
    if max_force_per_length >= SIGNIFICANT_FORCE_PER_LENGTH_N_PER_M:
        lines.append(
            f"The windings carry up to {max_force_per_length:.3g} N/m: check the conductor's hoop "
            "stress and the bonding and clamping of the turns."
        )
    return lines
