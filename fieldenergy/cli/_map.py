"""``fieldenergy map CASE --points P.csv --out OUT.csv``: B and A at given points."""

from __future__ import annotations

import argparse
import logging

import numpy as np

from fieldenergy.cli._common import add_case_arg, add_preset_args, load, options_from
from fieldenergy.cli._progress import terminal_progress
from fieldenergy.fieldmap import field_with_error
from fieldenergy.output.points_csv import read_points, write_field_table

HELP = "magnetic field B and vector potential A at the points of a CSV file (columns x,y,z in m)"

log = logging.getLogger(__name__)


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    add_preset_args(parser)
    parser.add_argument("--points", metavar="FILE", required=True, help="CSV file with columns x,y,z (m)")
    parser.add_argument("--out", metavar="FILE", required=True, help="output CSV: x,y,z,Bx,By,Bz,Ax,Ay,Az (SI)")


def run(args: argparse.Namespace) -> int:
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
