"""Richardson extrapolation over nested refinement levels, with an error estimate.

Each refinement level halves every curved chord, so a quantity computed on straight chords
approaches its limit as X_k = X* + C h_k^p + ..., with p = 2 for chords of a smooth curve
(the chord's sagitta is O(h^2)). Richardson's deferred approach to the limit
(L. F. Richardson, Phil. Trans. R. Soc. A 210, 1911) removes the leading term.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

#: Order of the leading discretisation error of straight chords on a smooth curve.
CHORD_ERROR_ORDER: float = 2.0


@dataclass(frozen=True, slots=True)
class Extrapolation:
    """An extrapolated quantity with its estimated absolute error and the observed order."""

    value: NDArray[np.float64]
    error: NDArray[np.float64]
    observed_order: float


def richardson(values: list[NDArray[np.float64]], order: float = CHORD_ERROR_ORDER) -> Extrapolation:
    """Extrapolate a sequence of solves whose step halves from one to the next.

    Parameters
    ----------
    values
        The quantity (any shape) on levels 0, 1, ...; at least one.
    order
        Assumed order of the leading error term.

    Returns
    -------
    Extrapolation
        With one level: the value itself and an error of ``nan`` (nothing to compare).
        With two: the extrapolated value and the size of the correction (a conservative
        estimate: it is the error of the finer raw level). With three or more: the
        extrapolation of the last two levels, and as its error the change from the
        extrapolation of the two levels before (conservative: it is the error of the
        earlier extrapolation).

    Examples
    --------
    >>> import numpy as np
    >>> exact = 2.0
    >>> seq = [np.array(exact + 0.1 * 4.0**-k) for k in range(3)]
    >>> r = richardson(seq)
    >>> round(float(r.value), 12), round(r.observed_order, 6)
    (2.0, 2.0)
    """
    vals = [np.asarray(v, dtype=np.float64) for v in values]
    if not vals:
        raise ValueError("richardson needs at least one level")
    if len(vals) == 1:
        return Extrapolation(vals[0], np.full(vals[0].shape, np.nan), math.nan)
    factor = 2.0**order - 1.0
    extrapolated = [vals[k] + (vals[k] - vals[k - 1]) / factor for k in range(1, len(vals))]
    if len(vals) == 2:
        error = np.abs(extrapolated[-1] - vals[-1])
    else:
        error = np.abs(extrapolated[-1] - extrapolated[-2])
    return Extrapolation(extrapolated[-1], error, observed_order(vals))


def observed_order(values: list[NDArray[np.float64]]) -> float:
    """Convergence order seen over the last three levels, from the largest entry change.

    ``nan`` when fewer than three levels are given or the changes are at rounding level.
    """
    if len(values) < 3:
        return math.nan
    d1 = float(np.max(np.abs(values[-2] - values[-3])))
    d2 = float(np.max(np.abs(values[-1] - values[-2])))
    scale = float(np.max(np.abs(values[-1])))
    if d2 <= 1e-13 * scale or d1 <= 1e-13 * scale:
        return math.nan
    return math.log2(d1 / d2)
