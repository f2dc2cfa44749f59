"""The result of a solve as a JSON document and as a folder of files."""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Callable
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np

from fieldenergy.cautions import cautions
from fieldenergy.model.result import Result
from fieldenergy.output.atomic import write_folder, write_text

#: What the error estimate covers, written beside it so a reader knows what it means.
ERROR_METHOD = (
    "Richardson extrapolation over nested chord refinements (each level halves every curved "
    "chord; leading error order 2), plus the estimated error of the section filament grid "
    "from its geometric mean distance"
)


def tool_version() -> str:
    """The installed fieldenergy version, or ``unknown`` when run from a source tree."""
    try:
        return version("fieldenergy")
    except PackageNotFoundError:
        return "unknown"


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def result_to_dict(result: Result, source: str | None = None, extra: dict[str, Any] | None = None) -> dict[str, Any]:
    """The JSON-ready dictionary of a result (keys are the stable contract of the result file).

    ``extra`` holds further top-level entries (for example a batch run's ``provenance``); they
    are added after the contract keys and may not replace any of them.
    """
    document = _contract(result, source)
    clash = sorted(set(extra or {}) & set(document))
    if clash:
        raise ValueError(f"extra result entries may not replace the keys {clash}")
    document.update(extra or {})
    return document


def _contract(result: Result, source: str | None) -> dict[str, Any]:
    opts = result.options
    return {
        "tool": {"name": "fieldenergy", "version": tool_version()},
        "case": {"title": result.title, "source": source},
        "inductance": {
            "circuits": list(result.circuit_names),
            "matrix_H": result.inductance.tolist(),
            "coupling": result.coupling.tolist(),
            "coils": list(result.coil_names),
            "coil_circuit": [result.circuit_names[k] for k in result.coil_circuit],
            "coil_matrix_H": result.coil_inductance.tolist(),
        },
        "currents_A": result.currents.tolist(),
        "energy": _energy_entry(result),
        "error_estimate": {
            "relative": _num(result.relative_error),
            "discretisation": _num(result.discretisation_error),
            "section": _num(result.section_error),
            "observed_order": _num(result.observed_order),
            "method": ERROR_METHOD,
        },
        "settings": {
            "preset": opts.preset,
            "n_levels": opts.n_levels,
            "base_level": opts.base_level,
            "sagitta_fraction": opts.sagitta_fraction,
            "section_grid": list(opts.section_grid) if opts.section_grid else None,
            "aj_method": opts.aj_method,
            "field_tolerance": opts.field_tolerance if opts.field_route else None,
            "field_budget_pairs": opts.field_budget if opts.field_route else None,
        },
        "levels": [
            {
                "level": r.level,
                "n_segments": r.n_segments,
                "n_filaments": r.n_filaments,
                "matrix_H": r.inductance.tolist(),
                "seconds": r.seconds,
            }
            for r in result.levels
        ],
        "run_time_s": result.seconds,
        "warnings": list(result.warnings),
        "cautions": cautions(result.energy),
    }


def _energy_entry(result: Result) -> dict[str, Any]:
    """The ``energy`` entry: both routes, their gap and the field route's tail beyond the box."""
    entry: dict[str, Any] = {
        "total_J": result.energy,
        "aj_J": result.energy,
        "error_J": _num(result.energy_error),
        "field_J": _num(result.field_energy),
        "field_error_J": _num(result.field_energy_error),
        "field_relative_error": _num(result.field_relative_error),
        "tail_J": _num(result.tail_energy),
        "route_gap": _num(result.route_gap),
        "route_gap_matrix": _num(result.route_gap_matrix),
        "route_gap_flag": bool(result.route_gap_flag),
    }
    if result.field_inductance is not None:
        entry["field_matrix_H"] = result.field_inductance.tolist()
        entry["field_segments"] = result.field_segments
        entry["field_points"] = result.field_points
    if result.route_gap_flag:
        entry["route_gap_hint"] = result.route_gap_hint
    return entry


def result_json(result: Result, source: str | None = None, extra: dict[str, Any] | None = None) -> str:
    """The result as indented JSON text (``extra``: see :func:`result_to_dict`)."""
    return json.dumps(result_to_dict(result, source, extra), indent=2) + "\n"


def write_result_json(
    path: str | os.PathLike[str], result: Result, source: str | None = None, extra: dict[str, Any] | None = None
) -> None:
    """Write the result JSON atomically."""
    write_text(path, result_json(result, source, extra))


def _matrix_csv(names: tuple[str, ...], matrix: np.ndarray) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["name_H", *names])
    for name, row in zip(names, matrix):
        writer.writerow([name, *(f"{v:.12g}" for v in row)])
    return buf.getvalue()


def write_result_folder(
    folder: str | os.PathLike[str],
    result: Result,
    report: str,
    source: str | None = None,
    extra: dict[str, Any] | None = None,
    more_files: Callable[[Path], None] | None = None,
) -> None:
    """Write ``result.json``, ``inductance.csv``, ``coil_inductance.csv`` and ``report.txt``.

    The folder is assembled beside its final place and swapped in whole. ``extra`` entries
    go into ``result.json`` (see :func:`result_to_dict`); ``more_files(tmp_folder)`` adds
    further files (forces, discharge) before the swap.
    """

    def fill(tmp: Path) -> None:
        (tmp / "result.json").write_text(result_json(result, source, extra), encoding="utf-8")
        (tmp / "inductance.csv").write_text(_matrix_csv(result.circuit_names, result.inductance), encoding="utf-8")
        (tmp / "coil_inductance.csv").write_text(
            _matrix_csv(result.coil_names, result.coil_inductance), encoding="utf-8"
        )
        (tmp / "report.txt").write_text(report, encoding="utf-8")
        if more_files is not None:
            more_files(tmp)

    write_folder(folder, fill)
