"""Discretise a case: every coil instance becomes filament chains of straight chords."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import REPEATED_POINT_RTOL
from fieldenergy.discretise.chords import ChordGrid, chord_grid
from fieldenergy.discretise.clearance import warn_if_intersecting
from fieldenergy.discretise.offsets import check_fold, node_frames, node_offsets
from fieldenergy.discretise.sections import SectionLayout, section_layout
from fieldenergy.errors import CaseError, DiscretisationError, GeometryError
from fieldenergy.geometry import Curve, coil_instances, mapped_direction
from fieldenergy.model.case import Case, Coil, Discretisation
from fieldenergy.model.filaments import FilamentModel, Filaments


@dataclass(frozen=True, slots=True, eq=False)
class _Chains:
    """Segments of one coil instance: k filament chains of n chords each, chain by chain."""

    starts: NDArray[np.float64]
    ends: NDArray[np.float64]
    t0: NDArray[np.float64]
    t1: NDArray[np.float64]
    n_chords: int
    sagitta: float


def discretise(case: Case, level: int = 0, discretisation: Discretisation | None = None) -> FilamentModel:
    """Cut every coil instance of a case into straight filament segments.

    Each coil instance's exact centre line is cut into chords (see
    :func:`fieldenergy.discretise.chord_grid`); its section into filaments (see
    :func:`fieldenergy.discretise.section_layout`). Every filament follows the chords, offset
    across the section along the section frame; each of its chords is one segment. A segment's
    weight is the coil's turns times the filament's share, so each instance carries exactly
    ``turns`` ampere-turns per ampere of its circuit.

    Parameters
    ----------
    case
        The case.
    level
        Refinement level: curved pieces get 2^level times the level-0 chords.
    discretisation
        Settings to use instead of ``case.discretisation``.

    Returns
    -------
    FilamentModel
        Segments are ordered by coil instance, then filament, then along the path. Filament
        indices run over the whole model; coil indices over coil instances in case order
        (each coil's copies in turn); circuit indices follow ``case.circuits``.

    Raises
    ------
    GeometryError
        For a degenerate path, zero-length chords, or a section too large for a bend.
    DiscretisationError
        For invalid settings or too many chords.
    CaseError
        For a coil naming an unknown circuit, non-finite turns or repeated instance names.

    Warns
    -----
    FieldEnergyWarning
        For coil instances whose conductors intersect.

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, CirclePath, RectSection
    >>> coil = Coil("ring", "main", RectSection(0.01, 0.01), CirclePath(0.2, [0, 0, 0], [0, 0, 1]), turns=50)
    >>> model = discretise(Case("demo", (Circuit("main", 10.0),), (coil,)))
    >>> n_chords = model.filaments.n_segments // 9  # 3 x 3 filaments across the square pack
    >>> n_chords, round(float(model.filaments.weights[::n_chords].sum()), 12)  # ampere-turns per ampere
    (94, 50.0)
    """
    settings = case.discretisation if discretisation is None else discretisation
    _check_settings(settings)
    if isinstance(level, bool) or not isinstance(level, (int, np.integer)) or level < 0:
        raise DiscretisationError(f"refinement level must be an integer >= 0, got {level!r}")
    names: list[str] = []
    curves: list[Curve] = []
    coil_circuit: list[int] = []
    sagittas: list[float] = []
    clearances: list[float] = []
    sections: list[object] = []
    parts: list[tuple[_Chains, SectionLayout, float]] = []
    for coil in case.coils:
        circuit = _circuit_of(case, coil)
        turns = _turns_of(coil)
        layout = section_layout(coil.section, settings.section_grid, coil.name, settings.section_refinement)
        # A repeat moves its copies rigidly and keeps the path parameter, so every copy has
        # copy 0's chords (sagittas and turning angles do not change under a rigid motion).
        grid: ChordGrid | None = None
        for name, curve in coil_instances(coil):
            if name in names:
                raise CaseError(f"coil instance name {name!r} is used twice; coil names must be unique", where=f"coil {coil.name!r}")
            chains, grid = _instance_chains(name, curve, coil, layout, settings, level, grid)
            names.append(name)
            curves.append(curve)
            coil_circuit.append(circuit)
            sagittas.append(chains.sagitta)
            clearances.append(layout.clearance)
            sections.append(coil.section)
            parts.append((chains, layout, turns))
    filaments, filament_coil, offsets = _assemble(parts, coil_circuit, len(case.circuits))
    warn_if_intersecting(names, curves, clearances)
    return FilamentModel(
        filaments=filaments,
        circuit_names=tuple(c.name for c in case.circuits),
        coil_names=tuple(names),
        coil_circuit=tuple(coil_circuit),
        curves=tuple(curves),
        filament_coil=filament_coil,
        filament_offset=offsets,
        level=int(level),
        sagittas=tuple(sagittas),
        coil_sections=tuple(sections),
    )


def _instance_chains(
    name: str, curve: Curve, coil: Coil, layout: SectionLayout, settings: Discretisation, level: int,
    grid: ChordGrid | None = None,
) -> tuple[_Chains, ChordGrid]:
    """The chains of one coil instance, and its chord grid.

    ``grid``, if given, is copy 0's: used as is, and the chord and fold checks, passed by copy
    0 and unchanged by a rigid motion, are not repeated.
    """
    size = curve.size()
    copy = grid is not None
    if grid is None:
        tolerance = settings.sagitta if settings.sagitta is not None else settings.sagitta_fraction * size
        grid = chord_grid(curve, tolerance, settings.max_angle, level, name)
    centre = curve.position(grid.t[:-1], grid.piece)
    centre = np.vstack([centre, centre[:1]])  # the loop closes exactly
    if not copy:
        _check_chords(centre, grid, size, name)
    if layout.is_centred:
        if not copy:
            check_fold(curve, grid, centre, layout, None, name)
        points = centre[None]
    else:
        reference = None if coil.reference is None else mapped_direction(curve, coil.reference)
        frames = node_frames(curve, grid, reference, name)
        if not copy:
            check_fold(curve, grid, centre, layout, frames, name)
        points = centre[None] + node_offsets(frames, layout.offsets, name)
    k = layout.n_filaments
    return _Chains(
        starts=points[:, :-1].reshape(-1, 3),
        ends=points[:, 1:].reshape(-1, 3),
        t0=np.tile(grid.t[:-1], k),
        t1=np.tile(grid.t[1:], k),
        n_chords=grid.n_chords,
        sagitta=grid.sagitta,
    ), grid


def _assemble(
    parts: list[tuple[_Chains, SectionLayout, float]], coil_circuit: list[int], n_circuits: int
) -> tuple[Filaments, NDArray[np.int64], NDArray[np.float64]]:
    """Concatenate the instances' chains into one Filaments, numbering filaments in order."""
    chains = [p[0] for p in parts]
    layouts = [p[1] for p in parts]
    n_fil = np.array([lay.n_filaments for lay in layouts], dtype=np.int64)
    n_seg = np.array([c.n_chords for c in chains], dtype=np.int64) * n_fil
    first = np.cumsum(n_fil) - n_fil

    def per_segment(values: list[NDArray], dtype: type) -> NDArray:
        return np.concatenate([np.repeat(v, c.n_chords) for v, c in zip(values, chains)]).astype(dtype) if parts else np.zeros(0, dtype)

    def stacked(name: str, shape: tuple[int, ...]) -> NDArray[np.float64]:
        return np.concatenate([getattr(c, name) for c in chains]) if parts else np.zeros(shape)

    index = np.arange(len(parts), dtype=np.int64)
    filaments = Filaments(
        starts=stacked("starts", (0, 3)),
        ends=stacked("ends", (0, 3)),
        weights=per_segment([turns * lay.shares for _, lay, turns in parts], np.float64),
        radii=per_segment([lay.radii for lay in layouts], np.float64),
        gmd=per_segment([lay.gmd for lay in layouts], np.float64),
        filament=per_segment([f + np.arange(k) for f, k in zip(first, n_fil)], np.int64),
        coil=np.repeat(index, n_seg),
        circuit=np.repeat(np.array(coil_circuit, dtype=np.int64), n_seg),
        t0=stacked("t0", (0,)),
        t1=stacked("t1", (0,)),
        n_circuits=n_circuits,
    )
    offsets = np.concatenate([lay.offsets for lay in layouts]) if parts else np.zeros((0, 2))
    return filaments, np.repeat(index, n_fil), offsets


def _check_chords(centre: NDArray[np.float64], grid: ChordGrid, size: float, name: str) -> None:
    lengths = np.linalg.norm(np.diff(centre, axis=0), axis=1)
    short = np.flatnonzero(lengths <= REPEATED_POINT_RTOL * size)
    if short.size:
        i = int(short[0])
        raise GeometryError(
            f"coil {name!r}: {short.size} chord(s) of zero length, the first over t = "
            f"[{grid.t[i]:.6g}, {grid.t[i + 1]:.6g}]; the path stands still there (check its expressions)"
        )


def _circuit_of(case: Case, coil: Coil) -> int:
    try:
        return case.circuit_index(coil.circuit)
    except KeyError:
        known = ", ".join(repr(c.name) for c in case.circuits) or "none"
        raise CaseError(f"circuit {coil.circuit!r} is not defined; known circuits: {known}", where=f"coil {coil.name!r}") from None


def _turns_of(coil: Coil) -> float:
    turns = float(coil.turns)
    if not math.isfinite(turns):
        raise CaseError(f"turns must be a finite number, got {coil.turns!r}", where=f"coil {coil.name!r}")
    return turns


def _check_settings(settings: Discretisation) -> None:
    if not (isinstance(settings.section_refinement, int) and settings.section_refinement >= 1):
        raise DiscretisationError(f"section_refinement must be a whole number >= 1, got {settings.section_refinement!r}")
    if settings.sagitta is not None and not (math.isfinite(settings.sagitta) and settings.sagitta > 0.0):
        raise DiscretisationError(f"discretisation sagitta must be finite and > 0 m, got {settings.sagitta!r}")
    fraction = settings.sagitta_fraction
    if not (math.isfinite(fraction) and 0.0 < fraction < 1.0):
        raise DiscretisationError(f"discretisation sagitta_fraction must be in (0, 1), got {fraction!r}")
