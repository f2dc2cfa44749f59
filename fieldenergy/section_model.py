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

The field route (:mod:`fieldenergy.energy.from_field`) integrates |B|^2 of the same filaments,
each a round core of uniform current whose own GMD equals its sub-rectangle's (radius
g e^(1/4)). Those cores are wider than the grid spacing, so neighbouring cores overlap, and
two overlapping uniform discs are farther apart in the GMD sense than their centres: the
field route's model has a slightly smaller inductance than the A.J route's, which uses the
centre distance. :func:`core_overlap_correction` gives that difference by the same
relation, from the exact GMD of two discs, so the two routes are compared like with like.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

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


@dataclass(frozen=True, slots=True)
class _Grid:
    """One coil instance's filament grid across a rectangular section."""

    coil: int
    section: RectSection
    offsets: NDArray[np.float64]  # (f, 2) m, in the section frame
    shares: NDArray[np.float64]  # (f,) of the ampere-turns
    gmd: NDArray[np.float64]  # (f,) m, each filament's own GMD
    radii: NDArray[np.float64]  # (f,) m, each filament's core radius
    turns: float
    mean_length: float  # m, conductor length per turn

    def log_gmd_change(self, log_gmd_change: float) -> float:
        """The self-inductance change (H) for a change of the section's ln GMD:
        dL/d(ln g) = -mu0 N^2 l / (2 pi) (module docstring)."""
        return -MU0 / (2.0 * np.pi) * self.turns**2 * self.mean_length * log_gmd_change


def _grids(model: FilamentModel) -> list[_Grid]:
    """The coil instances with a rectangular section cut into more than one filament."""
    fil = model.filaments
    _, first = np.unique(fil.filament, return_index=True)
    grids = []
    for coil, section in enumerate(model.coil_sections):
        chains = np.flatnonzero(model.filament_coil == coil)
        if not isinstance(section, RectSection) or len(chains) < 2:
            continue
        rows = first[chains]
        turns = float(np.sum(fil.weights[rows]))
        seg = fil.coil == coil
        lengths = np.linalg.norm(fil.ends[seg] - fil.starts[seg], axis=1)
        mean_length = float(np.sum(lengths * fil.weights[seg])) / turns
        grids.append(_Grid(coil, section, model.filament_offset[chains], fil.weights[rows] / turns, fil.gmd[rows],
                           fil.radii[rows], turns, mean_length))
    return grids


def gmd_correction(model: FilamentModel) -> NDArray[np.float64]:
    """Correction (H) to add to each coil instance's self-inductance for its section grid.

    Zero for round sections (one filament with the exact GMD of a circle) and for a
    rectangular section of one filament (its GMD is exact).
    """
    correction = np.zeros(len(model.coil_names))
    for grid in _grids(model):
        log_grid = grid_log_gmd(grid.offsets, grid.shares, grid.gmd)
        log_exact = float(np.log(rect_gmd(grid.section.width, grid.section.height)))
        correction[grid.coil] = grid.log_gmd_change(log_exact - log_grid)
    return correction


def has_rect_grid(model: FilamentModel) -> bool:
    """Whether any coil instance carries a rectangular section cut into more than one filament."""
    counts = np.bincount(model.filament_coil, minlength=len(model.coil_names))
    return any(isinstance(s, RectSection) and counts[k] > 1 for k, s in enumerate(model.coil_sections))


def disc_log_gmd(d: float, a1: float, a2: float) -> float:
    """ln of the GMD between two uniform discs of radii a1, a2 whose centres are d apart.

    It is d when the discs do not overlap (a disc's logarithmic potential outside it is that
    of its centre), and larger when they do. Exact: the mean over disc 2 of disc 1's
    logarithmic potential, ln r + h(r) with h(r) = ln(a1/r) - (a1^2 - r^2)/(2 a1^2) inside disc 1
    (r < a1) and 0 outside (Maxwell 1873, the potential of a uniform disc); the mean of ln r
    over disc 2 is disc 2's potential at disc 1's centre, and the mean of h is one integral
    over r of h times the arc of the circle of radius r (about disc 1's centre) inside disc 2.

    Examples
    --------
    >>> round(disc_log_gmd(0.0, 1.0, 1.0), 12)     # the self GMD of a disc: a e^(-1/4)
    -0.25
    >>> round(disc_log_gmd(3.0, 1.0, 1.5) - math.log(3.0), 12)
    0.0
    """
    from scipy.integrate import quad  # a heavy import, needed here only

    mean_log = math.log(d) if d >= a2 else math.log(a2) - (a2 * a2 - d * d) / (2.0 * a2 * a2)
    lo = max(0.0, d - a2)
    if lo >= a1:
        return mean_log

    def h_times_arc(r: float) -> float:
        if r <= 0.0:
            return 0.0
        h = math.log(a1 / r) - (a1 * a1 - r * r) / (2.0 * a1 * a1)
        if d == 0.0:
            arc = 2.0 * math.pi * r if r <= a2 else 0.0
        else:
            cos = (r * r + d * d - a2 * a2) / (2.0 * r * d)
            arc = 2.0 * r * math.acos(min(1.0, max(-1.0, cos)))
        return h * arc

    breaks = [x for x in (a2 - d, d + a2) if lo < x < a1]
    value, _ = quad(h_times_arc, lo, a1, points=breaks or None, epsabs=0.0, epsrel=1e-11, limit=200)
    return mean_log + value / (math.pi * a2 * a2)


def core_overlap_correction(model: FilamentModel) -> NDArray[np.float64]:
    """Field-route model minus A.J-route model, per coil instance's self-inductance (H).

    Nonzero only for rectangular sections of several filaments whose round cores overlap
    (module docstring); add its negative to the field route's matrix to compare like with like.
    """
    correction = np.zeros(len(model.coil_names))
    for grid in _grids(model):
        change = 0.0
        for f in range(len(grid.shares)):
            for g in range(f + 1, len(grid.shares)):
                d = float(np.hypot(*(grid.offsets[f] - grid.offsets[g])))
                if d < grid.radii[f] + grid.radii[g]:
                    excess = disc_log_gmd(d, grid.radii[f], grid.radii[g]) - math.log(d)
                    change += 2.0 * grid.shares[f] * grid.shares[g] * excess
        correction[grid.coil] = grid.log_gmd_change(change)
    return correction
