"""Checking a finite-element B field against the Biot-Savart reference of the conductors as drawn.

Read a mesh result with :func:`read_fem_result`, compare it with :func:`compare_fem`, and write
the outcome with :func:`write_summary_json`, :func:`write_annotated_mesh` and
:func:`write_error_plot`. meshio and matplotlib are imported only by the functions that use them.
"""

from __future__ import annotations

from fieldenergy.femcompare.compare import Comparison, compare_fem
from fieldenergy.femcompare.mesh import Axis, FemField
from fieldenergy.femcompare.metrics import RegionError, fem_energy
from fieldenergy.femcompare.plot import write_error_plot
from fieldenergy.femcompare.reading import read_fem_result
from fieldenergy.femcompare.writers import (
    summary_dict,
    write_annotated_mesh,
    write_summary_json,
)

__all__ = [
    "Axis",
    "Comparison",
    "FemField",
    "RegionError",
    "compare_fem",
    "fem_energy",
    "read_fem_result",
    "summary_dict",
    "write_annotated_mesh",
    "write_error_plot",
    "write_summary_json",
]
