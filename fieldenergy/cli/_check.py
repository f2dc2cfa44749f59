"""``fieldenergy check CASE``: validate, summarise and write the discretised geometry."""

from __future__ import annotations

import argparse
import warnings

from fieldenergy.cli._common import add_case_arg, case_folder, load
from fieldenergy.cli._tables import check_report
from fieldenergy.describe import describe
from fieldenergy.discretise import discretise
from fieldenergy.output.geometry_vtk import write_geometry

HELP = "validate a case, print a summary and write its discretised geometry (VTK)"


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    parser.add_argument("--vtk", metavar="FILE", help="geometry file (.vtu or .vtk; default CASE/geometry.vtu)")
    parser.add_argument("--no-vtk", action="store_true", help="do not write the geometry file")


def run(args: argparse.Namespace) -> int:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        case = load(args)
        model = discretise(case)
    messages = list(dict.fromkeys(str(w.message) for w in caught))
    vtk_path = None
    if not args.no_vtk:
        vtk_path = args.vtk or str(case_folder(case, args) / "geometry.vtu")
        write_geometry(vtk_path, model.filaments, case.currents)
    print(check_report(describe(case, model), messages, vtk_path), end="")
    return 0
