"""Solve settings: how fine to cut the paths and how many refinement levels to extrapolate over."""

from __future__ import annotations

from dataclasses import dataclass, replace


@dataclass(frozen=True, slots=True)
class SolveOptions:
    """Settings of one solve.

    Parameters
    ----------
    preset
        Name of the preset these settings came from (``fast``, ``default``, ``fine`` or ``custom``).
    n_levels
        Number of refinement levels solved (each level doubles the chords of curved pieces);
        2 or more gives a Richardson-extrapolated result with an error estimate.
    base_level
        Refinement level of the coarsest solve.
    sagitta_fraction
        Override of the case's chord sagitta relative to coil size (``None``: keep the case's).
    section_grid
        Override of the filament grid across rectangular sections (``None``: keep the case's).
    field_route
        Also integrate |B|^2 / (2 mu0) over all space and compare the result with the A.J
        route (the two-route cross-check).
    field_tolerance
        Relative accuracy the field route's cubature aims for.
    field_budget
        The field route's budget in point-segment pairs (:data:`FIELD_ROUTE_PAIR_BUDGET` by
        default); when the budget stops the cubature above the gap tolerance, the route check
        is flagged inconclusive.
    aj_method
        How the A.J double sum is evaluated: ``direct`` (every pair, each to 1e-9), ``fast``
        (treecode with exact near pairs, about 1e-7; for 1e5 segments and more) or ``auto``
        (fast from ``fieldenergy.run.FAST_AJ_MIN_SEGMENTS`` segments up).
    """

    preset: str = "default"
    n_levels: int = 3
    base_level: int = 0
    sagitta_fraction: float | None = None
    section_grid: tuple[int, int] | None = None
    field_route: bool = True
    field_tolerance: float = 1.0e-3
    field_budget: float = 6.0e10  # FIELD_ROUTE_PAIR_BUDGET
    aj_method: str = "auto"

    def __post_init__(self) -> None:
        if self.n_levels < 1:
            raise ValueError(f"n_levels must be >= 1, got {self.n_levels}")
        if self.base_level < 0:
            raise ValueError(f"base_level must be >= 0, got {self.base_level}")
        if self.sagitta_fraction is not None and not self.sagitta_fraction > 0:
            raise ValueError(f"sagitta_fraction must be > 0, got {self.sagitta_fraction}")
        if not 0.0 < self.field_budget < float("inf"):
            raise ValueError(f"field_budget must be > 0 point-segment pairs, got {self.field_budget}")
        if self.aj_method not in AJ_METHODS:
            raise ValueError(f"aj_method must be one of {', '.join(AJ_METHODS)}, got {self.aj_method!r}")

    @classmethod
    def from_preset(cls, name: str) -> SolveOptions:
        """The named preset: ``fast`` (two coarse levels), ``default`` or ``fine``."""
        try:
            return PRESETS[name]
        except KeyError:
            known = ", ".join(PRESETS)
            raise ValueError(f"unknown preset {name!r}; known presets: {known}") from None

    def with_changes(self, **changes: object) -> SolveOptions:
        """A copy with some settings changed; the preset name becomes ``custom``."""
        return replace(self, preset="custom", **changes)  # type: ignore[arg-type]


#: Ways to evaluate the A.J double sum (see :class:`SolveOptions`).
AJ_METHODS: tuple[str, ...] = ("auto", "direct", "fast")

#: Default budget of the field route in point-segment pairs (about 90 s on 2 cores at the measured 6e8 pairs per second).
FIELD_ROUTE_PAIR_BUDGET: float = SolveOptions().field_budget

#: The named presets. ``default`` meets 1e-4 relative error on the closed-form references of
#: the test suite; ``fast`` trades accuracy for speed; ``fine`` adds a level.
PRESETS: dict[str, SolveOptions] = {
    "fast": SolveOptions(preset="fast", n_levels=2, sagitta_fraction=1.0e-3, field_tolerance=1.0e-2),
    "default": SolveOptions(preset="default", n_levels=3),
    "fine": SolveOptions(preset="fine", n_levels=4, field_tolerance=3.0e-4),
}
