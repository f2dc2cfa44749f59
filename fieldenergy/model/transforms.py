"""Rigid transforms and repeats applied to a coil's path, as plain records.

A coil's ``transforms`` are applied in the order given; a repeat then makes copies of the
transformed coil. Applying them to points is :mod:`fieldenergy.geometry.transforms`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.model.paths import _vec3


@dataclass(frozen=True, slots=True, eq=False)
class Translate:
    """Shift by ``offset`` (m)."""

    offset: NDArray[np.float64]

    def __post_init__(self) -> None:
        object.__setattr__(self, "offset", _vec3(self.offset, "offset"))


@dataclass(frozen=True, slots=True, eq=False)
class Rotate:
    """Rotate by ``angle`` (rad, right-handed) about ``axis`` through ``origin``."""

    axis: NDArray[np.float64]
    angle: float
    origin: NDArray[np.float64]

    def __post_init__(self) -> None:
        object.__setattr__(self, "axis", _vec3(self.axis, "axis"))
        object.__setattr__(self, "origin", _vec3(self.origin, "origin"))


@dataclass(frozen=True, slots=True, eq=False)
class Mirror:
    """Reflect in the plane through ``origin`` with unit normal ``normal``."""

    normal: NDArray[np.float64]
    origin: NDArray[np.float64]

    def __post_init__(self) -> None:
        object.__setattr__(self, "normal", _vec3(self.normal, "normal"))
        object.__setattr__(self, "origin", _vec3(self.origin, "origin"))


Transform = Translate | Rotate | Mirror


@dataclass(frozen=True, slots=True, eq=False)
class RotationalRepeat:
    """``count`` copies evenly rotated by 2*pi/count about ``axis`` through ``origin``.

    Copy k is rotated by k * 2*pi/count; copy 0 is the coil itself. All copies are in series
    in the coil's circuit.
    """

    count: int
    axis: NDArray[np.float64]
    origin: NDArray[np.float64]

    def __post_init__(self) -> None:
        object.__setattr__(self, "axis", _vec3(self.axis, "axis"))
        object.__setattr__(self, "origin", _vec3(self.origin, "origin"))


@dataclass(frozen=True, slots=True, eq=False)
class LinearRepeat:
    """``count`` copies, copy k shifted by k * ``step`` (m); all in series in the coil's circuit."""

    count: int
    step: NDArray[np.float64]

    def __post_init__(self) -> None:
        object.__setattr__(self, "step", _vec3(self.step, "step"))


Repeat = RotationalRepeat | LinearRepeat
