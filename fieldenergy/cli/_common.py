"""Pieces shared by the sub-commands: reading the case argument and choosing settings."""

from __future__ import annotations

import argparse
import math
from collections.abc import Callable
from pathlib import Path

from fieldenergy.caseio import read_case
from fieldenergy.model import Case
from fieldenergy.model.options import PRESETS, SolveOptions


def add_case_arg(parser: argparse.ArgumentParser) -> None:
    """The positional CASE argument (a case folder or its case.toml)."""
    parser.add_argument("case", metavar="CASE", help="case folder (holding case.toml) or a case .toml file")


def add_preset_args(parser: argparse.ArgumentParser) -> None:
    """--preset and --levels."""
    parser.add_argument("--preset", choices=list(PRESETS), default="default", help="accuracy preset (default: %(default)s)")
    parser.add_argument(
        "--levels", type=_positive_int, metavar="N", help="number of refinement levels (overrides the preset)"
    )


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {value}")
    return value


def positive_number(what: str) -> Callable[[str], float]:
    """An argparse ``type`` for a finite number > 0; ``what`` names it in the message."""

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            value = math.nan
        if not 0.0 < value < math.inf:
            raise argparse.ArgumentTypeError(f"expected {what} > 0, got {text!r}")
        return value

    return parse


def options_from(args: argparse.Namespace) -> SolveOptions:
    """Solve options from --preset and --levels."""
    options = SolveOptions.from_preset(args.preset)
    if args.levels is not None:
        options = options.with_changes(n_levels=args.levels)
    return options


def load(args: argparse.Namespace) -> Case:
    """Read the case named on the command line."""
    return read_case(args.case)


def case_folder(case: Case, args: argparse.Namespace) -> Path:
    """The folder of the case (where default outputs go)."""
    if case.folder:
        return Path(case.folder)
    path = Path(args.case)
    return path if path.is_dir() else path.parent
