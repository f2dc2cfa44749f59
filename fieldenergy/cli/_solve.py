"""``fieldenergy solve CASE``: inductance matrix and stored energy, with an error estimate."""

from __future__ import annotations

import argparse
import warnings
from pathlib import Path

from fieldenergy.cli._common import add_case_arg, add_preset_args, case_folder, load, options_from
from fieldenergy.cli._progress import terminal_progress
from fieldenergy.cli._tables import solve_report
from fieldenergy.output.result_json import write_result_folder, write_result_json
from fieldenergy.run import solve

HELP = "inductance matrix and stored energy of a case (1/2 integral of A.J), with an error estimate"


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    add_preset_args(parser)
    parser.add_argument("--json", metavar="FILE", help="also write the result as JSON to FILE")
    parser.add_argument("--out", metavar="DIR", help="result folder (default: CASE/result)")
    parser.add_argument("--no-out", action="store_true", help="do not write the result folder")


def run(args: argparse.Namespace) -> int:
    options = options_from(args)
    case = load(args)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # solve() records them in the result; shown in the report
        result = solve(case, options, progress=terminal_progress)
    report = solve_report(result, case.source)
    if not args.no_out:
        folder = Path(args.out) if args.out else case_folder(case, args) / "result"
        write_result_folder(folder, result, report, case.source)
    if args.json:
        write_result_json(args.json, result, case.source)
    print(report, end="")
    return 0
