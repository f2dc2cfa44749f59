"""The plan of a batch: for each case folder, the solves to run and the results to keep.

A case folder gives one entry, or one per variant when it declares sweeps. An entry whose
inputs and settings match the ``provenance`` recorded in its existing ``result.json`` keeps
that result (it is skipped); an entry that cannot be read carries its error message.
"""

from __future__ import annotations

import json
import os
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldenergy.batch.discovery import RESULT_FOLDER_NAME, input_sha256
from fieldenergy.caseio import read_case_document, read_case_toml
from fieldenergy.errors import CaseError
from fieldenergy.model import Case
from fieldenergy.model.options import SolveOptions
from fieldenergy.output.result_json import tool_version
from fieldenergy.sweep import Sweep, SweepValue, Variant, expand, read_sweeps

#: The key under which a batch records in ``result.json`` what produced the result.
PROVENANCE_KEY = "provenance"


@dataclass(frozen=True, slots=True)
class Entry:
    """One solve of a batch: a case, or one variant of a swept case.

    Attributes
    ----------
    name
        The row name: the case folder relative to the batch folder, followed by the sweep
        values in brackets for a variant (``"pair[gap=20 mm]"``).
    result_folder
        Where the result goes.
    source
        The case file.
    case
        The case to solve; ``None`` when it could not be read.
    provenance
        What the result will record of its inputs and settings.
    values
        The sweep values of a variant (empty for a plain case).
    stored
        The existing ``result.json`` when the inputs and settings are unchanged (the entry
        is then skipped); otherwise ``None``.
    error
        Why the case could not be read, if it could not.
    notes
        Warnings raised while reading the case.
    """

    name: str
    result_folder: Path
    source: str | None = None
    case: Case | None = None
    provenance: dict[str, Any] | None = None
    values: tuple[SweepValue, ...] = ()
    stored: dict[str, Any] | None = None
    error: str | None = None
    notes: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class CasePlan:
    """The entries of one case folder; ``sweeps`` is empty unless the case declares sweeps."""

    name: str
    folder: Path
    result_folder: Path
    sweeps: tuple[Sweep, ...]
    entries: tuple[Entry, ...]


def settings_record(options: SolveOptions) -> dict[str, Any]:
    """The solve settings as recorded in a result's provenance (JSON types only).

    Examples
    --------
    >>> settings_record(SolveOptions.from_preset("fast"))["n_levels"]
    2
    """
    return {
        "preset": options.preset,
        "n_levels": options.n_levels,
        "base_level": options.base_level,
        "sagitta_fraction": options.sagitta_fraction,
        "section_grid": list(options.section_grid) if options.section_grid else None,
        "field_route": options.field_route,
    }


def plan_case(root: Path, folder: Path, options: SolveOptions, force: bool = False) -> CasePlan:
    """Read one case folder into its entries (see :class:`Entry`); never raises for a bad case.

    Parameters
    ----------
    root
        The batch folder (case names are relative to it).
    folder
        The case folder.
    options
        The solve settings of the batch.
    force
        Run every entry even when its stored result is up to date.
    """
    name = folder.relative_to(root).as_posix() if folder != root else (root.resolve().name or str(root))
    result_folder = folder / RESULT_FOLDER_NAME
    try:
        document, file = read_case_toml(folder)
        digest = input_sha256(folder)
        sweeps = read_sweeps(document, file)
        variants = expand(document, file) if sweeps else []
    except CaseError as exc:
        return CasePlan(name, folder, result_folder, (), (Entry(name, result_folder, error=str(exc)),))
    common = {"input_sha256": digest, "tool_version": tool_version(), "settings": settings_record(options)}
    entries: tuple[Entry, ...]
    if not sweeps:
        entries = (_entry(name, result_folder, document, file, dict(common, sweep=None), (), force),)
    else:
        entries = tuple(_variant_entry(name, result_folder, v, sweeps, file, common, force) for v in variants)
    return CasePlan(name, folder, result_folder, sweeps, entries)


def _variant_entry(
    name: str,
    result_folder: Path,
    variant: Variant,
    sweeps: tuple[Sweep, ...],
    file: Path,
    common: dict[str, Any],
    force: bool,
) -> Entry:
    swept = {s.name: v.raw for s, v in zip(sweeps, variant.values)}
    return _entry(
        f"{name}[{variant.label}]",
        result_folder / variant.slug,
        variant.document,
        file,
        dict(common, sweep=swept),
        variant.values,
        force,
    )


def _entry(
    name: str,
    result_folder: Path,
    document: dict[str, object],
    file: Path,
    provenance: dict[str, Any],
    values: tuple[SweepValue, ...],
    force: bool,
) -> Entry:
    provenance = json.loads(json.dumps(provenance))  # the form it takes once stored
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            case = read_case_document(document, file, file.parent)
        except CaseError as exc:
            return Entry(name, result_folder, str(file), provenance=provenance, values=values, error=str(exc))
    notes = tuple(dict.fromkeys(str(w.message) for w in caught))
    stored = None if force else stored_result(result_folder, provenance)
    return Entry(name, result_folder, str(file), case, provenance, values, stored, None, notes)


def stored_result(result_folder: str | os.PathLike[str], provenance: dict[str, Any]) -> dict[str, Any] | None:
    """The ``result.json`` in ``result_folder`` if it records exactly ``provenance``, else ``None``.

    A missing, unreadable or malformed file, or one from other inputs or settings, gives ``None``.
    """
    try:
        document = json.loads((Path(result_folder) / "result.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(document, dict) or document.get(PROVENANCE_KEY) != provenance:
        return None
    if not all(isinstance(document.get(key), dict) for key in ("inductance", "energy", "error_estimate")):
        return None  # not a result this tool wrote: solve again
    return document
