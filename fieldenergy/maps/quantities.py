"""Derived map quantities: |B|, the energy density and the homogeneity in ppm."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import MU0

Array = NDArray[np.float64]

#: Units of each quantity, for file headers, data names and plot labels.
QUANTITY_UNITS: dict[str, str] = {"B": "T", "|B|": "T", "A": "T m", "u": "J/m^3", "homogeneity": "ppm"}

#: File- and VTK-safe names of each quantity (no bars or spaces).
QUANTITY_NAMES: dict[str, str] = {"B": "B_T", "|B|": "Bmag_T", "A": "A_Tm", "u": "u_J_per_m3",
                                  "homogeneity": "homogeneity_ppm"}


def energy_density(b: Array) -> Array:
    """Magnetic energy density u = |B|^2 / (2 mu0) (J/m^3) of B (T), shape (m, 3) -> (m,).

    Examples
    --------
    >>> round(float(energy_density(np.array([[0.0, 0.0, 1.0]]))[0]), 3)   # 1 T: ~398 kJ/m^3
    397887.358
    """
    return np.einsum("ij,ij->i", b, b) / (2.0 * MU0)


def homogeneity_ppm(b: Array, b_ref: Array) -> Array:
    """1e6 (|B| - |B_ref|) / |B_ref| for B (T), shape (m, 3), and the reference field B_ref (3,).

    Examples
    --------
    >>> homogeneity_ppm(np.array([[0.0, 0.0, 1.000002]]), np.array([0.0, 0.0, 1.0])).round(6).tolist()
    [2.0]
    """
    ref = float(np.linalg.norm(b_ref))
    if not ref > 0.0:
        return np.full(len(b), np.nan)
    return 1.0e6 * (np.linalg.norm(b, axis=1) - ref) / ref


def map_quantities(quantities: tuple[str, ...], b: Array, a: Array | None, b_ref: Array | None) -> dict[str, Array]:
    """The requested quantities of a map, by name: vectors (m, 3), scalars (m,).

    ``A`` needs ``a``; ``homogeneity`` needs ``b_ref``, the field at the map's reference point.
    """
    out: dict[str, Array] = {}
    for q in quantities:
        if q == "B":
            out[q] = b
        elif q == "|B|":
            out[q] = np.linalg.norm(b, axis=1)
        elif q == "A":
            if a is None:
                raise ValueError("quantity A asked for but the vector potential was not computed")
            out[q] = a
        elif q == "u":
            out[q] = energy_density(b)
        elif q == "homogeneity":
            out[q] = homogeneity_ppm(b, np.zeros(3) if b_ref is None else b_ref)
    return out
