"""The section filament grid: its geometric-mean-distance correction.

A winding pack of uniform current density is modelled by filaments at the centres of a grid
of sub-rectangles. Each filament's self-interaction uses the exact geometric mean distance
(GMD) of its sub-rectangle, but two different filaments interact through their centre
distance, which is only approximately the GMD of the two sub-rectangles. For a thin
conductor the self-inductance depends on its section only through the GMD g of the section
from itself, dL/d(ln g) = -mu0 N^2 l / (2 pi) for a conductor of length l (Maxwell 1873;
Rosa & Grover 1912). The grid's error is local (it comes from neighbouring cells), so
the same relation corrects it when the cells are small against the path's curvature, even
for a pack wider than the path's radius: ln g of the grid, sum_fg s_f s_g ln d_fg, is
compared with the exact ln g of the whole rectangle and the coil's self-inductance is
corrected by the difference. Without the correction a grid of thin cells converges only at
first order in the cell size.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import MU0
from fieldenergy.discretise.sections import rect_gmd
from fieldenergy.model import FilamentModel, RectSection


def grid_log_gmd(offsets: NDArray[np.float64], shares: NDArray[np.float64], self_gmd: NDArray[np.float64]) -> float:
    """ln of the GMD of a set of filaments from itself: sum_fg s_f s_g ln d_fg, with d_ff the self GMD.

    Examples
    --------
    >>> import numpy as np
    >>> bool(np.isclose(grid_log_gmd(np.zeros((1, 2)), np.ones(1), np.array([0.5])), np.log(0.5)))
    True
    """
    diff = offsets[:, None, :] - offsets[None, :, :]
    dist = np.sqrt(np.sum(diff**2, axis=-1))
    np.fill_diagonal(dist, self_gmd)
    return float(shares @ np.log(dist) @ shares)


def gmd_correction(model: FilamentModel) -> NDArray[np.float64]:
    """Correction (H) to add to each coil instance's self-inductance for its section grid.

    Zero for round sections (one filament with the exact GMD of a circle) and for a
    rectangular section of one filament (its GMD is exact).
    """
    fil = model.filaments
    _, first = np.unique(fil.filament, return_index=True)
    correction = np.zeros(len(model.coil_names))
    for coil, section in enumerate(model.coil_sections):
        if not isinstance(section, RectSection):
            continue
        chains = np.flatnonzero(model.filament_coil == coil)
        if len(chains) < 2:
            continue
        rows = first[chains]
        turns = float(np.sum(fil.weights[rows]))
        shares = fil.weights[rows] / turns
        log_grid = grid_log_gmd(model.filament_offset[chains], shares, fil.gmd[rows])
        log_exact = float(np.log(rect_gmd(section.width, section.height)))
        seg = fil.coil == coil
        lengths = np.linalg.norm(fil.ends[seg] - fil.starts[seg], axis=1)
        mean_length = float(np.sum(lengths * fil.weights[seg])) / turns
        correction[coil] = -MU0 / (2.0 * np.pi) * turns**2 * mean_length * (log_exact - log_grid)
    return correction


def has_rect_grid(model: FilamentModel) -> bool:
    """Whether any coil instance carries a rectangular section cut into more than one filament."""
    counts = np.bincount(model.filament_coil, minlength=len(model.coil_names))
    return any(isinstance(s, RectSection) and counts[k] > 1 for k, s in enumerate(model.coil_sections))
