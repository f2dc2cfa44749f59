"""Exact conductor geometry: curves of each path kind, rigid transforms and section frames.

Everything here is pure numpy and does no file I/O.
"""

from __future__ import annotations

from fieldenergy.geometry.curves import ChainCurve, Curve, ExpressionCurve
from fieldenergy.geometry.frames import rotation_minimising_frame, section_frame
from fieldenergy.geometry.kinds import exact_curve
from fieldenergy.geometry.transforms import (
    MovedCurve,
    ReversedCurve,
    coil_instances,
    instance_name,
    mapped_direction,
    reversed_curve,
    rotation_matrix,
    transformed,
)

__all__ = [
    "ChainCurve",
    "Curve",
    "ExpressionCurve",
    "MovedCurve",
    "ReversedCurve",
    "coil_instances",
    "exact_curve",
    "instance_name",
    "mapped_direction",
    "reversed_curve",
    "rotation_matrix",
    "rotation_minimising_frame",
    "section_frame",
    "transformed",
]
