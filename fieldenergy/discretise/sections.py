"""Filaments across a conductor's cross-section: offsets, current shares, core radii and GMDs.

A round conductor is one filament on the centre line whose self geometric mean distance is
that of its circular section. A rectangular pack is a grid of equal sub-rectangles, one
filament at the centre of each, each carrying an equal share of the pack's ampere-turns.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import DiscretisationError, GeometryError
from fieldenergy.geometry._vectors import where
from fieldenergy.model.case import RectSection, RoundSection, Section

#: GMD of a circular area from itself, as a fraction of its radius: exp(-1/4)
#: (Maxwell, A Treatise on Electricity and Magnetism, 1873, from memory).
ROUND_GMD_FACTOR: float = math.exp(-0.25)

#: Default filament count across a rectangular section: the grid (n_w, n_h) with
#: n_w * n_h in this range whose cells are nearest to square (fewest filaments on a tie).
DEFAULT_SECTION_FILAMENTS: tuple[int, int] = (9, 16)


@dataclass(frozen=True, slots=True, eq=False)
class SectionLayout:
    """Filaments of one section.

    Attributes
    ----------
    offsets
        (u, v) of each filament along (e_w, e_h), shape (k, 2), m.
    shares
        Fraction of the section's ampere-turns each filament carries, shape (k,); sums to 1.
    radii
        Core radius of each filament for field evaluation, shape (k,), m: the radius of the
        round conductor with the same GMD as the sub-section (GMD * e^(1/4)), so the field
        route and the A.J route model the same conductor.
    gmd
        Geometric mean distance of each filament's sub-section from itself, shape (k,), m.
    half_width, half_height
        Half extents of the whole section along e_w and e_h, m (equal to the radius for a
        round section).
    clearance
        Half-size used for the clearance check between coils, m: the radius of a round
        section, half the smaller side of a rectangular one.
    """

    offsets: NDArray[np.float64]
    shares: NDArray[np.float64]
    radii: NDArray[np.float64]
    gmd: NDArray[np.float64]
    half_width: float
    half_height: float
    clearance: float

    @property
    def n_filaments(self) -> int:
        """Number of filaments."""
        return len(self.shares)

    @property
    def is_centred(self) -> bool:
        """True when the only filament sits on the centre line (no section frame is needed)."""
        return bool(self.n_filaments == 1 and not np.any(self.offsets))


def rect_gmd(a: float, b: float) -> float:
    """Geometric mean distance of an a x b rectangle from itself (Maxwell's formula), m.

    ln g = ln d - (a^2/6b^2) ln sqrt(1 + b^2/a^2) - (b^2/6a^2) ln sqrt(1 + a^2/b^2)
    + (2a/3b) atan(b/a) + (2b/3a) atan(a/b) - 25/12, with d = sqrt(a^2 + b^2).

    References
    ----------
    J. C. Maxwell, A Treatise on Electricity and Magnetism, 1873, art. 692; E. B. Rosa and
    F. W. Grover, Formulas and tables for the calculation of mutual and self-inductance,
    Bull. Bureau of Standards 8, 1912 (from memory).

    Examples
    --------
    >>> round(rect_gmd(1.0, 1.0), 5)  # a square: 0.44705 a
    0.44705
    """
    a, b = float(a), float(b)
    if not (math.isfinite(a) and math.isfinite(b) and a > 0.0 and b > 0.0):
        raise GeometryError(f"rectangle sides must be finite and > 0 m, got {a!r} x {b!r}")
    ra, rb = (a / b) ** 2, (b / a) ** 2
    ln_g = (
        0.5 * math.log(a * a + b * b)
        - ra / 6.0 * 0.5 * math.log1p(rb)
        - rb / 6.0 * 0.5 * math.log1p(ra)
        + 2.0 / 3.0 * (a / b) * math.atan(b / a)
        + 2.0 / 3.0 * (b / a) * math.atan(a / b)
        - 25.0 / 12.0
    )
    return math.exp(ln_g)


def default_section_grid(width: float, height: float) -> tuple[int, int]:
    """Filaments (across the width, across the height) for a width x height section.

    Among grids with a filament count in :data:`DEFAULT_SECTION_FILAMENTS`, the one whose
    cells are nearest to square; on a tie, the one with fewest filaments.

    Examples
    --------
    >>> default_section_grid(0.01, 0.01), default_section_grid(0.04, 0.01), default_section_grid(1.0, 0.001)
    ((3, 3), (8, 2), (16, 1))
    """
    lo, hi = DEFAULT_SECTION_FILAMENTS
    candidates = [
        (abs(math.log((width / n_w) / (height / n_h))), n_w * n_h, n_w, n_h)
        for n_w in range(1, hi + 1)
        for n_h in range(1, hi // n_w + 1)
        if n_w * n_h >= lo
    ]
    _, _, n_w, n_h = min(candidates)
    return n_w, n_h


def section_layout(
    section: Section, grid: tuple[int, int] | None = None, name: str | None = None, refinement: int = 1
) -> SectionLayout:
    """The filaments of a round or rectangular section.

    Parameters
    ----------
    section
        The section record.
    grid
        Filaments (across the width, across the height) of a rectangular section; ``None``
        chooses by :func:`default_section_grid`. Ignored for a round section.
    name
        Coil name, for error messages.
    refinement
        Multiplies both counts of the rectangular grid.

    Raises
    ------
    GeometryError
        If a size is not finite and > 0.
    DiscretisationError
        If ``grid`` is not two integers >= 1.

    Examples
    --------
    >>> layout = section_layout(RectSection(0.02, 0.01), grid=(2, 1))
    >>> layout.offsets.tolist(), layout.shares.tolist()
    ([[-0.005, 0.0], [0.005, 0.0]], [0.5, 0.5])
    """
    if isinstance(section, RoundSection):
        a = _size(section.radius, "round section radius", name)
        return SectionLayout(np.zeros((1, 2)), np.ones(1), np.array([a]), np.array([a * ROUND_GMD_FACTOR]), a, a, a)
    if not isinstance(section, RectSection):
        raise GeometryError(f"{where(name)}: unsupported section {type(section).__name__}; expected RoundSection or RectSection")
    w = _size(section.width, "rectangular section width", name)
    h = _size(section.height, "rectangular section height", name)
    n_w, n_h = _checked_grid(grid, name) if grid is not None else default_section_grid(w, h)
    n_w, n_h = n_w * refinement, n_h * refinement
    cw, ch = w / n_w, h / n_h
    u = cw * (np.arange(n_w) - 0.5 * (n_w - 1))  # symmetric about the centre line to the last bit
    v = ch * (np.arange(n_h) - 0.5 * (n_h - 1))
    uu, vv = np.meshgrid(u, v, indexing="ij")
    k = n_w * n_h
    return SectionLayout(
        offsets=np.column_stack([uu.ravel(), vv.ravel()]),
        shares=np.full(k, 1.0 / k),
        radii=np.full(k, rect_gmd(cw, ch) / ROUND_GMD_FACTOR),
        gmd=np.full(k, rect_gmd(cw, ch)),
        half_width=0.5 * w,
        half_height=0.5 * h,
        clearance=0.5 * min(w, h),
    )


def _size(value: float, what: str, name: str | None) -> float:
    x = float(value)
    if not (math.isfinite(x) and x > 0.0):
        raise GeometryError(f"{where(name)}: {what} must be finite and > 0 m, got {value!r}")
    return x


def _checked_grid(grid: tuple[int, int], name: str | None) -> tuple[int, int]:
    ok = len(grid) == 2 and all(not isinstance(n, bool) and isinstance(n, (int, np.integer)) and n >= 1 for n in grid)
    if not ok:
        raise DiscretisationError(f"{where(name)}: section_grid must be two integers >= 1, got {grid!r}")
    return int(grid[0]), int(grid[1])
