"""Finding case folders under a folder, and the fingerprint of a case's input files."""

from __future__ import annotations

import hashlib
import os
from collections.abc import Iterator
from pathlib import Path

from fieldenergy.caseio._reader import CASE_FILE_NAME
from fieldenergy.errors import CaseError

#: The result folder of a case, inside the case folder: never an input, never searched.
RESULT_FOLDER_NAME = "result"

#: Files a batch writes at the top of its folder; not inputs even when that folder is a case.
SUMMARY_FILE_NAMES = ("summary.csv", "summary.json")

_CHUNK = 1 << 20


def _is_hidden(name: str) -> bool:
    # Temporary files and folders of atomic writes start with a dot, as do editor and VCS files.
    return name.startswith(".") or name == "__pycache__"


def find_cases(root: str | os.PathLike[str]) -> list[Path]:
    """Every case folder (a folder holding ``case.toml``) under ``root``, ``root`` included.

    The search does not enter hidden folders or case folders: the sub-folders of a case
    folder (its result folder, folders of points files) belong to that case.

    Parameters
    ----------
    root
        The folder to search.

    Returns
    -------
    The case folders in sorted order of their paths.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> for name in ("b", "a", "a/result"):
    ...     (root / name).mkdir()
    ...     _ = (root / name / "case.toml").write_text("")
    >>> [p.relative_to(root).as_posix() for p in find_cases(root)]
    ['a', 'b']
    """
    found = []
    for folder, dirs, files in os.walk(root):
        if CASE_FILE_NAME in files:
            found.append(Path(folder))
            dirs[:] = []
        else:
            dirs[:] = sorted(d for d in dirs if not _is_hidden(d))
    return sorted(found)


def input_files(folder: str | os.PathLike[str]) -> Iterator[Path]:
    """The input files of a case folder: everything but its result folder and hidden entries.

    Batch summary files at the top of the folder are left out too, so that a batch run on a
    single case folder does not change that case's inputs.
    """
    top = Path(folder)
    for here, dirs, files in os.walk(top):
        at_top = Path(here) == top
        dirs[:] = sorted(d for d in dirs if not _is_hidden(d) and not (at_top and d == RESULT_FOLDER_NAME))
        for name in sorted(files):
            if not _is_hidden(name) and not (at_top and name in SUMMARY_FILE_NAMES):
                yield Path(here) / name


def input_sha256(folder: str | os.PathLike[str]) -> str:
    """SHA-256 over the names and contents of a case folder's input files (see :func:`input_files`).

    Raises
    ------
    CaseError
        If an input file cannot be read.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "case.toml").write_text("title = 'a'")
    >>> before = input_sha256(folder)
    >>> (folder / "result").mkdir()
    >>> _ = (folder / "result" / "result.json").write_text("{}")
    >>> input_sha256(folder) == before
    True
    """
    top = Path(folder)
    digest = hashlib.sha256()
    for file in input_files(top):
        digest.update(file.relative_to(top).as_posix().encode("utf-8") + b"\0")
        digest.update(_file_sha256(file))
    return digest.hexdigest()


def _file_sha256(file: Path) -> bytes:
    digest = hashlib.sha256()
    try:
        with file.open("rb") as stream:
            while chunk := stream.read(_CHUNK):
                digest.update(chunk)
    except OSError as exc:
        raise CaseError(f"cannot read this input file: {exc.strerror}", path=str(file)) from None
    return digest.digest()
