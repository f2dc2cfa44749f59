"""A finite-element result as read: volume cells, one B field, cell sets, and the axis of a 2D mesh."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import CompareError

Array = NDArray[np.float64]

#: |direction . x| above which phi = 0 is taken from the y axis: x is then too close to the axis.
AXIS_NEAR_X: float = 0.9


@dataclass(frozen=True, slots=True, eq=False)
class Axis:
    """The symmetry axis of an axisymmetric (r, z) mesh placed in the case's 3D frame.

    A mesh point (r, z) stands for the 3D point ``origin + r * radial + z * direction``: the
    azimuth phi = 0 lies along ``radial``, the unit vector of the global x axis made
    perpendicular to ``direction`` (the global y axis instead when ``direction`` is within
    about 25 degrees of x).

    Examples
    --------
    >>> Axis().to_3d(np.array([[0.5, 2.0]])).tolist()
    [[0.5, 0.0, 2.0]]
    """

    origin: Array = field(default_factory=lambda: np.zeros(3))
    direction: Array = field(default_factory=lambda: np.array([0.0, 0.0, 1.0]))

    def __post_init__(self) -> None:
        origin = np.asarray(self.origin, dtype=np.float64).reshape(-1)
        direction = np.asarray(self.direction, dtype=np.float64).reshape(-1)
        if origin.shape != (3,) or direction.shape != (3,):
            raise CompareError(f"axis origin and direction need 3 components each, got {origin.size} and {direction.size}")
        norm = float(np.linalg.norm(direction))
        if not (np.isfinite(origin).all() and np.isfinite(norm) and norm > 0.0):
            raise CompareError(f"axis direction must be a finite non-zero vector, got {direction.tolist()}")
        object.__setattr__(self, "origin", origin)
        object.__setattr__(self, "direction", direction / norm)

    @property
    def radial(self) -> Array:
        """Unit vector of phi = 0, perpendicular to the axis."""
        trial = np.array([1.0, 0.0, 0.0]) if abs(self.direction[0]) < AXIS_NEAR_X else np.array([0.0, 1.0, 0.0])
        perp = trial - (trial @ self.direction) * self.direction
        return perp / np.linalg.norm(perp)

    def to_3d(self, rz: ArrayLike) -> Array:
        """3D points (m, 3) of mesh points (r, z), shape (m, 2)."""
        rz = np.asarray(rz, dtype=np.float64)
        return self.origin + rz[:, :1] * self.radial + rz[:, 1:2] * self.direction

    def components(self, b: ArrayLike) -> Array:
        """(B_r, B_z) at phi = 0 of 3D vectors, shape (m, 3) -> (m, 2)."""
        b = np.asarray(b, dtype=np.float64)
        return np.stack([b @ self.radial, b @ self.direction], axis=1)


@dataclass(frozen=True, slots=True, eq=False)
class FemField:
    """The part of a finite-element result that is compared: volume cells and one B field (SI).

    Attributes
    ----------
    source
        The file it was read from (for messages).
    field_name
        Name of the B field in the file.
    location
        ``"point"`` (values at nodes, interpolated linearly over cells) or ``"cell"``
        (one value per cell).
    points
        Node coordinates, m: shape (n_points, 3) for a 3D mesh, (n_points, 2) as (r, z) for an
        axisymmetric one.
    blocks
        (cell type, connectivity (n_cells, n_nodes)) of the volume cells, numbered block by block.
    values
        B, T: shape (n_points or n_cells, 3) in 3D, (…, 2) as (B_r, B_z) on an axisymmetric mesh.
    cell_sets
        Named groups of cells, as indices into the block-by-block numbering.
    axis
        The symmetry axis of an axisymmetric mesh, ``None`` for a 3D mesh.
    """

    source: str
    field_name: str
    location: str
    points: Array
    blocks: tuple[tuple[str, NDArray[np.int64]], ...]
    values: Array
    cell_sets: dict[str, NDArray[np.int64]]
    axis: Axis | None = None

    def __post_init__(self) -> None:
        dim = 2 if self.axis is not None else 3
        if self.points.ndim != 2 or self.points.shape[1] != dim:
            raise CompareError(f"mesh points must have shape (n, {dim}), got {self.points.shape}", self.source)
        n_expected = len(self.points) if self.location == "point" else self.n_cells
        if self.values.shape != (n_expected, dim):
            raise CompareError(
                f"field {self.field_name!r} must have shape ({n_expected}, {dim}) as {self.location} data, "
                f"got {self.values.shape}",
                self.source,
            )
        if not np.isfinite(self.values).all():
            i = int(np.flatnonzero(~np.isfinite(self.values).all(axis=1))[0])
            raise CompareError(f"field {self.field_name!r} is not finite at {self.location} {i}", self.source)

    @property
    def n_cells(self) -> int:
        """Number of volume cells."""
        return sum(len(conn) for _, conn in self.blocks)

    def used_nodes(self) -> NDArray[np.int64]:
        """Sorted indices of the nodes that belong to at least one volume cell."""
        return np.unique(np.concatenate([conn.ravel() for _, conn in self.blocks]))

    @property
    def is_axisymmetric(self) -> bool:
        """Whether the mesh is an (r, z) section of an axisymmetric model."""
        return self.axis is not None

    def to_3d(self, mesh_points: ArrayLike) -> Array:
        """Case-frame 3D points (m, 3) of mesh-coordinate points."""
        pts = np.asarray(mesh_points, dtype=np.float64)
        return pts if self.axis is None else self.axis.to_3d(pts)

    def components(self, b: ArrayLike) -> Array:
        """The compared components of 3D vectors: all three, or (B_r, B_z) on an axisymmetric mesh."""
        b = np.asarray(b, dtype=np.float64)
        return b if self.axis is None else self.axis.components(b)
