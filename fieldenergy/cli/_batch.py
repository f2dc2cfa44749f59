"""``fieldenergy batch DIR``: solve every case folder under DIR and write a summary table."""

from __future__ import annotations

import argparse
import dataclasses
import os
import signal
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from types import FrameType

from fieldenergy.batch import BatchSummary, ClusterAddress, run_batch
from fieldenergy.cli import _progress
from fieldenergy.cli._common import _positive_int, add_preset_args, options_from, positive_number
from fieldenergy.cli._tables import solve_report
from fieldenergy.model.options import SolveOptions

HELP = "solve every case folder under DIR in parallel (or on a Dask cluster), with sweeps and a summary table"

#: Exit status after Ctrl-C (128 + SIGINT, as shells report it).
_EXIT_INTERRUPTED = 130

#: Longest message shown in the printed table; the summary files hold it whole.
_MESSAGE_WIDTH = 60


def add_args(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("folder", metavar="DIR", help="folder searched for case folders (folders holding case.toml)")
    add_preset_args(parser)
    parser.add_argument("--jobs", type=_positive_int, metavar="N",
                        help=f"local worker processes (default: the number of cores, {os.cpu_count()} here)")
    parser.add_argument("--timeout", type=positive_number("a number of seconds"), metavar="SECONDS",
                        help="time limit of one case's solve; an overrunning case is stopped and marked 'timeout'")
    parser.add_argument("--force", action="store_true", help="solve every case, even those whose result is up to date")
    parser.add_argument("--no-field-route", dest="no_field_route", action="store_true",
                        help="skip the field-route cross-check (the |B|^2 integral); faster, no route gap")
    parser.add_argument("--field-budget", type=positive_number("a number of point-segment pairs"), metavar="PAIRS",
                        help="field route budget of each solve in point-segment pairs (default: the solve default)")
    parser.add_argument("--out", metavar="FOLDER", help="folder for summary.csv and summary.json (default: DIR)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--scheduler", metavar="ADDRESS", help="solve on the Dask cluster whose scheduler is at ADDRESS")
    where.add_argument(
        "--scheduler-file", metavar="FILE", help="solve on the Dask cluster named in this scheduler file"
    )


def run(args: argparse.Namespace) -> int:
    cluster = None
    if args.scheduler or args.scheduler_file:
        cluster = ClusterAddress(args.scheduler, args.scheduler_file)
    try:
        with _sigterm_as_exit():
            summary = run_batch(
                args.folder,
                _options(args),
                jobs=args.jobs,
                timeout=args.timeout,
                force=args.force,
                out=args.out,
                cluster=cluster,
                progress=_case_progress,
                report=solve_report,
            )
    except KeyboardInterrupt:
        print("fieldenergy: batch interrupted; the results finished so far are kept", file=sys.stderr)
        return _EXIT_INTERRUPTED
    print(summary_text(summary), end="")
    return 1 if summary.failures else 0


def _options(args: argparse.Namespace) -> SolveOptions:
    options = options_from(args)
    if args.field_budget is not None:
        options = dataclasses.replace(options, field_budget=args.field_budget)
    return dataclasses.replace(options, field_route=False) if args.no_field_route else options


def summary_text(summary: BatchSummary) -> str:
    """The printed summary: the table, the files written and the failures in full."""
    rows = [
        [
            r.case,
            r.status,
            ",".join(r.circuits),
            "" if r.energy_J is None else f"{r.energy_J:.6e}",
            "" if r.relative_error is None else f"{r.relative_error:.1e}",
            "" if r.route_gap is None else f"{r.route_gap:.1e}",
            "" if r.run_time_s is None else f"{r.run_time_s:.2f}",
            r.message if len(r.message) <= _MESSAGE_WIDTH else r.message[: _MESSAGE_WIDTH - 3] + "...",
        ]
        for r in summary.rows
    ]
    lines = _aligned(["case", "status", "circuits", "energy (J)", "rel. error", "route gap", "time (s)", "message"], rows)
    counts = ", ".join(f"{n} {status}" for status, n in summary.counts().items() if n)
    lines += ["", f"{len(summary.rows)} solves: {counts}", f"Summary: {summary.csv_path} and {summary.json_path}"]
    lines += [f"Sweep plot: {p}" for p in summary.plots]
    if summary.failures:
        lines += ["", f"Failed ({len(summary.failures)}):"]
        lines += [f"  - {r.case} [{r.status}]: {r.message}" for r in summary.failures]
    return "\n".join(lines) + "\n"


def _aligned(header: list[str], rows: list[list[str]]) -> list[str]:
    """A plain table: numbers right-aligned, text left-aligned, the last column unpadded."""
    numeric = {3, 4, 5, 6}
    widths = [max([len(header[i]), *(len(r[i]) for r in rows)]) for i in range(len(header))]

    def line(cells: list[str]) -> str:
        parts = [c.rjust(w) if i in numeric else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths))]
        return "  ".join(parts).rstrip()

    first = line(header)
    return [first, "-" * len(first), *(line(r) for r in rows)]


@contextmanager
def _case_progress(description: str, total: int) -> Iterator[Callable[[int], None]]:
    """A bar counting solved cases on a terminal; nothing in CI or a pipe."""
    if not _progress._wanted():
        yield lambda n: None
        return
    from tqdm import tqdm

    bar = tqdm(total=total, desc=description, unit="case", leave=False, file=sys.stderr)

    def update(n_done: int) -> None:
        bar.update(n_done - bar.n)

    try:
        yield update
    finally:
        bar.close()


@contextmanager
def _sigterm_as_exit() -> Iterator[None]:
    """Turn SIGTERM into SystemExit, so the worker processes are stopped and temporary files removed."""

    def stop(signum: int, frame: FrameType | None) -> None:
        raise SystemExit(128 + signum)

    try:
        previous = signal.signal(signal.SIGTERM, stop)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)
