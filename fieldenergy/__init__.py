"""fieldenergy: stored magnetic energy, inductance and fields of air-core conductors.

The public API is exactly what :data:`__all__` lists. Nothing is computed at import time;
the numerical kernels compile on first use.
"""

from __future__ import annotations

from fieldenergy.caseio import read_case, write_case
from fieldenergy.discretise import discretise
from fieldenergy.errors import CaseError, DiscretisationError, ExportError, FieldEnergyError, GeometryError
from fieldenergy.fields import b_field, field_at, vector_potential
from fieldenergy.model import Case, Filaments
from fieldenergy.model.options import SolveOptions
from fieldenergy.model.result import Result
from fieldenergy.run import solve

#: Read a case folder or case.toml file (the same function as :func:`read_case`).
load_case = read_case

__all__ = [
    "Case",
    "CaseError",
    "DiscretisationError",
    "ExportError",
    "FieldEnergyError",
    "Filaments",
    "GeometryError",
    "Result",
    "SolveOptions",
    "b_field",
    "discretise",
    "field_at",
    "load_case",
    "read_case",
    "solve",
    "vector_potential",
    "write_case",
]
