"""``fieldenergy compare CASE RESULT``: a finite-element B field against the Biot-Savart reference."""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from fieldenergy.caseio._units import LENGTH, UnitTextError, parse_unit
from fieldenergy.cli._common import add_case_arg, add_preset_args, load, options_from
from fieldenergy.cli._progress import terminal_progress
from fieldenergy.errors import CompareError
from fieldenergy.femcompare import (
    Axis,
    Comparison,
    compare_fem,
    read_fem_result,
    write_annotated_mesh,
    write_error_plot,
    write_summary_json,
)

HELP = (
    "check a finite-element B field (any mesh meshio reads, 3D or axisymmetric r-z) against the "
    "Biot-Savart reference: errors by region and distance, energy in the mesh volume"
)


def add_args(parser: argparse.ArgumentParser) -> None:
    add_case_arg(parser)
    parser.add_argument("result", metavar="RESULT", help="finite-element result (VTK/VTU, Gmsh, XDMF, ...)")
    add_preset_args(parser)
    parser.add_argument("--field", metavar="NAME", help="name of the B field in RESULT (default: detected)")
    units = parser.add_mutually_exclusive_group()
    units.add_argument("--length-unit", metavar="UNIT", help="length unit of the mesh coordinates, e.g. mm (default m)")
    units.add_argument("--scale", type=float, metavar="S", help="metres per mesh length unit, e.g. 0.001")
    parser.add_argument("--axisymmetric", action="store_true",
                        help="RESULT is an r-z section (x = r, y = z) carrying (B_r, B_z)")
    parser.add_argument("--axis-origin", type=float, nargs=3, metavar=("X", "Y", "Z"),
                        help="a point of the symmetry axis in the case frame, m (default: the origin)")
    parser.add_argument("--axis-direction", type=float, nargs=3, metavar=("X", "Y", "Z"),
                        help="direction of the symmetry axis (default: z)")
    parser.add_argument("--out", metavar="FILE", help="annotated mesh, .vtu or .vtk (default: RESULT-compare.vtu)")
    parser.add_argument("--json", metavar="FILE", help="write the JSON summary to FILE")
    parser.add_argument("--plot", metavar="FILE", help="PNG of error against distance (default: RESULT-compare.png)")
    parser.add_argument("--no-plot", action="store_true", help="do not draw the PNG")
    parser.add_argument(
        "--method",
        choices=("auto", "direct", "fast", "fmm"),
        default="auto",
        help="reference field: built-in fast sum on the exact paths for large meshes (auto), or always direct, "
             "built-in fast sum (fast) or fmm3dpy's fast multipole method (fmm, needs fmm3dpy)",
    )


def _scale(args: argparse.Namespace) -> float:
    if args.scale is not None:
        return float(args.scale)
    if args.length_unit is None:
        return 1.0
    try:
        return parse_unit(args.length_unit, LENGTH)
    except UnitTextError as exc:
        raise CompareError(f"--length-unit: {exc}") from None


def _axis(args: argparse.Namespace) -> Axis | None:
    if not args.axisymmetric:
        given = [name for name in ("axis_origin", "axis_direction") if getattr(args, name) is not None]
        if given:
            flag = "--" + given[0].replace("_", "-")
            raise CompareError(f"{flag} places the axis of an axisymmetric result; it needs --axisymmetric")
        return None
    origin = args.axis_origin if args.axis_origin is not None else [0.0, 0.0, 0.0]
    direction = args.axis_direction if args.axis_direction is not None else [0.0, 0.0, 1.0]
    return Axis(np.array(origin, dtype=np.float64), np.array(direction, dtype=np.float64))


def run(args: argparse.Namespace) -> int:
    options = options_from(args)
    case = load(args)
    axis = _axis(args)
    fem = read_fem_result(args.result, field=args.field, scale=_scale(args), axis=axis)
    comparison = compare_fem(case, fem, options, method=args.method, progress=terminal_progress)
    base = Path(args.result)
    out = Path(args.out) if args.out else base.with_name(f"{base.stem}-compare.vtu")
    write_annotated_mesh(out, comparison)
    written = [str(out)]
    if args.json:
        write_summary_json(args.json, comparison, {"preset": options.preset, "n_levels": options.n_levels})
        written.append(args.json)
    if not args.no_plot:
        plot = Path(args.plot) if args.plot else base.with_name(f"{base.stem}-compare.png")
        write_error_plot(plot, comparison)
        written.append(str(plot))
    _print_summary(comparison)
    print("written: " + ", ".join(written))
    return 0


def _fmt(x: float) -> str:
    return f"{x:.3e}" if math.isfinite(x) else "n/a"


def _print_summary(c: Comparison) -> None:
    w, fem = c.whole, c.fem
    print(f"{fem.source}: field {fem.field_name!r} ({fem.location} data), {fem.n_cells} cells, "
          f"volume {w.volume_m3:.4g} m^3{' (axisymmetric)' if fem.is_axisymmetric else ''}")
    print(f"relative L2 error of B: {_fmt(w.relative_l2)}  (reference's own estimate {_fmt(c.reference_relative_l2)})")
    where = ", ".join(f"{x:.4g}" for x in w.max_at_m)
    print(f"largest |B_fem - B_ref|: {w.max_abs_T:.3e} T at ({where}) m")
    rel = (w.energy_fem_J - w.energy_reference_J) / w.energy_reference_J if w.energy_reference_J > 0 else math.nan
    print(f"energy in the mesh volume: FEM {w.energy_fem_J:.6e} J, reference {w.energy_reference_J:.6e} J "
          f"(difference {_fmt(rel)})")
    print(f"by distance from the conductors (unit {c.band_unit_m:.3g} m):")
    for r in c.bands:
        if r.volume_m3 > 0:
            print(f"  {r.name:>14}: relative L2 {_fmt(r.relative_l2)}, max {r.max_abs_T:.3e} T, volume {r.volume_m3:.3g} m^3")
    if c.sets:
        print("by cell set:")
        for r in c.sets:
            print(f"  {r.name:>14}: relative L2 {_fmt(r.relative_l2)}, max {r.max_abs_T:.3e} T, "
                  f"energy FEM {r.energy_fem_J:.4e} J / reference {r.energy_reference_J:.4e} J")
