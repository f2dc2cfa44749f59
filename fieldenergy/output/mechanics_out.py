"""Forces, peak fields and discharge as result data: JSON entries, a VTK of forces, a CSV and a plot."""

from __future__ import annotations

import csv
import io
import os
from pathlib import Path
from typing import Any

import numpy as np

from fieldenergy.discharge import Discharge
from fieldenergy.errors import ExportError
from fieldenergy.mechanics import Mechanics
from fieldenergy.output.atomic import atomic_path

#: Names of the files :func:`write_mechanics_files` adds to a result folder.
FORCES_VTK = "forces.vtu"
DISCHARGE_CSV = "discharge.csv"
DISCHARGE_PNG = "discharge.png"


def mechanics_document(mech: Mechanics) -> dict[str, Any]:
    """The result-JSON entries ``coils``, ``forces``, ``discharge`` and ``mechanics_cautions``."""
    dist = mech.distribution
    return {
        "coils": [
            {
                "name": name,
                "force_N": mech.forces.force[k].tolist(),
                "torque_Nm": mech.forces.torque[k].tolist(),
                "torque_about_m": mech.forces.about[k].tolist(),
                "peak_field_T": float(mech.peak.value[k]),
                "peak_field_location_m": mech.peak.location[k].tolist(),
            }
            for k, name in enumerate(mech.coil_names)
        ],
        "forces": {
            "peak_per_length_N_per_m": dist.peak,
            "peak_location_m": dist.peak_location.tolist(),
            "peak_coil": mech.coil_names[dist.peak_coil] if dist.peak_coil >= 0 else None,
            "level": mech.model.level,
            "n_segments": mech.model.filaments.n_segments,
        },
        "discharge": None if mech.discharge is None else discharge_document(mech.discharge),
        "discharge_note": mech.discharge_note,
        "mechanics_cautions": mech.cautions(),
    }


def discharge_document(d: Discharge) -> dict[str, Any]:
    """The ``discharge`` entry of the result JSON."""
    return {
        "circuits": list(d.circuits),
        "initial_energy_J": d.initial_energy,
        "time_constants_s": d.time_constants.tolist(),
        "peak_voltage_V": d.peak_voltage.tolist(),
        "energy_deposited_J": d.energy_deposited.tolist(),
        "dump_energy_J": (d.energy_deposited * d.dump_fraction).tolist(),
        "resistance_ohm": d.resistance.tolist(),
        "passive": d.passive.tolist(),
        "peak_current_A": d.peak_current.tolist(),
        "peak_current_time_s": d.peak_time.tolist(),
        "time_to_1pct_s": d.time_to_1pct.tolist(),
    }


def discharge_csv(d: Discharge) -> str:
    """Currents against time: columns ``t_s`` and ``I_<circuit>_A``."""
    t = d.times()
    current = d.currents(t)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["t_s", *(f"I_{name}_A" for name in d.circuits)])
    for ti, row in zip(t, current):
        writer.writerow([f"{ti:.9g}", *(f"{v:.9g}" for v in row)])
    return buf.getvalue()


def write_discharge_plot(path: str | os.PathLike[str], d: Discharge) -> None:
    """Plot the currents against time to a PNG (matplotlib, Agg backend, imported here)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    t = d.times()
    fig, ax = plt.subplots(figsize=(7.0, 4.2), dpi=110)
    for name, col in zip(d.circuits, d.currents(t).T):
        ax.plot(t, col, label=name)
    ax.set_xlabel("time t (s)")
    ax.set_ylabel("current I (A)")
    ax.set_title(f"Discharge: {d.initial_energy:.3g} J, longest time constant {d.time_constants[0]:.3g} s")
    ax.grid(True, alpha=0.3)
    ax.legend()
    fig.tight_layout()
    try:
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format="png")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write ({exc})") from None
    finally:
        plt.close(fig)


def write_forces_vtk(path: str | os.PathLike[str], mech: Mechanics) -> None:
    """The force distribution as VTK line cells, one per piece of every filament segment.

    Cell data: ``force_per_length_N_per_m`` (vector, this filament),
    ``winding_force_per_length_N_per_m`` (vector, the whole section at this place) and its
    magnitude, ``current_A`` and ``coil``.
    """
    import meshio  # heavy import, only where used

    fil = mech.model.filaments
    dist = mech.distribution
    n = len(dist.segment)
    points = np.empty((2 * n, 3))
    points[0::2], points[1::2] = dist.starts, dist.ends
    mesh = meshio.Mesh(
        points,
        [("line", np.arange(2 * n, dtype=np.int64).reshape(n, 2))],
        cell_data={
            "force_per_length_N_per_m": [dist.per_length],
            "winding_force_per_length_N_per_m": [dist.winding_per_length],
            "winding_force_per_length_magnitude": [np.linalg.norm(dist.winding_per_length, axis=1)],
            "current_A": [fil.currents(mech.currents)[dist.segment]],
            "coil": [fil.coil[dist.segment].astype(np.int32)],
        },
    )
    try:
        with atomic_path(path) as tmp:
            meshio.write(tmp, mesh, file_format="vtu")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write ({exc})") from None


def write_mechanics_files(folder: str | os.PathLike[str], mech: Mechanics) -> None:
    """Write the forces VTK and, when a discharge was computed, its CSV and PNG into ``folder``."""
    folder = Path(folder)
    write_forces_vtk(folder / FORCES_VTK, mech)
    if mech.discharge is not None:
        (folder / DISCHARGE_CSV).write_text(discharge_csv(mech.discharge), encoding="utf-8")
        write_discharge_plot(folder / DISCHARGE_PNG, mech.discharge)
