"""Distance from field points to the nearest conductor centre line, for error-by-distance bands."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.spatial import cKDTree

from fieldenergy.model import FilamentModel, RectSection, RoundSection

#: Centre-line samples per band unit of length: the distance to the sampled polyline
#: overestimates the distance to the curve by at most (spacing/2)^2 / (2 d), under 1/500 of a
#: band unit at d = 1 unit.
SAMPLES_PER_UNIT: int = 16

#: Smallest band unit as a fraction of the conductors' size: keeps bands meaningful for thin
#: wires, whose section is far smaller than the region a field error matters in.
MIN_UNIT_FRACTION_OF_SIZE: float = 0.02

#: Most centre-line samples of one coil (bounds the tree's memory for very long conductors).
MAX_SAMPLES_PER_COIL: int = 200_000


@dataclass(frozen=True, slots=True, eq=False)
class ConductorDistance:
    """Nearest-distance queries against densely sampled conductor centre lines.

    Attributes
    ----------
    samples
        Centre-line points, shape (n, 3), m.
    unit
        Band unit, m: the largest section dimension, at least
        :data:`MIN_UNIT_FRACTION_OF_SIZE` of the conductors' size.
    size
        Bounding-box diagonal of the centre lines, m.
    tree
        Nearest-neighbour tree of the samples.
    """

    samples: NDArray[np.float64]
    unit: float
    size: float
    tree: cKDTree

    def __call__(self, points: ArrayLike) -> NDArray[np.float64]:
        """Distance (m) of each point (shape (m, 3)) to the nearest centre-line sample."""
        dist, _ = self.tree.query(np.asarray(points, dtype=np.float64))
        return np.asarray(dist, dtype=np.float64)


def section_size(section: object) -> float:
    """Largest dimension of a conductor section (m): the diameter or the longer side."""
    if isinstance(section, RoundSection):
        return 2.0 * section.radius
    if isinstance(section, RectSection):
        return max(section.width, section.height)
    return 0.0


def conductor_distance(model: FilamentModel) -> ConductorDistance:
    """Sample every coil instance's exact centre line of a discretised case.

    Examples
    --------
    >>> from fieldenergy.discretise import discretise
    >>> from fieldenergy.model import Case, Circuit, Coil, CirclePath
    >>> loop = Coil("l", "c", RoundSection(0.01), CirclePath(0.5, [0, 0, 0], [0, 0, 1]))
    >>> d = conductor_distance(discretise(Case("loop", (Circuit("c", 1.0),), (loop,))))
    >>> round(float(d([[0.0, 0.0, 0.0]])[0]), 6), round(d.unit, 6)    # centre; 2% of the 1.41 m size
    (0.5, 0.028284)
    """
    coarse = np.concatenate([curve.sample() for curve in model.curves])  # type: ignore[attr-defined]
    size = float(np.linalg.norm(coarse.max(axis=0) - coarse.min(axis=0)))
    largest = max((section_size(s) for s in model.coil_sections), default=0.0)
    unit = max(largest, MIN_UNIT_FRACTION_OF_SIZE * size)
    samples = np.concatenate([_dense(curve, unit / SAMPLES_PER_UNIT) for curve in model.curves])
    return ConductorDistance(samples=samples, unit=unit, size=size, tree=cKDTree(samples))


def _dense(curve: object, spacing: float) -> NDArray[np.float64]:
    """Points along a curve no farther apart than about ``spacing`` (m)."""
    length = curve.length()  # type: ignore[attr-defined]
    n_total = min(MAX_SAMPLES_PER_COIL, max(8, math.ceil(length / spacing)))
    widths = np.diff(curve.breaks)  # type: ignore[attr-defined]
    counts = np.maximum(1, np.ceil(n_total * widths / widths.sum())).astype(np.int64)
    nodes, piece = curve.grid(counts)  # type: ignore[attr-defined]
    return curve.position(nodes[:-1], piece)  # type: ignore[attr-defined]
