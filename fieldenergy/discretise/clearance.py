"""A cheap check that coil instances do not run through each other.

Each instance's centre line is sampled about every section half-size; two instances whose
samples come closer than the sum of their section half-sizes (times
``constants.INTERSECTION_CLEARANCE_FRACTION``) raise a :class:`FieldEnergyWarning` naming both
and the place. Samples are compared with a k-d tree, one pair of instances at a time, only for
pairs whose bounding boxes come that close (those are found by whole-array tests, one row of
pairs at a time). An overlap shorter than the sample spacing can be
missed; the check is a guard against typing mistakes, not a proof of clearance.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import INTERSECTION_CLEARANCE_FRACTION
from fieldenergy.errors import FieldEnergyWarning
from fieldenergy.geometry import Curve

#: Fewest and most samples per instance (the cap bounds the cost for a thin wire on a big coil).
MIN_SAMPLES: int = 64
MAX_SAMPLES: int = 20_000

#: Conductors exactly touching (distance equal to the sum of half-sizes, as for stacked packs)
#: are not reported: the limit is shrunk by this relative margin to absorb rounding.
TOUCH_RTOL: float = 1.0e-9


def sampled_centre_line(curve: Curve, spacing: float) -> NDArray[np.float64]:
    """Points along a curve about ``spacing`` apart (every break included), shape (m, 3).

    Examples
    --------
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> circle = exact_curve(CirclePath(1.0, [0, 0, 0], [0, 0, 1]))
    >>> len(sampled_centre_line(circle, 0.01))
    629
    """
    length = curve.length()
    n = min(MAX_SAMPLES, max(MIN_SAMPLES, math.ceil(length / spacing)))
    widths = np.diff(curve.breaks)
    counts = np.maximum(1, np.ceil(n * widths / widths.sum())).astype(np.int64)
    t, piece = curve.grid(counts)
    return curve.position(t[:-1], piece)


def warn_if_intersecting(names: Sequence[str], curves: Sequence[Curve], half_sizes: Sequence[float]) -> None:
    """Warn (FieldEnergyWarning) for each pair of instances whose conductors come too close.

    Parameters
    ----------
    names, curves, half_sizes
        Per coil instance: name, exact centre line and section half-size (m).

    Examples
    --------
    >>> import warnings
    >>> from fieldenergy.model import CirclePath
    >>> from fieldenergy.geometry import exact_curve
    >>> a = exact_curve(CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> b = exact_curve(CirclePath(0.1, [0, 0, 0.001], [0, 0, 1]))
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warn_if_intersecting(["a", "b"], [a, b], [0.002, 0.002])
    >>> len(caught)
    1
    """
    from scipy.spatial import cKDTree

    points = [sampled_centre_line(c, h) for c, h in zip(curves, half_sizes)]
    lows = [p.min(axis=0) for p in points]
    highs = [p.max(axis=0) for p in points]
    trees: dict[int, cKDTree] = {}
    box_lo, box_hi = np.array(lows).reshape(-1, 3), np.array(highs).reshape(-1, 3)
    for i, j in _box_pairs(box_lo, box_hi, np.asarray(half_sizes, dtype=np.float64)):
        limit = INTERSECTION_CLEARANCE_FRACTION * (half_sizes[i] + half_sizes[j]) * (1.0 - TOUCH_RTOL)
        near = np.all((points[i] > lows[j] - limit) & (points[i] < highs[j] + limit), axis=1)
        if not near.any():
            continue
        tree = trees.setdefault(j, cKDTree(points[j]))
        dist, idx = tree.query(points[i][near], distance_upper_bound=limit)
        hit = np.isfinite(dist) & (dist < limit)
        if hit.any():
            k = int(np.argmin(np.where(hit, dist, np.inf)))
            where = 0.5 * (points[i][near][k] + points[j][idx[k]])
            warnings.warn(
                f"coils {names[i]!r} and {names[j]!r} come within {dist[k]:.6g} m of each other near "
                f"({where[0]:.6g}, {where[1]:.6g}, {where[2]:.6g}) m, less than the sum of their section "
                f"half-sizes {half_sizes[i] + half_sizes[j]:.6g} m: the conductors intersect",
                FieldEnergyWarning,
                stacklevel=3,
            )


def _box_pairs(lows: NDArray[np.float64], highs: NDArray[np.float64], half: NDArray[np.float64]) -> list[tuple[int, int]]:
    """Pairs i < j of instances whose bounding boxes come closer than their limit, found by
    rows of whole-array tests (a stack of a thousand loops has half a million pairs to rule out)."""
    found: list[tuple[int, int]] = []
    n = len(half)
    for i in range(n - 1):
        limit = INTERSECTION_CLEARANCE_FRACTION * (half[i] + half[i + 1 :]) * (1.0 - TOUCH_RTOL)
        apart = (np.any(lows[i] - highs[i + 1 :] >= limit[:, None], axis=1)
                 | np.any(lows[i + 1 :] - highs[i] >= limit[:, None], axis=1))
        found += [(i, i + 1 + int(k)) for k in np.flatnonzero(~apart)]
    return found
