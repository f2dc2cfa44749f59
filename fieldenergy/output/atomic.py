"""Atomic writes: a temporary file in the same folder, then ``os.replace``."""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from fieldenergy.errors import ExportError


@contextmanager
def atomic_path(target: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path beside ``target`` (same suffix); rename it onto ``target`` on success.

    The temporary file is removed if the block raises.
    """
    target = Path(target)
    folder = target.parent if str(target.parent) else Path(".")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.stem}-", suffix=target.suffix, dir=folder)
    except OSError as exc:
        raise ExportError(f"{target}: cannot write here ({exc.strerror})") from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def write_text(target: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` to ``target`` atomically (UTF-8)."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


def write_folder(target: str | os.PathLike[str], fill: Callable[[Path], None]) -> None:
    """Build a folder with ``fill(tmp_folder)`` beside ``target``, then swap it into place.

    An existing ``target`` is replaced only once the new folder is complete.
    """
    target = Path(target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}-", dir=target.parent))
    except OSError as exc:
        raise ExportError(f"{target}: cannot write here ({exc.strerror})") from None
    try:
        fill(tmp)
        if target.exists():
            old = target.with_name(f".{target.name}-old")
            shutil.rmtree(old, ignore_errors=True)
            os.replace(target, old)
            os.replace(tmp, target)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
