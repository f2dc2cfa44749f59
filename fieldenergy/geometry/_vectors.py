"""Small vector functions shared by the geometry modules (pure numpy)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import GeometryError

#: A direction typed in a case whose length is below this counts as zero. Directions are
#: dimensionless, so an absolute threshold is meaningful; anything this short is a typo.
ZERO_VECTOR_ATOL: float = 1.0e-12

#: A direction whose component normal to another is below this fraction of its length counts
#: as parallel to it (a start direction along a circle's normal, say).
PARALLEL_RTOL: float = 1.0e-9


def where(name: str | None) -> str:
    """Prefix for error messages: the coil name when known."""
    return f"coil {name!r}" if name else "path"


def finite_vector(value: ArrayLike, what: str, name: str | None) -> NDArray[np.float64]:
    """Return ``value`` as a finite float vector of 3 components, else raise GeometryError."""
    arr = np.asarray(value, dtype=np.float64).reshape(-1)
    if arr.shape != (3,) or not np.all(np.isfinite(arr)):
        raise GeometryError(f"{where(name)}: {what} must be 3 finite numbers, got {np.asarray(value).tolist()}")
    return arr


def unit_vector(value: ArrayLike, what: str, name: str | None) -> NDArray[np.float64]:
    """Return ``value`` normalised; raise GeometryError if it is zero or not finite."""
    arr = finite_vector(value, what, name)
    norm = float(np.linalg.norm(arr))
    if norm <= ZERO_VECTOR_ATOL:
        raise GeometryError(f"{where(name)}: {what} must be a non-zero direction, got {arr.tolist()}")
    return arr / norm


def positive(value: float, what: str, name: str | None, allow_zero: bool = False) -> float:
    """Return ``value`` as a float, checking it is finite and > 0 (or >= 0)."""
    x = float(value)
    ok = np.isfinite(x) and (x >= 0.0 if allow_zero else x > 0.0)
    if not ok:
        bound = ">= 0" if allow_zero else "> 0"
        raise GeometryError(f"{where(name)}: {what} must be finite and {bound}, got {value!r}")
    return x


def normal_component(
    vector: NDArray[np.float64], normal: NDArray[np.float64], what: str, name: str | None
) -> NDArray[np.float64]:
    """Unit vector of the part of ``vector`` normal to the unit vector ``normal``."""
    part = vector - np.dot(vector, normal) * normal
    norm = float(np.linalg.norm(part))
    if norm <= PARALLEL_RTOL * float(np.linalg.norm(vector)):
        raise GeometryError(
            f"{where(name)}: {what} {vector.tolist()} is parallel to {normal.tolist()}; "
            "it must have a component normal to it"
        )
    return part / norm


def any_perpendicular(normal: NDArray[np.float64]) -> NDArray[np.float64]:
    """A unit vector normal to the unit vector ``normal``, chosen deterministically.

    The coordinate axis least aligned with ``normal`` is projected normal to it.
    """
    axis = np.zeros(3)
    axis[int(np.argmin(np.abs(normal)))] = 1.0
    part = axis - np.dot(axis, normal) * normal
    return part / np.linalg.norm(part)


def unit_rows(vectors: NDArray[np.float64]) -> NDArray[np.float64]:
    """Normalise each row of an (m, 3) array (rows of zero length stay zero)."""
    norms = np.linalg.norm(vectors, axis=1, keepdims=True)
    return np.divide(vectors, norms, out=np.zeros_like(vectors), where=norms > 0.0)


def rows_dot(a: NDArray[np.float64], b: NDArray[np.float64]) -> NDArray[np.float64]:
    """Row-wise dot product of two (m, 3) arrays."""
    return np.einsum("ij,ij->i", a, b)
