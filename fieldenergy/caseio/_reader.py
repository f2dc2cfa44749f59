"""Read a case: a folder holding ``case.toml`` (or a ``.toml`` file) -> :class:`Case`.

Every problem a user can make in a case file becomes a :class:`CaseError` that names the
file, the coil, circuit or key, the value received and the value expected.
"""

from __future__ import annotations

import math
import os
import tomllib
import warnings
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path as FilePath
from typing import TypeVar

from fieldenergy.caseio._coil import read_coil
from fieldenergy.caseio._maps import read_maps
from fieldenergy.caseio._tables import Table, named, show
from fieldenergy.caseio._units import ANGLE, CURRENT, LENGTH, RESISTANCE
from fieldenergy.constants import DEFAULT_MAX_ANGLE, DEFAULT_SAGITTA_FRACTION
from fieldenergy.errors import CaseError, FieldEnergyWarning
from fieldenergy.model.case import Case, Circuit, Coil, Discretisation

#: The case file inside a case folder.
CASE_FILE_NAME = "case.toml"

#: ``sweep`` holds parameter sweeps; the reader accepts the key and leaves the tables to
#: :mod:`fieldenergy.sweep` (run by ``fieldenergy batch``): a case read here has its base values.
_TOP_KEYS = {"title", "discretisation", "circuit", "coil", "sweep", "map"}

_Named = TypeVar("_Named", Circuit, Coil)


def read_case(path: str | os.PathLike[str]) -> Case:
    """Read and check a case.

    Parameters
    ----------
    path
        A case folder containing ``case.toml``, or a ``.toml`` case file.

    Returns
    -------
    The case in SI units, with ``source`` set to the case file and ``folder`` to its folder.

    Raises
    ------
    CaseError
        If the case cannot be found or read, is not valid TOML, or anything in it is wrong.

    Warns
    -----
    FieldEnergyWarning
        For each circuit that no coil is in.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "case.toml").write_text('''
    ... title = "one loop"
    ... [[circuit]]
    ... name = "c"
    ... current = "2 A"
    ... [[coil]]
    ... name = "loop"
    ... circuit = "c"
    ... section = { shape = "round", radius = "1 mm" }
    ... path = { kind = "circle", radius = "50 mm" }
    ... ''')
    >>> case = read_case(folder)
    >>> case.coils[0].path.radius
    0.05
    """
    file = _locate(path)
    document = _load(file)
    if "sweep" in document:
        warnings.warn(
            f"{file}: the [[sweep]] tables are not applied here, so the case is read with its base values; "
            "run 'fieldenergy batch' on its folder to solve every variant",
            FieldEnergyWarning,
            stacklevel=2,
        )
    return _checked(document, file, file.parent)


def read_case_toml(path: str | os.PathLike[str]) -> tuple[dict[str, object], FilePath]:
    """The parsed TOML document of a case and the case file it came from, unchecked.

    Parameters
    ----------
    path
        A case folder containing ``case.toml``, or a ``.toml`` case file.

    Returns
    -------
    The document as parsed (plain dicts and lists) and the path of the case file.

    Raises
    ------
    CaseError
        If the case cannot be found or read, or is not valid TOML.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "case.toml").write_text('title = "t"')
    >>> read_case_toml(folder)[0]
    {'title': 't'}
    """
    file = _locate(path)
    return _load(file), file


def read_case_document(
    document: dict[str, object], source: str | os.PathLike[str], folder: str | os.PathLike[str]
) -> Case:
    """Check a parsed case document and build the :class:`Case`, as :func:`read_case` does.

    Parameters
    ----------
    document
        The parsed TOML of a case (see :func:`read_case_toml`); it is not changed. Its
        ``[[sweep]]`` tables, if any, are not read here (see :mod:`fieldenergy.sweep`).
    source
        The case file the document stands for; named in messages and kept as ``Case.source``.
    folder
        The case folder, against which points files are resolved.

    Returns
    -------
    The case in SI units.

    Raises
    ------
    CaseError
        If anything in the document is wrong.

    Warns
    -----
    FieldEnergyWarning
        For each circuit that no coil is in.

    Examples
    --------
    >>> doc = {"title": "t", "circuit": [{"name": "c", "current": 1}], "coil": [{"name": "loop", "circuit": "c",
    ...        "section": {"shape": "round", "radius": "1 mm"}, "path": {"kind": "circle", "radius": 0.05}}]}
    >>> read_case_document(doc, "loop.toml", ".").coils[0].path.radius
    0.05
    """
    return _checked(document, FilePath(source), FilePath(folder))


def _checked(document: dict[str, object], file: FilePath, folder: FilePath) -> Case:
    """The case built from ``document``, warning about idle circuits."""
    case, idle = _build(document, file, folder)
    for name in idle:
        warnings.warn(
            f"{file}, circuit {name!r}: no coil is in this circuit, so it carries no current",
            FieldEnergyWarning,
            stacklevel=3,
        )
    return case


def _locate(path: object) -> FilePath:
    """The case file for a folder or file name."""
    try:
        given = FilePath(path)  # type: ignore[arg-type]
        is_dir, is_file = given.is_dir(), given.is_file()
    except (TypeError, ValueError, OSError):
        raise CaseError(f"expected the path of a case folder or .toml file, got {path!r}") from None
    if is_dir:
        file = given / CASE_FILE_NAME
        if not file.is_file():
            raise CaseError(
                f"no {CASE_FILE_NAME} in this folder; a case folder holds its case in {CASE_FILE_NAME}", path=str(given)
            )
        return file
    if not is_file:
        raise CaseError("no such case folder or file", path=str(given))
    if given.suffix.lower() != ".toml":
        raise CaseError(
            f"expected a case folder or a .toml file, got a {given.suffix or 'suffix-less'} file", path=str(given)
        )
    return given


def _load(file: FilePath) -> dict[str, object]:
    """Parse the TOML of the case file."""
    try:
        raw = file.read_bytes()
    except OSError as exc:
        raise CaseError(f"cannot read the case file: {exc.strerror}", path=str(file)) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise CaseError(f"not UTF-8 text: byte {raw[exc.start]:#04x} at line {line}", path=str(file)) from None
    try:
        return tomllib.loads(text)
    except ValueError as exc:  # TOMLDecodeError and the date/number errors of the parser
        raise CaseError(f"invalid TOML: {exc}", path=str(file)) from None
    except RecursionError:
        raise CaseError("invalid TOML: arrays or tables are nested too deeply", path=str(file)) from None


def _build(data: dict[str, object], file: FilePath, folder: FilePath) -> tuple[Case, list[str]]:
    """The case, and the names of circuits that no coil is in."""
    root = Table(data, str(file))
    root.check_keys(_TOP_KEYS)
    title = root.text("title")
    discretisation = _discretisation(root.sub("discretisation")) if "discretisation" in data else Discretisation()
    circuits = _named(root, "circuit", _circuit)
    names = [c.name for c in circuits]
    coils = _named(root, "coil", lambda table: read_coil(table, names, folder))
    used = {coil.circuit for coil in coils}
    case = Case(
        title=title,
        circuits=tuple(circuits),
        coils=tuple(coils),
        discretisation=discretisation,
        source=str(file),
        folder=str(folder),
        maps=read_maps(root, folder),
    )
    return case, [name for name in names if name not in used]


def _named(root: Table, key: str, read: Callable[[Table], _Named]) -> list[_Named]:
    """Read the array of tables ``[[key]]``: at least one, with unique names."""
    if key not in root.data:
        raise root.error(f"missing [[{key}]] tables: a case needs at least one {key}", key)
    tables = root.items(key)
    if not tables:
        raise root.error(f"expected at least one [[{key}]] table, got an empty list", key)
    records: list[_Named] = []
    first: dict[str, int] = {}
    for k, table in enumerate(tables, start=1):
        record = read(replace(table, owner=f"{key} #{k}", prefix=""))
        if record.name in first:
            raise CaseError(
                f"duplicate {key} name {record.name!r} (also {key} #{first[record.name]}); names must be unique",
                path=root.file,
                where=f"{key} #{k}, key 'name'",
            )
        first[record.name] = k
        records.append(record)
    return records


def _circuit(table: Table) -> Circuit:
    table = named(table, "circuit")
    table.check_keys({"name", "current", "resistance", "dump_resistance", "passive"})
    name = table.text("name")
    resistance = table.bounded("resistance", table.quantity("resistance", RESISTANCE, 0.0), "ohm", at_least=0.0)
    dump = table.quantity("dump_resistance", RESISTANCE, None)
    if dump is not None:
        table.bounded("dump_resistance", dump, "ohm", above=0.0)
    passive = table.boolean("passive", False)
    current = table.quantity("current", CURRENT, 0.0) if passive else table.quantity("current", CURRENT)
    if passive and current != 0.0:
        raise table.error(f"a passive circuit carries no supply current: expected 0 A or no 'current', got {current:g} A", "current")
    if passive and not resistance + (dump or 0.0) > 0.0:
        raise table.error("a passive circuit needs a resistance > 0 ohm (a shorted ring has some), got 0 ohm", "resistance")
    return Circuit(name=name, current=current, resistance=resistance, dump_resistance=dump, passive=passive)


def _discretisation(table: Table) -> Discretisation:
    table.check_keys({"sagitta", "sagitta_fraction", "max_angle", "section_grid"})
    if "sagitta" in table.data and "sagitta_fraction" in table.data:
        raise table.error("give either 'sagitta' (a length) or 'sagitta_fraction' (relative to coil size), not both")
    sagitta = table.quantity("sagitta", LENGTH, None)
    if sagitta is not None:
        table.bounded("sagitta", sagitta, "m", above=0.0)
    fraction = table.number("sagitta_fraction", DEFAULT_SAGITTA_FRACTION, "a plain number > 0")
    max_angle = table.quantity("max_angle", ANGLE, DEFAULT_MAX_ANGLE)
    return Discretisation(
        sagitta=sagitta,
        sagitta_fraction=table.bounded("sagitta_fraction", fraction, "", above=0.0),
        max_angle=table.bounded("max_angle", max_angle, "rad", above=0.0, below=math.pi),
        section_grid=_section_grid(table),
    )


def _section_grid(table: Table) -> tuple[int, int] | None:
    if "section_grid" not in table.data:
        return None
    value = table.data["section_grid"]
    expected = "[n_width, n_height], two integers >= 1"
    if not isinstance(value, list) or len(value) != 2:
        raise table.error(f"expected {expected}, got {show(value)}", "section_grid")
    for k, item in enumerate(value):
        if isinstance(item, bool) or not isinstance(item, int) or item < 1:
            raise table.error(f"expected {expected}, got {show(item)}", f"section_grid[{k}]")
    return (value[0], value[1])
