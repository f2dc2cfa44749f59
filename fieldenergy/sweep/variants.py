"""Variants of a case document: every combination of its sweeps' values."""

from __future__ import annotations

import copy
import itertools
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from fieldenergy.sweep._address import assign
from fieldenergy.sweep.declaration import SweepValue, read_sweeps


@dataclass(frozen=True, slots=True)
class Variant:
    """One combination of sweep values and the case document that carries it.

    Attributes
    ----------
    label
        ``"gap=20 mm, turns=3"``: the values, for names and titles.
    slug
        A folder name made of the same values, such as ``"gap=20mm_turns=3"``.
    values
        The value of each sweep, in sweep order.
    document
        The case document with the values set and the sweeps removed.
    """

    label: str
    slug: str
    values: tuple[SweepValue, ...]
    document: dict[str, object]



def expand(document: Mapping[str, object], file: str | Path) -> list[Variant]:
    """Every variant of a case document with sweeps (the outer product, first sweep slowest).

    Parameters
    ----------
    document
        The parsed case document; it is not changed.
    file
        The case file, named in messages.

    Returns
    -------
    The variants; an empty list when the document declares no sweep.

    Raises
    ------
    CaseError
        For a malformed ``[[sweep]]`` table or a key that addresses nothing swept.

    Examples
    --------
    >>> doc = {"title": "t", "sweep": [{"name": "n", "key": "coil.a.turns", "values": [1, 2]}],
    ...        "coil": [{"name": "a"}]}
    >>> [(v.label, v.document["coil"][0]["turns"]) for v in expand(doc, "case.toml")]
    [('n=1', 1), ('n=2', 2)]
    """
    sweeps = read_sweeps(document, file)
    base = {key: value for key, value in document.items() if key != "sweep"}
    variants = []
    for combo in itertools.product(*(s.values for s in sweeps)):
        doc = copy.deepcopy(base)
        for sweep, value in zip(sweeps, combo):
            assign(doc, sweep.key, value.raw)
        label = ", ".join(f"{s.name}={v.label}" for s, v in zip(sweeps, combo))
        if isinstance(doc.get("title"), str):
            doc["title"] = f"{doc['title']} [{label}]"
        slug = "_".join(f"{s.name}={_slug(v.label)}" for s, v in zip(sweeps, combo))
        variants.append(Variant(label=label, slug=slug, values=tuple(combo), document=doc))
    return variants


def _slug(label: str) -> str:
    return re.sub(r"[^A-Za-z0-9.+-]+", "", label) or "_"
