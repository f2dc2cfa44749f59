"""``fieldenergy solve CASE``: inductance matrix and stored energy, with an error estimate."""

from __future__ import annotations

import argparse
import warnings
from dataclasses import replace
from functools import partial
from pathlib import Path

from fieldenergy.cli._common import add_case_arg, add_preset_args, case_folder, load, options_from, positive_number
from fieldenergy.cli._progress import terminal_progress
from fieldenergy.cli._tables import solve_report
from fieldenergy.mechanics import mechanics
from fieldenergy.model.options import AJ_METHODS, FIELD_ROUTE_PAIR_BUDGET
from fieldenergy.output.mechanics_out import mechanics_document, write_mechanics_files
from fieldenergy.output.result_json import write_result_folder, write_result_json
from fieldenergy.run import solve

HELP = "inductance matrix and stored energy of a case (1/2 integral of A.J), with an error estimate"


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    add_preset_args(parser)
    parser.add_argument("--json", metavar="FILE", help="also write the result as JSON to FILE")
    parser.add_argument("--out", metavar="DIR", help="result folder (default: CASE/result)")
    parser.add_argument("--no-out", action="store_true", help="do not write the result folder")
    parser.add_argument(
        "--no-field-route", action="store_true", help="skip the 1/(2 mu0) integral of |B|^2 cross-check"
    )
    parser.add_argument(
        "--field-budget", type=positive_number("a number of point-segment pairs"), metavar="PAIRS",
        help="field route budget in point-segment pairs (default: %(default).0e, about 90 s on 2 cores)",
        default=FIELD_ROUTE_PAIR_BUDGET,
    )
    parser.add_argument(
        "--aj-method", choices=list(AJ_METHODS), default="auto",
        help="A.J double sum: every pair (direct), treecode with exact near pairs (fast), or by size (default)",
    )
    parser.add_argument(
        "--no-mechanics", action="store_true", help="skip forces, peak conductor field and discharge"
    )
    parser.add_argument(
        "--discharge", action="store_true", help="fail (exit 2) if the circuits cannot discharge, instead of a note"
    )
    parser.add_argument(
        "--torque-about", nargs=3, type=float, metavar=("X", "Y", "Z"), help="point (m) for torques (default: each coil's centroid)"
    )


def run(args: argparse.Namespace) -> int:
    options = options_from(args)
    if args.no_field_route:
        options = replace(options, field_route=False)  # a check skipped, not a custom preset
    options = replace(options, aj_method=args.aj_method)  # how, not what: the preset stays
    options = replace(options, field_budget=args.field_budget)
    case = load(args)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # solve() records them in the result; shown in the report
        result = solve(case, options, progress=terminal_progress)
        mech = None
        if not args.no_mechanics:
            mech = mechanics(case, result.inductance, options, about=args.torque_about, require_discharge=args.discharge)
    extra = None if mech is None else mechanics_document(mech)
    more = None if mech is None else partial(write_mechanics_files, mech=mech)
    report = solve_report(result, case.source, mech)
    if not args.no_out:
        folder = Path(args.out) if args.out else case_folder(case, args) / "result"
        write_result_folder(folder, result, report, case.source, extra, more_files=more)
    if args.json:
        write_result_json(args.json, result, case.source, extra)
    print(report, end="")
    return 0
