"""``fieldenergy map CASE``: the field maps a case declares, written for viewing.

``fieldenergy map CASE --points P.csv --out OUT.csv`` evaluates B and A at given points instead.
"""

from __future__ import annotations

import argparse
import logging
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from fieldenergy.cli._common import (
    add_case_arg,
    add_preset_args,
    case_folder,
    load,
    options_from,
)
from fieldenergy.cli._progress import terminal_progress
from fieldenergy.errors import CaseError
from fieldenergy.fieldmap import field_with_error
from fieldenergy.output.points_csv import read_points, write_field_table

if TYPE_CHECKING:
    from fieldenergy.maps.evaluate import MapResult

HELP = ("field maps the case declares ([[map]] tables: VTK, CSV, PNG), or B and A at the points "
        "of a CSV file (--points, columns x,y,z in m)")

log = logging.getLogger(__name__)


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    add_preset_args(parser)
    parser.add_argument("--points", metavar="FILE", help="CSV file with columns x,y,z (m); needs --out")
    parser.add_argument("--out", metavar="FILE", help="output CSV for --points: x,y,z,Bx,By,Bz,Ax,Ay,Az (SI)")
    parser.add_argument("--out-dir", metavar="DIR", help="folder for the case's maps (default: CASE/maps)")
    parser.add_argument("--method", choices=("auto", "direct", "fast", "fmm"), default="auto",
                        help="map summation: built-in fast multipole method (fast), fmm3dpy's (fmm, needs fmm3dpy), direct, "
                             "or chosen by size (auto, default)")


def run(args: argparse.Namespace) -> int:
    if args.points is None:
        return _run_maps(args)
    if args.out is None:
        raise CaseError("--points FILE needs --out FILE.csv for the field table", where="command line")
    options = options_from(args)
    case = load(args)
    points = read_points(args.points)
    b, a, b_err = field_with_error(case, points, options, progress=terminal_progress)
    write_field_table(args.out, points, b, a)
    b_mag = np.linalg.norm(b, axis=1)
    rel = float(np.max(b_err / np.maximum(b_mag, np.max(b_mag) * 1e-12))) if len(b) else 0.0
    print(f"{len(points)} points written to {args.out}")
    print(f"|B| from {b_mag.min():.6e} T to {b_mag.max():.6e} T; "
          f"largest estimated relative error of B: {rel:.1e} (chord refinement, Richardson)")
    return 0


def _split(res: MapResult) -> str:
    """The estimate apart for sampled points far from and near the conductors, when both occur."""
    far, near = res.relative_error_far, res.relative_error_near
    if far is None or near is None:
        return ""
    return f": {far:.1e} farther than {res.near_distance * 1e3:.3g} mm from the conductors, {near:.1e} nearer"


def _run_maps(args: argparse.Namespace) -> int:
    """Evaluate and export every [[map]] of the case; print one line per map."""
    from fieldenergy.discretise import discretise
    from fieldenergy.maps.evaluate import evaluate_maps
    from fieldenergy.maps.export import export_maps

    case = load(args)
    if not case.maps:
        raise CaseError("the case declares no [[map]] tables; add one, or give --points FILE --out FILE.csv",
                        path=case.source)
    out_dir = Path(args.out_dir) if args.out_dir else case_folder(case, args) / "maps"
    results = evaluate_maps(case, method=args.method, progress=terminal_progress)
    files = export_maps(out_dir, results, discretise(case).filaments, case.currents)
    for res in results:
        mag = np.linalg.norm(res.b, axis=1)
        how = res.method if res.tree is None else res.tree.describe()
        print(f"map {res.spec.name!r} ({res.spec.kind}, {len(res.points)} points, {how}): |B| from {mag.min():.6e} T "
              f"to {mag.max():.6e} T; estimated relative error of B {res.relative_error:.1e} (on a sample{_split(res)})")
    print(f"{len(files)} files written to {out_dir}")
    return 0
