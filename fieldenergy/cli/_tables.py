"""Plain-text tables for the terminal: the solve report and the check summary."""

from __future__ import annotations

import math
import textwrap
from typing import TYPE_CHECKING

import numpy as np

from fieldenergy.cautions import cautions
from fieldenergy.describe import CaseSummary
from fieldenergy.energy.route_check import ROUTE_GAP_TOLERANCE
from fieldenergy.model.result import Result
from fieldenergy.run import uses_fast_sum

if TYPE_CHECKING:
    from fieldenergy.mechanics import Mechanics


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    line = "  ".join(h.ljust(w) if i == 0 else h.rjust(w) for i, (h, w) in enumerate(zip(header, widths)))
    out = [line, "-" * len(line)]
    for r in rows:
        out.append("  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))))
    return out


def _si(value: float, unit: str) -> str:
    """Engineering notation: 1.2346e-05 H -> '12.346 uH'."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {unit}"
    prefixes = {-12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
    exp3 = int(math.floor(math.log10(abs(value)) / 3) * 3)
    exp3 = min(max(exp3, -12), 9)
    return f"{value / 10**exp3:.6g} {prefixes[exp3]}{unit}"


def _aj_sum(result: Result) -> str:
    """How the A.J double sums of the levels were evaluated."""
    fast = [uses_fast_sum(result.options.aj_method, r.n_segments) for r in result.levels]
    if all(fast):
        return "treecode with exact near pairs"
    return "direct" if not any(fast) else "direct, then treecode with exact near pairs"


def solve_report(result: Result, source: str | None, mechanics: Mechanics | None = None) -> str:
    """The human-readable report of a solve, with forces and discharge when given."""
    names = list(result.circuit_names)
    lines = [f"Case: {result.title}"]
    if source:
        lines.append(f"File: {source}")
    lines.append("")
    lines += _table(["circuit", "current"], [[n, _si(float(i), "A")] for n, i in zip(names, result.currents)])
    lines += ["", "Inductance matrix (H)"]
    lines += _table(["", *names], [[n, *(f"{v:.8e}" for v in row)] for n, row in zip(names, result.inductance)])
    if len(names) > 1:
        lines += ["", "Coupling coefficients"]
        lines += _table(["", *names], [[n, *(f"{v:+.6f}" for v in row)] for n, row in zip(names, result.coupling)])
    lines += ["", "Coil self-inductances (per coil instance, H)"]
    lines += _table(
        ["coil", "circuit", "self"],
        [
            [c, names[result.coil_circuit[k]], f"{result.coil_inductance[k, k]:.8e}"]
            for k, c in enumerate(result.coil_names)
        ],
    )
    lines += [
        "",
        f"Stored energy (1/2 I^T L I): {result.energy:.8e} J  (+/- {result.energy_error:.2e} J)",
        *_route_lines(result),
        f"Estimated relative error: {result.relative_error:.2e}  "
        f"(chords {result.discretisation_error:.2e}, section filaments {result.section_error:.2e}; "
        f"observed order {result.observed_order:.2f})",
        "Levels: "
        + ", ".join(f"{r.level}: {r.n_segments} segments in {r.seconds:.2f} s" for r in result.levels),
        f"Preset: {result.options.preset}; A.J sum: {_aj_sum(result)}; run time {result.seconds:.2f} s",
    ]
    if result.warnings:
        lines += ["", "Warnings:"] + [f"  - {w}" for w in result.warnings]
    if mechanics is not None:
        lines += mechanics_lines(mechanics)
    lines += ["", "CAUTION:"]
    for c in cautions(result.energy) + (mechanics.cautions() if mechanics is not None else []):
        lines += textwrap.wrap(c, width=88, initial_indent="  ", subsequent_indent="  ")
    return "\n".join(lines) + "\n"


def mechanics_lines(mech: Mechanics) -> list[str]:
    """Report lines: the coils table (force, torque, peak field) and the discharge table."""
    f, tq = mech.forces.force, mech.forces.torque
    # components below 1e-12 of the largest force are round-off of symmetric sums: shown as 0
    f = np.where(np.abs(f) > 1e-12 * float(np.max(np.abs(f), initial=0.0)), f, 0.0)
    about = mech.forces.about
    if mech.about_given and len(about):
        where = "(" + ", ".join(f"{v:.4g}" for v in about[0]) + ") m"
    else:
        where = "each coil's centroid"
    lines = ["", f"Coils: forces from the other coils, torque about {where} (level {mech.model.level})"]
    lines += _table(
        ["coil", "Fx (N)", "Fy (N)", "Fz (N)", "|torque| (N m)", "peak |B| on conductor"],
        [
            [name, *(f"{v:.5g}" for v in f[k]), f"{np.linalg.norm(tq[k]):.5g}", _si(float(mech.peak.value[k]), "T")]
            for k, name in enumerate(mech.coil_names)
        ],
    )
    dist = mech.distribution
    if dist.peak_coil >= 0:
        where = ", ".join(f"{v:.4g}" for v in dist.peak_location)
        lines.append(f"Largest force per unit length: {dist.peak:.4g} N/m on {mech.coil_names[dist.peak_coil]} at ({where}) m")
    d = mech.discharge
    if d is None:
        return lines + ["", f"Discharge: {mech.discharge_note}"]
    lines += ["", f"Discharge from {d.initial_energy:.6g} J; time constants " + ", ".join(_si(float(x), "s") for x in d.time_constants)]
    lines += _table(
        ["circuit", "resistance", "peak voltage", "energy", "peak current", "time to 1 %"],
        [
            [
                name + (" (passive)" if d.passive[k] else ""),
                _si(float(d.resistance[k]), "Ohm"),
                _si(float(d.peak_voltage[k]), "V"),
                _si(float(d.energy_deposited[k]), "J"),
                _si(float(d.peak_current[k]), "A"),
                _si(float(d.time_to_1pct[k]), "s"),
            ]
            for k, name in enumerate(d.circuits)
        ],
    )
    return lines


def _route_lines(result: Result) -> list[str]:
    """Both energy routes, their gap (flagged above the tolerance) and the tail share."""
    if result.field_inductance is None:
        return ["Field route (1/(2 mu0) integral of |B|^2): skipped"]
    share = result.tail_energy / result.field_energy if result.field_energy else math.nan
    flag = ""
    if result.route_gap_flag:
        inconclusive = max(result.route_gap, result.route_gap_matrix) <= ROUTE_GAP_TOLERANCE
        flag = "  ** " + ("" if inconclusive else f"above {ROUTE_GAP_TOLERANCE:.0e}: ") + result.route_gap_hint
    return [
        f"  A.J route:   {result.energy:.8e} J",
        f"  field route: {result.field_energy:.8e} J  (+/- {result.field_energy_error:.2e} J; "
        f"outside the box {share:.2%}; {result.field_segments} segments, "
        f"{result.field_points / 1e6:.1f}M points, {result.field_seconds:.2f} s)",
        f"  route gap:   {result.route_gap:.2e} (energy), {result.route_gap_matrix:.2e} (matrix entries){flag}",
    ]


def check_report(summary: CaseSummary, warnings: list[str], vtk_path: str | None) -> str:
    """The human-readable summary of ``fieldenergy check``."""
    lines = [f"Case: {summary.title}", ""]
    lines += _table(
        ["coil", "circuit", "turns", "path length", "conductor length", "ampere-turns", "segments", "filaments"],
        [
            [
                c.name,
                c.circuit,
                f"{c.turns:g}",
                f"{c.path_length_m:.6g} m",
                f"{c.conductor_length_m:.6g} m",
                f"{c.ampere_turns:.6g} A",
                str(c.n_segments),
                str(c.n_filaments),
            ]
            for c in summary.coils
        ],
    )
    lines.append("")
    lines += _table(["circuit", "current", "coils"], [[n, f"{i:.6g} A", str(k)] for n, i, k in summary.circuits])
    lo, hi = np.array(summary.bbox_min), np.array(summary.bbox_max)
    lines += [
        "",
        f"Segments: {summary.n_segments}   filaments: {summary.n_filaments}",
        "Bounding box (m): " + " .. ".join("[" + ", ".join(f"{v:.6g}" for v in p) + "]" for p in (lo, hi)),
    ]
    if warnings:
        lines += ["", "Warnings:"] + [f"  - {w}" for w in warnings]
    else:
        lines += ["", "No warnings."]
    if vtk_path:
        lines.append(f"Geometry written to {vtk_path}")
    return "\n".join(lines) + "\n"
