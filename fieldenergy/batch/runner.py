"""run_batch: every case under a folder, solved in worker processes or on a cluster.

This module orders the work and writes the files; it does no numerics. The solves run in
local worker processes (:mod:`fieldenergy.batch._pool`) or on a Dask cluster
(:mod:`fieldenergy.batch._cluster`); in both cases the result comes back here and is
written into the case's result folder, which is assembled beside its place and swapped in
whole, so a batch that is killed never leaves a half-written result.
"""

from __future__ import annotations

import logging
import os
import warnings
from collections.abc import Callable, Hashable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, cast

from fieldenergy.batch._cluster import ClusterAddress, run_cluster
from fieldenergy.batch._plot import write_sweep_plot
from fieldenergy.batch._pool import run_local
from fieldenergy.batch._work import Outcome
from fieldenergy.batch.discovery import find_cases
from fieldenergy.batch.errors import BatchError
from fieldenergy.batch.plan import PROVENANCE_KEY, CasePlan, Entry, plan_case, settings_record
from fieldenergy.batch.summary import (
    BatchRow,
    BatchSummary,
    row_from_error,
    row_from_outcome,
    row_from_stored,
    write_summary,
)
from fieldenergy.cautions import cautions
from fieldenergy.errors import FieldEnergyError, FieldEnergyWarning
from fieldenergy.model.options import SolveOptions
from fieldenergy.model.result import Result
from fieldenergy.maps.export import export_maps
from fieldenergy.output.result_json import write_result_folder
from fieldenergy.run import ProgressFactory

log = logging.getLogger(__name__)

#: The plot of a swept case, in its result folder.
SWEEP_PLOT_NAME = "sweep.png"

#: report(result, source) -> the text of ``report.txt`` in a result folder.
ReportFormatter = Callable[[Result, "str | None"], str]


def run_batch(
    root: str | os.PathLike[str],
    options: SolveOptions | None = None,
    *,
    jobs: int | None = None,
    timeout: float | None = None,
    force: bool = False,
    out: str | os.PathLike[str] | None = None,
    cluster: ClusterAddress | None = None,
    progress: ProgressFactory | None = None,
    report: ReportFormatter | None = None,
) -> BatchSummary:
    """Solve every case under ``root`` and write the results and a summary.

    Each case folder (holding ``case.toml``) gets ``result/result.json`` (with the solve's
    stable keys and a ``provenance`` entry: the SHA-256 of the case's input files, the tool
    version, the settings and, for a variant, its sweep values). A swept case gets one result
    folder per variant inside its result folder and a plot ``result/sweep.png``. A case whose
    provenance is unchanged is skipped unless ``force``. A case that fails or overruns
    ``timeout`` is recorded and the batch goes on.

    Parameters
    ----------
    root
        The folder to search for case folders.
    options
        Solve settings for every case; the ``default`` preset if omitted.
    jobs
        Number of local worker processes (default: the number of CPU cores).
    timeout
        Largest wall time of one solve (s); ``None`` for no limit.
    force
        Solve every case even when its stored result is up to date.
    out
        Folder for ``summary.csv`` and ``summary.json`` (default: ``root``).
    cluster
        Run the solves on this Dask cluster instead of local processes.
    progress
        Progress-bar factory, called once with the number of solves.
    report
        Formats ``report.txt`` of a result folder; a short report if omitted.

    Returns
    -------
    BatchSummary

    Raises
    ------
    BatchError
        If ``root`` is not a folder or holds no case, or the cluster cannot be used.
    """
    root = Path(root)
    folders = _case_folders(root, jobs, timeout)
    options = options or SolveOptions()
    plans = [plan_case(root, folder, options, force) for folder in folders]
    entries = [(plan, entry) for plan in plans for entry in plan.entries]
    rows = _decided(root, entries)
    todo = [(k, (entry.case, options)) for k, (_, entry) in enumerate(entries) if k not in rows]
    with (progress or _no_progress)("cases", len(entries)) as update:
        update(len(rows))
        for key, outcome in _outcomes(todo, jobs, timeout, cluster):
            plan, entry = entries[cast(int, key)]
            rows[cast(int, key)] = _finish(root, plan, entry, outcome, report or _short_report)
            update(len(rows))
    ordered = tuple(rows[k] for k in range(len(entries)))
    plots = _plots(plans, entries, ordered)
    csv_path, json_path = write_summary(Path(out) if out else root, ordered, root, settings_record(options))
    return BatchSummary(ordered, csv_path, json_path, plots)


def _case_folders(root: Path, jobs: int | None, timeout: float | None) -> list[Path]:
    """The case folders under ``root``, after checking the batch's arguments."""
    if not root.is_dir():
        raise BatchError(f"{root}: no such folder")
    if jobs is not None and jobs < 1:
        raise BatchError(f"the number of jobs must be >= 1, got {jobs}")
    if timeout is not None and not timeout > 0:
        raise BatchError(f"the time limit must be > 0 s, got {timeout}")
    folders = find_cases(root)
    if not folders:
        raise BatchError(f"{root}: no case folders (folders holding case.toml) here or below")
    return folders


def _decided(root: Path, entries: list[tuple[CasePlan, Entry]]) -> dict[int, BatchRow]:
    """Rows known before any solve: cases that cannot be read, and those skipped."""
    rows: dict[int, BatchRow] = {}
    for k, (plan, entry) in enumerate(entries):
        if entry.case is None:
            rows[k] = row_from_error(entry, _names(plan))
        elif entry.stored is not None:
            rows[k] = row_from_stored(root, entry, _names(plan))
    return rows


@contextmanager
def _no_progress(description: str, total: int) -> Iterator[Callable[[int], None]]:
    yield lambda n: None


def _names(plan: CasePlan) -> tuple[str, ...]:
    return tuple(s.name for s in plan.sweeps)


def _outcomes(
    jobs_todo: Sequence[tuple[Hashable, tuple[Any, ...]]],
    jobs: int | None,
    timeout: float | None,
    cluster: ClusterAddress | None,
) -> Iterator[tuple[Hashable, Outcome]]:
    if cluster is not None:
        return run_cluster(jobs_todo, cluster, timeout)
    return run_local(jobs_todo, jobs or os.cpu_count() or 1, timeout)


def _finish(root: Path, plan: CasePlan, entry: Entry, outcome: Outcome, report: ReportFormatter) -> BatchRow:
    """Write the result folder of a solve that ended well, and make its summary row."""
    log.info("%s: %s %s", entry.name, outcome.status, outcome.message)
    if outcome.result is not None:
        try:
            write_result_folder(
                entry.result_folder,
                outcome.result,
                report(outcome.result, entry.source),
                entry.source,
                extra={PROVENANCE_KEY: entry.provenance, **(outcome.extra or {})},
                more_files=_map_writer(outcome),
            )
        except (FieldEnergyError, OSError) as exc:  # a full disk fails this case, not the batch
            failed = Outcome("failed", f"the result could not be written: {exc}", outcome.seconds)
            return row_from_outcome(root, entry, failed, _names(plan))
    return row_from_outcome(root, entry, outcome, _names(plan))


def _map_writer(outcome: Outcome) -> Callable[[Path], None] | None:
    """Writes the case's evaluated maps into ``maps/`` of the result folder, if it has any."""
    if not outcome.maps or outcome.result is None:
        return None
    maps, filaments, currents = list(outcome.maps), outcome.filaments, outcome.result.currents

    def write(folder: Path) -> None:
        export_maps(folder / "maps", maps, filaments, currents)

    return write


def _plots(plans: list[CasePlan], entries: list[tuple[CasePlan, Entry]], rows: tuple[BatchRow, ...]) -> tuple[Path, ...]:
    written = []
    for plan in plans:
        if not plan.sweeps:
            continue
        mine = [row for (owner, _), row in zip(entries, rows) if owner is plan]
        try:
            path = write_sweep_plot(plan.result_folder / SWEEP_PLOT_NAME, plan.sweeps, mine)
        except ImportError:
            warnings.warn(f"{plan.name}: no sweep plot, matplotlib is not installed", FieldEnergyWarning, stacklevel=3)
            continue
        except (FieldEnergyError, OSError) as exc:
            warnings.warn(f"{plan.name}: the sweep plot could not be written: {exc}", FieldEnergyWarning, stacklevel=3)
            continue
        if path is not None:
            written.append(path)
    return tuple(written)


def _short_report(result: Result, source: str | None) -> str:
    """A plain report for a result folder when the caller gives no formatter."""
    lines = [f"Case: {result.title}", f"File: {source}" if source else "", "", "Inductance matrix (H)"]
    names = list(result.circuit_names)
    lines += [f"  {n}: " + "  ".join(f"{v:.8e}" for v in row) for n, row in zip(names, result.inductance)]
    lines += [
        "",
        f"Stored energy (1/2 I^T L I): {result.energy:.8e} J  (+/- {result.energy_error:.2e} J)",
        f"Estimated relative error: {result.relative_error:.2e}",
        "",
        "CAUTION:",
        *(f"  {c}" for c in cautions(result.energy)),
    ]
    return "\n".join(lines) + "\n"
