"""The two-route cross-check: the field route's matrix against the A.J route's, like with like.

Both routes see the same discretised model. The A.J route's raw matrix of one model (the
section check's: chords five times coarser in sagitta than the solve's coarsest level, the
cheapest to integrate; with the section-grid GMD correction, a model correction that applies
to both routes) is compared with the field route's matrix of that same model plus
the same correction. One difference between the models is known in closed form and removed
first: the field route's round pack cores overlap their neighbours, which the A.J route's
centre-distance mutuals do not see (:func:`fieldenergy.section_model.core_overlap_correction`).
The field route is then carried to the limit with the chord-level
Richardson correction measured on the A.J route (extrapolated minus raw at that level): the
field route is not itself solved on several levels, so the correction is borrowed, and the
gap between the two extrapolated values equals the gap between the raw models.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: A route gap above this (relative, at the case currents or entry-wise) is flagged.
ROUTE_GAP_TOLERANCE: float = 1.0e-3

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class RouteGap:
    """How far the two routes are apart.

    Attributes
    ----------
    energy_gap
        |W_field - W_aj| / W_aj at the case currents (the entry gap when W_aj is 0).
    matrix_gap
        Largest |L_field - L_aj| over sqrt(L_aj,pp L_aj,qq).
    flagged
        Whether either gap exceeds :data:`ROUTE_GAP_TOLERANCE`, or the check is inconclusive.
    hint
        Which route to refine when flagged (empty otherwise).
    inconclusive
        The field route stopped at its point budget with an error estimate above
        :data:`ROUTE_GAP_TOLERANCE` (largest entry error over sqrt(L_pp L_qq), so a small
        circuit's entry counts as much as a large one's): a gap below that estimate cannot be
        seen, so a small gap proves nothing and the result is flagged.
    """

    energy_gap: float
    matrix_gap: float
    flagged: bool
    hint: str
    inconclusive: bool = False


def route_gap(
    field: ArrayLike, aj: ArrayLike, currents: ArrayLike, field_error: float, aj_error: float,
    field_converged: bool = True,
) -> RouteGap:
    """Compare the two circuit matrices at the case currents.

    Parameters
    ----------
    field, aj
        Circuit inductance matrices of the two routes (H), same model and corrections.
    currents
        Circuit currents (A).
    field_error, aj_error
        The routes' own relative error estimates (they choose the hint).
    field_converged
        Whether the field route met its tolerance; if not, and ``field_error`` is above
        :data:`ROUTE_GAP_TOLERANCE`, the check is inconclusive and flagged.

    Examples
    --------
    >>> g = route_gap([[1.0005]], [[1.0]], [2.0], 1e-4, 1e-5)
    >>> round(g.energy_gap, 6), g.flagged
    (0.0005, False)
    """
    lf = np.asarray(field, dtype=np.float64)
    la = np.asarray(aj, dtype=np.float64)
    i = np.asarray(currents, dtype=np.float64)
    d = np.sqrt(np.abs(np.diag(la)))
    matrix_gap = float(np.max(np.abs(lf - la) / np.outer(d, d)))
    w_aj = 0.5 * float(i @ la @ i)
    energy_gap = abs(0.5 * float(i @ lf @ i) - w_aj) / w_aj if w_aj > 0.0 else matrix_gap
    inconclusive = not field_converged and field_error > ROUTE_GAP_TOLERANCE
    flagged = max(energy_gap, matrix_gap) > ROUTE_GAP_TOLERANCE or inconclusive
    hint = ""
    if inconclusive:
        hint = (
            f"inconclusive: the field route stopped at its point budget with an estimated error of {field_error:.1e}, "
            f"above the gap tolerance {ROUTE_GAP_TOLERANCE:.0e}; raise its point budget "
            "(solve --field-budget)"
        )
    elif flagged and field_error >= aj_error:
        hint = "refine the field route (its own error estimate is the larger): lower its tolerance"
    elif flagged:
        hint = "refine the A.J route and the section grid: more levels (--levels) or a finer section_grid"
    return RouteGap(energy_gap, matrix_gap, flagged, hint, inconclusive)
