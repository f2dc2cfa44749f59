"""Discretisation: a case's exact geometry cut into straight filament segments (pure numpy)."""

from __future__ import annotations

from fieldenergy.discretise.build import discretise
from fieldenergy.discretise.chords import (
    ChordGrid,
    chord_grid,
    chord_sagittas,
    chord_turns,
)
from fieldenergy.discretise.clearance import warn_if_intersecting
from fieldenergy.discretise.sections import (
    SectionLayout,
    default_section_grid,
    rect_gmd,
    section_layout,
)

__all__ = [
    "ChordGrid",
    "SectionLayout",
    "chord_grid",
    "chord_sagittas",
    "chord_turns",
    "default_section_grid",
    "discretise",
    "rect_gmd",
    "section_layout",
    "warn_if_intersecting",
]
