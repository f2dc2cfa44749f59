"""B and A at given points from a case, extrapolated over the two finest levels with an error estimate."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.discretise import discretise
from fieldenergy.energy.extrapolate import richardson
from fieldenergy.fields import field_at
from fieldenergy.model import Case
from fieldenergy.model.options import SolveOptions
from fieldenergy.run import ProgressFactory, _no_progress, settings_for


def field_with_error(
    case: Case,
    points: ArrayLike,
    options: SolveOptions | None = None,
    progress: ProgressFactory | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """B (T) and A (T m) at ``points`` (m, shape (m, 3)) for the case's circuit currents.

    The field is computed on the two finest levels of ``options`` (each halves the curved
    chords), extrapolated by Richardson's method; the returned error is the size of that
    correction per point (T), a conservative estimate.
    """
    options = options or SolveOptions()
    progress = progress or _no_progress
    pts = np.ascontiguousarray(points, dtype=np.float64)
    disc = settings_for(case, options)
    last = options.base_level + options.n_levels - 1
    levels = [last - 1, last] if options.n_levels >= 2 else [last]
    bs, as_ = [], []
    for level in levels:
        fil = discretise(case, level=level, discretisation=disc).filaments
        with progress(f"field, level {level}", len(pts)) as update:
            b, a = field_at(pts, fil, case.currents, progress=update)
        bs.append(b)
        as_.append(a)
    b_ex, a_ex = richardson(bs), richardson(as_)
    err = np.linalg.norm(b_ex.error, axis=1) if len(levels) > 1 else np.full(len(pts), np.nan)
    return b_ex.value, a_ex.value, err
