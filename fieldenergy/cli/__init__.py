"""The ``fieldenergy`` command: ``check``, ``solve``, ``map``, ``compare`` and ``batch``.

``main(argv)`` returns the exit status, so tests can call it in-process. A user's mistake
(any :class:`~fieldenergy.errors.FieldEnergyError`) is one line on stderr and status 2;
anything else is a bug and keeps its traceback.
"""

from __future__ import annotations

import argparse
import logging
import sys
import warnings
from collections.abc import Sequence

from fieldenergy.cli import _batch, _check, _compare, _map, _solve
from fieldenergy.errors import FieldEnergyError

COMMANDS = {"check": _check, "solve": _solve, "map": _map, "batch": _batch, "compare": _compare}

#: Exit status for bad input.
EXIT_USER_ERROR = 2


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with one sub-command per module in :data:`COMMANDS`."""
    parser = argparse.ArgumentParser(
        prog="fieldenergy",
        description="Stored magnetic energy, inductance and fields of air-core conductors (Biot-Savart).",
    )
    parser.add_argument("-v", "--verbose", action="count", default=0, help="more log output (-vv for debug)")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name, module in COMMANDS.items():
        p = sub.add_parser(name, help=module.HELP, description=module.HELP)
        module.add_args(p)
        p.set_defaults(handler=module.run)
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:  # type: ignore[no-untyped-def]
    print(f"fieldenergy: warning: {message}", file=sys.stderr)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status (0 success, 2 bad input)."""
    args = build_parser().parse_args(argv)
    level = logging.WARNING - 10 * min(args.verbose, 2)
    logging.basicConfig(level=level, format="%(levelname)s %(name)s: %(message)s")
    with warnings.catch_warnings():
        warnings.showwarning = _show_warning
        warnings.simplefilter("default")
        try:
            return int(args.handler(args) or 0)
        except FieldEnergyError as exc:
            print(f"fieldenergy: error: {exc}", file=sys.stderr)
            return EXIT_USER_ERROR


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
