"""Plain-text tables for the terminal: the solve report and the check summary."""

from __future__ import annotations

import math
import textwrap

import numpy as np

from fieldenergy.cautions import cautions
from fieldenergy.describe import CaseSummary
from fieldenergy.model.result import Result


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


def solve_report(result: Result, source: str | None) -> str:
    """The human-readable report of a solve."""
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
        f"Estimated relative error: {result.relative_error:.2e}  "
        f"(chords {result.discretisation_error:.2e}, section filaments {result.section_error:.2e}; "
        f"observed order {result.observed_order:.2f})",
        "Levels: "
        + ", ".join(f"{r.level}: {r.n_segments} segments in {r.seconds:.2f} s" for r in result.levels),
        f"Preset: {result.options.preset}; run time {result.seconds:.2f} s",
    ]
    if result.warnings:
        lines += ["", "Warnings:"] + [f"  - {w}" for w in result.warnings]
    lines += ["", "CAUTION:"]
    for c in cautions(result.energy):
        lines += textwrap.wrap(c, width=88, initial_indent="  ", subsequent_indent="  ")
    return "\n".join(lines) + "\n"


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
