"""The largest |B| on each conductor's surface: the figure compared with a conductor's critical field.

The surface is sampled around the chords of the centre line (the conductor the field comes
from), across the section frame ``(e_w, e_h)`` of :func:`fieldenergy.geometry.section_frame`:
a round conductor on a ring of points at its radius, a rectangular pack on the outer boundary
of the whole rectangle (the field of a winding pack is largest on its outside, usually at a
corner or an edge's middle).
A coarse pass samples rings of boundary points along the path and the centre-line |B| at
the same places; its best few candidates are then refined on shrinking local grids in
(t, position around the boundary). On a curved piece the samples stay at chord midpoints: a
chord's end is a corner of the model's polygon, where the field is too high by about the
turning angle (3 % at 6 degrees), an artefact of the chords and not of the conductor. Straight
chords are the exact geometry and are sampled all along, corners included. B is the field of
every coil, the conductor's own included, with the kernel's finite cores.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.fields import segment_field
from fieldenergy.geometry import section_frame
from fieldenergy.model.case import RectSection, RoundSection
from fieldenergy.model.filaments import FilamentModel

#: Boundary points per coarse ring; 12 puts 3 on each side of a rectangle, its corners included.
N_AROUND: int = 12

#: Boundary points per coarse ring of a round conductor: |B| varies smoothly round it (about
#: as the cosine of the angle to the external field), and the refinement finds the top.
N_AROUND_ROUND: int = 8

#: Candidate peaks taken from the coarse pass lie at least this many samples apart.
SUPPRESS_CHORDS: int = 2

#: Longest coarse step along a path, in section sizes (long straight chords are subdivided).
ALONG_SPACING: float = 1.0

#: Most rings of boundary points along one path in the coarse pass (thinned evenly beyond
#: this; the centre-line pass covers every coarse sample).
MAX_ALONG: int = 4096

#: Coarse candidates refined; several, because the coarse peak may sit on the wrong side of a
#: nearly symmetric winding.
N_CANDIDATES: int = 4

#: Local grid (points per direction) and number of shrinking refinement passes; each pass
#: shrinks the grid by REFINE_SHRINK, so three passes resolve the peak to ~1/30 of a coarse step.
REFINE_POINTS: int = 7
REFINE_PASSES: int = 3
REFINE_SHRINK: float = 3.0

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True, eq=False)
class PeakField:
    """Largest |B| on each coil instance's conductor surface.

    Attributes
    ----------
    value
        Largest |B| on each coil instance, shape (n_coils,), T.
    location
        Where it occurs, shape (n_coils, 3), m.
    """

    value: Array
    location: Array


def boundary_offsets(section: object, s: ArrayLike) -> Array:
    """Points (u, v) on a section's boundary at fractions ``s`` of the way round, shape (m, 2), m.

    Examples
    --------
    >>> boundary_offsets(RectSection(0.02, 0.01), [0.0, 0.25]).round(12).tolist()
    [[0.01, -0.005], [0.01, 0.005]]
    """
    s = np.mod(np.asarray(s, dtype=np.float64), 1.0)
    if isinstance(section, RoundSection):
        angle = 2.0 * np.pi * s
        return section.radius * np.stack([np.cos(angle), np.sin(angle)], axis=1)
    if not isinstance(section, RectSection):
        raise TypeError(f"unsupported section {type(section).__name__}")
    hw, hh = 0.5 * section.width, 0.5 * section.height
    # corners at s = 0, 1/4, 1/2, 3/4 in the order (+,-), (+,+), (-,+), (-,-); sides straight between
    corners = np.array([[hw, -hh], [hw, hh], [-hw, hh], [-hw, -hh], [hw, -hh]])
    k = np.minimum((4.0 * s).astype(np.int64), 3)
    frac = (4.0 * s - k)[:, None]
    return corners[k] + frac * (corners[k + 1] - corners[k])


def peak_field(
    model: FilamentModel,
    circuit_currents: ArrayLike,
    references: Sequence[ArrayLike | None] | None = None,
) -> PeakField:
    """Largest |B| on every coil instance's conductor surface, with its location.

    Parameters
    ----------
    model
        The discretised case (it carries the exact curves and sections).
    circuit_currents
        Terminal current of each circuit, shape (n_circuits,), A.
    references
        Section-frame reference direction of each coil instance (for non-planar paths, as in
        the discretisation), or ``None``.

    Returns
    -------
    PeakField

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, RoundSection, CirclePath
    >>> from fieldenergy.discretise import discretise
    >>> ring = Coil("ring", "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> pk = peak_field(discretise(Case("ring", (Circuit("c", 100.0),), (ring,))), [100.0])
    >>> round(float(pk.value[0]) * 1e3, 1)   # mu0 I / (2 pi a) = 20 mT, plus the bend's field inside
    20.6
    """
    fil = model.filaments
    currents = fil.currents(np.asarray(circuit_currents, dtype=np.float64))
    live = currents != 0.0
    sources = (fil.starts[live], fil.ends[live], currents[live], fil.radii[live])
    n = len(model.coil_names)
    refs = list(references) if references is not None else [None] * n
    value, location = np.zeros(n), np.zeros((n, 3))
    for c in range(n):
        value[c], location[c] = _coil_peak(model, c, sources, refs[c])
    return PeakField(value=value, location=location)


def _coil_peak(
    model: FilamentModel, c: int, sources: tuple[Array, ...], reference: ArrayLike | None
) -> tuple[float, Array]:
    """Peak |B| on one coil instance: coarse candidates, then all refined together (few kernel calls)."""
    fil = model.filaments
    rows = np.flatnonzero(fil.coil == c)
    n_chords = len(rows) // int(np.count_nonzero(model.filament_coil == c))
    t0, t1 = fil.t0[rows[:n_chords]], fil.t1[rows[:n_chords]]
    curve = model.curves[c]
    straight = np.asarray(curve.straight)[curve.piece_of(0.5 * (t0 + t1))]  # type: ignore[attr-defined]
    sampler = _Sampler(curve, model.coil_sections[c], sources, reference, np.append(t0, t1[-1]))
    length = np.linalg.norm(fil.ends[rows[:n_chords]] - fil.starts[rows[:n_chords]], axis=1)
    t, on_straight = _along(t0, t1, length, straight, model.coil_sections[c])
    tc, sc, best_b, best_p = _candidates(sampler, t, on_straight)
    k = np.clip(np.searchsorted(t0, tc, side="right") - 1, 0, n_chords - 1)
    lo, hi = t0[k][:, None, None], t1[k][:, None, None]
    # curved chords stay at their midpoints: a chord's end is a polygon corner of the model,
    # where the field is too high by O(turning angle); straight chords are exact geometry
    dt = np.where(
        straight[k],
        (t1 - t0)[k] / np.maximum(1, np.ceil(length[k] / (ALONG_SPACING * _size(model.coil_sections[c])))),
        0.0,
    )
    dt, ds = dt[:, None, None], 1.0 / _n_around(model.coil_sections[c])
    grid = np.linspace(-1.0, 1.0, REFINE_POINTS)
    for _ in range(REFINE_PASSES):
        tg = np.clip(tc[:, None, None] + dt * grid[None, :, None], lo, hi)
        sg = sc[:, None, None] + ds * grid[None, None, :]
        tg, sg = np.broadcast_arrays(tg, sg)
        b, pts = sampler(tg.ravel(), sg.ravel())
        b = b.reshape(len(tc), -1)
        j = np.argmax(b, axis=1)
        tc, sc = tg.reshape(len(tc), -1)[np.arange(len(tc)), j], sg.reshape(len(tc), -1)[np.arange(len(tc)), j]
        i = int(np.argmax(b.ravel()))
        if b.ravel()[i] > best_b:
            best_b, best_p = float(b.ravel()[i]), pts[i]
        dt, ds = dt / REFINE_SHRINK, ds / REFINE_SHRINK
    return best_b, best_p


def _size(section: object) -> float:
    """Largest dimension of a section (m)."""
    return 2.0 * section.radius if isinstance(section, RoundSection) else max(section.width, section.height)  # type: ignore[attr-defined]


def _n_around(section: object) -> int:
    """Boundary points per coarse ring."""
    return N_AROUND_ROUND if isinstance(section, RoundSection) else N_AROUND


def _along(
    t0: Array, t1: Array, length: Array, straight: NDArray[np.bool_], section: object
) -> tuple[Array, NDArray[np.bool_]]:
    """Coarse parameters along the path, and whether each lies on a straight chord: curved
    chords at their midpoints; straight chords cut into pieces no longer than ALONG_SPACING
    section sizes, sampled at the pieces' midpoints."""
    m = np.where(straight, np.maximum(1, np.ceil(length / (ALONG_SPACING * _size(section)))), 1).astype(np.int64)
    chord = np.repeat(np.arange(len(t0)), m)
    k = np.arange(len(chord)) - np.repeat(np.cumsum(m) - m, m)
    return t0[chord] + (t1 - t0)[chord] * (k + 0.5) / m[chord], straight[chord]


def _candidates(sampler: _Sampler, t: Array, on_straight: NDArray[np.bool_]) -> tuple[Array, Array, float, Array]:
    """The coarse pass: (t, s) of the candidates, and the best |B| and point seen so far.

    Candidates come from two samplings at the coarse parameters ``t``: rings of boundary points
    (on curved chords thinned evenly to at most MAX_ALONG rings; straight chords, where corners
    and leads are, are all kept), and the centre-line |B| at every one, which finds features
    the thinning may skip: the own field on the surface is nearly the same all along a
    conductor, so a surface peak usually sits where the centre-line field peaks. Candidates
    lie at least SUPPRESS_CHORDS samples apart.
    """
    n_around = _n_around(sampler.section)
    s = np.arange(n_around) / n_around
    centre = np.linalg.norm(segment_field(sampler.centre(t), *sampler.sources, want_a=False), axis=1)
    stride = -(-int(np.count_nonzero(~on_straight)) // MAX_ALONG)
    keep = on_straight | (np.arange(len(t)) % max(stride, 1) == 0)
    keep[_spread_maxima(centre, N_CANDIDATES)] = True
    t_ring = t[keep]
    b, pts = sampler(np.repeat(t_ring, n_around), np.tile(s, len(t_ring)))
    ring_max = b.reshape(len(t_ring), n_around).max(axis=1)
    pick = _spread_maxima(ring_max, 2 * N_CANDIDATES)
    best_s = s[np.argmax(b.reshape(len(t_ring), n_around)[pick], axis=1)]
    k = int(np.argmax(b))
    return t_ring[pick], best_s, float(b[k]), pts[k]


def _spread_maxima(values: Array, count: int) -> NDArray[np.int64]:
    """Indices of the ``count`` largest values that lie more than SUPPRESS_CHORDS apart."""
    picked: list[int] = []
    for i in np.argsort(values)[::-1]:
        if all(abs(int(i) - j) > SUPPRESS_CHORDS for j in picked):
            picked.append(int(i))
        if len(picked) == count:
            break
    return np.array(picked, dtype=np.int64)


class _Sampler:
    """|B| at surface points (t, s) of one coil instance.

    The surface is laid around the chords, not the exact curve: the field is that of the
    chords, and a point offset from the exact curve would sit up to a sagitta closer to (or
    further from) the conductor's own chord than its radius. The centre point at t is
    interpolated linearly on its chord; the section frame is the exact curve's at t.
    """

    def __init__(
        self, curve: object, section: object, sources: tuple[Array, ...], reference: ArrayLike | None, t_nodes: Array
    ) -> None:
        self.curve, self.section, self.sources, self.reference = curve, section, sources, reference
        self.t_nodes = t_nodes
        self.nodes = curve.position(t_nodes)  # type: ignore[attr-defined]

    def centre(self, t: Array) -> Array:
        """Points on the chords at parameters ``t``, shape (m, 3)."""
        k = np.clip(np.searchsorted(self.t_nodes, t, side="right") - 1, 0, len(self.t_nodes) - 2)
        f = ((t - self.t_nodes[k]) / (self.t_nodes[k + 1] - self.t_nodes[k]))[:, None]
        return (1.0 - f) * self.nodes[k] + f * self.nodes[k + 1]

    def __call__(self, t: Array, s: Array) -> tuple[Array, Array]:
        e_w, e_h = section_frame(self.curve, t, self.reference)  # type: ignore[arg-type]
        uv = boundary_offsets(self.section, s)
        pts = self.centre(t) + uv[:, :1] * e_w + uv[:, 1:] * e_h
        b = segment_field(pts, *self.sources, want_a=False)
        return np.linalg.norm(b, axis=1), pts
