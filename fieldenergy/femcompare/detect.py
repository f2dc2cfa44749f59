"""Choosing the B field among the data arrays of a mesh file."""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import CompareError

#: Names (lower case, without '_', '-', ' ' or '.') taken to mean the magnetic flux density.
PREFERRED_NAMES: frozenset[str] = frozenset(
    {"b", "bfield", "bvec", "bvector", "magneticfluxdensity", "fluxdensity", "magneticfield", "bt"}
)


@dataclass(frozen=True, slots=True, eq=False)
class DataArray:
    """One data array of a mesh: its name, where it lives and its values (n, components)."""

    name: str
    location: str
    values: NDArray[np.float64]

    def describe(self) -> str:
        """``"B (point data, 3 components)"``."""
        shape = self.values.shape
        comps = 1 if len(shape) == 1 else int(np.prod(shape[1:]))
        return f"{self.name!r} ({self.location} data, {comps} component{'s' if comps != 1 else ''})"


def _normalised(name: str) -> str:
    return re.sub(r"[\s_.\-]", "", name).lower()


def _is_vector(array: DataArray, widths: tuple[int, ...]) -> bool:
    v = array.values
    return v.ndim == 2 and v.shape[1] in widths and np.issubdtype(v.dtype, np.floating)


def choose_field(arrays: list[DataArray], wanted: str | None, widths: tuple[int, ...], path: str) -> DataArray:
    """The B field: the array named ``wanted``, else the only vector array, else the one with a B-like name.

    Parameters
    ----------
    arrays
        Every point and cell data array of the mesh (volume cells only).
    wanted
        The name the user asked for, or ``None`` to detect it.
    widths
        Accepted numbers of components: (3,) in 3D, (2, 3) on an axisymmetric mesh.
    path
        The file, for messages.

    Raises
    ------
    CompareError
        No vector field, several with no B-like name among them, or ``wanted`` missing or not a vector.

    Examples
    --------
    >>> b = DataArray("MagneticFluxDensity", "point", np.zeros((4, 3)))
    >>> h = DataArray("H", "point", np.zeros((4, 3)))
    >>> choose_field([h, b], None, (3,), "r.vtu").name
    'MagneticFluxDensity'
    """
    found = ", ".join(a.describe() for a in arrays) or "none"
    need = " or ".join(str(w) for w in widths)
    if wanted is not None:
        named = [a for a in arrays if a.name == wanted]
        usable = [a for a in named if _is_vector(a, widths)]
        if usable:
            return next((a for a in usable if a.location == "point"), usable[0])
        problem = "is not a vector field" if named else "is not in the file"
        raise CompareError(
            f"field {wanted!r} given by --field {problem}: expected a float field of {need} components; "
            f"fields found: {found}",
            path,
        )
    vectors = [a for a in arrays if _is_vector(a, widths)]
    if len(vectors) == 1:
        return vectors[0]
    if not vectors:
        raise CompareError(
            f"no vector field of {need} components to compare as B; fields found: {found}", path
        )
    liked = [a for a in vectors if _normalised(a.name) in PREFERRED_NAMES]
    if len({a.name for a in liked}) == 1:
        return next((a for a in liked if a.location == "point"), liked[0])
    candidates = ", ".join(a.describe() for a in (liked or vectors))
    raise CompareError(f"several vector fields could be B: {candidates}; choose one with --field NAME", path)
