"""Plain data records of fieldenergy: the case, its paths and transforms, and filaments."""

from __future__ import annotations

from fieldenergy.model.case import Case, Circuit, Coil, Discretisation, RectSection, RoundSection, Section
from fieldenergy.model.filaments import FilamentModel, Filaments
from fieldenergy.model.paths import (
    PATH_KINDS,
    CirclePath,
    CurvePath,
    HelixPath,
    Path,
    PolygonPath,
    RacetrackPath,
    SaddlePath,
)
from fieldenergy.model.transforms import LinearRepeat, Mirror, Repeat, Rotate, RotationalRepeat, Transform, Translate

__all__ = [
    "PATH_KINDS",
    "Case",
    "CirclePath",
    "Circuit",
    "Coil",
    "CurvePath",
    "Discretisation",
    "FilamentModel",
    "Filaments",
    "HelixPath",
    "LinearRepeat",
    "Mirror",
    "Path",
    "PolygonPath",
    "RacetrackPath",
    "RectSection",
    "Repeat",
    "Rotate",
    "RotationalRepeat",
    "RoundSection",
    "SaddlePath",
    "Section",
    "Transform",
    "Translate",
]
