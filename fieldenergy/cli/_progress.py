"""Progress bars for the command line: tqdm on a terminal, nothing otherwise (CI, pipes)."""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager


def _wanted() -> bool:
    return sys.stderr.isatty() and not os.environ.get("CI")


@contextmanager
def terminal_progress(description: str, total: int) -> Iterator[Callable[[int], None]]:
    """A tqdm bar on stderr when it is a terminal; an update(n_done) callable either way."""
    if not _wanted():
        yield lambda n: None
        return
    from tqdm import tqdm

    bar = tqdm(total=total, desc=description, unit="", unit_scale=True, leave=False, file=sys.stderr)
    done = 0

    def update(n_done: int) -> None:
        nonlocal done
        bar.update(n_done - done)
        done = n_done

    try:
        yield update
    finally:
        bar.close()
