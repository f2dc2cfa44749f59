"""The summary of a batch: one row per solve, written as ``summary.csv`` and ``summary.json``."""

from __future__ import annotations

import csv
import io
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldenergy.batch._work import STATUSES, Outcome
from fieldenergy.batch.discovery import SUMMARY_FILE_NAMES
from fieldenergy.batch.plan import Entry
from fieldenergy.output.atomic import write_text
from fieldenergy.output.result_json import tool_version

#: Columns of ``summary.csv``, in order.
COLUMNS = (
    "case",
    "circuits",
    "energy_J",
    "energy_error_J",
    "relative_error",
    "route_gap",
    "run_time_s",
    "status",
    "message",
    "result_folder",
)

#: Statuses that make a batch fail.
FAILED_STATUSES = ("failed", "timeout")


@dataclass(frozen=True, slots=True)
class BatchRow:
    """One solve of a batch, as the summary shows it.

    Attributes
    ----------
    case
        The case folder relative to the batch folder; a variant adds its sweep values in brackets.
    status
        ``ok`` (solved now), ``skipped`` (inputs and settings unchanged: the stored result is
        shown), ``failed`` or ``timeout``.
    message
        The error message, or the warnings of a solve.
    circuits
        Circuit names.
    energy_J, energy_error_J, relative_error
        Stored energy (J) by the 1/2 integral of A.J, its error bound (J) and the estimated
        relative error of the inductance matrix.
    route_gap
        Relative gap |W_field - W_aj| / W_aj between the stored energies of the field route
        (integral of B^2 / (2 mu0)) and the A.J route; ``None`` (an empty CSV cell, ``null``
        in JSON) when the field route was not run. A skipped row reads it from the stored
        ``result.json`` (``energy.route_gap``).
    run_time_s
        Wall time of the solve (s); for a skipped row, that of the stored result.
    result_folder
        Where the result is, relative to the batch folder (``None`` without a result).
    inductance_H
        The circuits' inductance matrix (H); in the JSON summary only.
    sweep
        The sweep values of a variant, name -> value as written; ``None`` for a plain case.
    sweep_si
        The same values in SI units, for plots.
    """

    case: str
    status: str
    message: str = ""
    circuits: tuple[str, ...] = ()
    energy_J: float | None = None
    energy_error_J: float | None = None
    relative_error: float | None = None
    route_gap: float | None = None
    run_time_s: float | None = None
    result_folder: str | None = None
    inductance_H: tuple[tuple[float, ...], ...] | None = None
    sweep: dict[str, str] | None = None
    sweep_si: tuple[float, ...] = ()

    @property
    def is_failure(self) -> bool:
        """Whether this row fails the batch (``failed`` or ``timeout``)."""
        return self.status in FAILED_STATUSES


@dataclass(frozen=True, slots=True)
class BatchSummary:
    """The rows of a batch, in case order, and the files written."""

    rows: tuple[BatchRow, ...]
    csv_path: Path
    json_path: Path
    plots: tuple[Path, ...] = ()

    @property
    def failures(self) -> tuple[BatchRow, ...]:
        """Rows that failed or ran out of time."""
        return tuple(r for r in self.rows if r.is_failure)

    def counts(self) -> dict[str, int]:
        """Number of rows of each status."""
        return _counts(self.rows)


def _counts(rows: tuple[BatchRow, ...] | list[BatchRow]) -> dict[str, int]:
    return {status: sum(r.status == status for r in rows) for status in STATUSES}


def _num(value: Any) -> float | None:
    return float(value) if isinstance(value, (int, float)) and math.isfinite(value) else None


def _one_line(message: str) -> str:
    """A message on one line: a summary table has one row per solve."""
    return " ".join(message.split())


def _relative(root: Path, folder: Path) -> str:
    return os.path.relpath(folder, root).replace(os.sep, "/")


def _sweep_fields(entry: Entry, plan_sweeps: tuple[str, ...]) -> dict[str, Any]:
    if not entry.values:
        return {"sweep": None, "sweep_si": ()}
    return {
        "sweep": {name: v.label for name, v in zip(plan_sweeps, entry.values)},
        "sweep_si": tuple(v.si for v in entry.values),
    }


def row_from_outcome(root: Path, entry: Entry, outcome: Outcome, sweep_names: tuple[str, ...]) -> BatchRow:
    """The row of a solve that just ended (``ok``, ``failed`` or ``timeout``)."""
    message = _one_line("; ".join([*entry.notes, outcome.message] if outcome.message else entry.notes))
    result = outcome.result
    if result is None:
        sweep = _sweep_fields(entry, sweep_names)
        return BatchRow(entry.name, outcome.status, message, run_time_s=outcome.seconds, **sweep)
    return BatchRow(
        entry.name,
        outcome.status,
        message,
        circuits=tuple(result.circuit_names),
        energy_J=_num(result.energy),
        energy_error_J=_num(result.energy_error),
        relative_error=_num(result.relative_error),
        route_gap=_num(result.route_gap),
        run_time_s=outcome.seconds,
        result_folder=_relative(root, entry.result_folder),
        inductance_H=tuple(tuple(float(v) for v in row) for row in result.inductance),
        **_sweep_fields(entry, sweep_names),
    )


def row_from_stored(root: Path, entry: Entry, sweep_names: tuple[str, ...]) -> BatchRow:
    """The row of a skipped entry, read from its stored ``result.json``."""
    doc = entry.stored or {}
    inductance = doc.get("inductance", {})
    energy = doc.get("energy", {})
    return BatchRow(
        entry.name,
        "skipped",
        "inputs and settings unchanged; stored result kept",
        circuits=tuple(inductance.get("circuits", ())),
        energy_J=_num(energy.get("total_J")),
        energy_error_J=_num(energy.get("error_J")),
        relative_error=_num(doc.get("error_estimate", {}).get("relative")),
        route_gap=_num(energy.get("route_gap")),
        run_time_s=_num(doc.get("run_time_s")),
        result_folder=_relative(root, entry.result_folder),
        inductance_H=tuple(tuple(float(v) for v in row) for row in inductance.get("matrix_H", ())) or None,
        **_sweep_fields(entry, sweep_names),
    )


def row_from_error(entry: Entry, sweep_names: tuple[str, ...]) -> BatchRow:
    """The row of an entry that could not be read."""
    return BatchRow(entry.name, "failed", _one_line(entry.error or ""), **_sweep_fields(entry, sweep_names))


def summary_csv(rows: tuple[BatchRow, ...] | list[BatchRow]) -> str:
    """The summary as CSV text (numbers at full precision, empty cells for missing values)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    for r in rows:
        cells = [_row_dict(r)[c] for c in COLUMNS]
        cells[1] = ";".join(r.circuits)
        writer.writerow(["" if c is None else repr(c) if isinstance(c, float) else c for c in cells])
    return buf.getvalue()


def _row_dict(row: BatchRow) -> dict[str, Any]:
    return {
        "case": row.case,
        "circuits": list(row.circuits),
        "energy_J": row.energy_J,
        "energy_error_J": row.energy_error_J,
        "relative_error": row.relative_error,
        "route_gap": row.route_gap,
        "run_time_s": row.run_time_s,
        "status": row.status,
        "message": row.message,
        "result_folder": row.result_folder,
        "inductance_H": [list(r) for r in row.inductance_H] if row.inductance_H else None,
        "sweep": row.sweep,
    }


def summary_document(
    rows: tuple[BatchRow, ...] | list[BatchRow], root: Path, settings: dict[str, Any]
) -> dict[str, Any]:
    """The summary as a JSON-ready dictionary."""
    return {
        "tool": {"name": "fieldenergy", "version": tool_version()},
        "folder": str(root),
        "settings": settings,
        "route_gap": "|W_field - W_aj| / W_aj, the gap between the two energy routes; null without the field route",
        "counts": _counts(rows),
        "cases": [_row_dict(r) for r in rows],
    }


def write_summary(
    out: Path, rows: tuple[BatchRow, ...], root: Path, settings: dict[str, Any]
) -> tuple[Path, Path]:
    """Write ``summary.csv`` and ``summary.json`` into ``out`` atomically; return their paths."""
    csv_path, json_path = (out / name for name in SUMMARY_FILE_NAMES)
    write_text(csv_path, summary_csv(rows))
    write_text(json_path, json.dumps(summary_document(rows, root, settings), indent=2) + "\n")
    return csv_path, json_path
