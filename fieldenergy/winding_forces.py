"""The Lorentz force per unit length along every winding, in the field of all coils, own field included.

Each straight filament segment (the exact geometry of a straight piece of path) is cut into
pieces no longer than PIECE_SPACING section sizes, so a busbar's corners are resolved; a chord
of a curved piece is one piece, sampled at its midpoint only, since its ends are corners of
the model's polygon where the field is too high by about the turning angle. The force per
unit length is I t x B at each piece's midpoint, with B the field of *all* coils. The own
field is the finite-core field of the kernel: at a point on a segment's axis the segment
itself contributes nothing (the uniform-current core field vanishes there) and the
neighbouring segments give the field of the bend, regularised inside their cores. For a
curved conductor this is the hoop force on the centre line of a conductor of finite section:
finite, and for a thin ring of wire radius a close to mu0 I^2 / (4 pi R) (ln(8R/a) + O(1)),
where a line current would give an infinite value. The O(1) term depends on how the force is
averaged over the section and is not resolved by this centre-line model: on a thin ring it
lies within a few per cent below virtual work on the whole section (the tests measure it).
The sum of the distribution over a closed coil (its net self-force, zero for the conductor)
is a sampling error of this model that shrinks with refinement.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.fields import segment_field
from fieldenergy.model.case import RoundSection
from fieldenergy.model.filaments import FilamentModel

#: Longest piece a segment is cut into, in section sizes (the scale on which the force density
#: changes next to a corner).
PIECE_SPACING: float = 1.0

#: Most pieces per segment (a long straight run of a thin conductor).
MAX_PIECES: int = 256

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True, eq=False)
class ForceDistribution:
    """Lorentz force along the windings, own field included, on pieces of the filament segments.

    Attributes
    ----------
    starts, ends
        The pieces, shape (n_pieces, 3), m; pieces of one segment follow each other.
    segment
        Index of the filament segment each piece belongs to, shape (n_pieces,).
    per_length
        Force per unit length on each piece (this filament), shape (n_pieces, 3), N/m.
    winding_per_length
        Force per unit length of the whole winding at each piece (the sum over the section's
        filaments at the same place), repeated on each filament's piece, shape (n_pieces, 3), N/m.
    peak, peak_location, peak_coil
        The largest |winding_per_length| (N/m), where it occurs (m, the mean of the filaments'
        piece midpoints) and its coil instance index (-1 for a model with no segments).
    """

    starts: Array
    ends: Array
    segment: NDArray[np.int64]
    per_length: Array
    winding_per_length: Array
    peak: float
    peak_location: Array
    peak_coil: int


def force_distribution(model: FilamentModel, circuit_currents: ArrayLike) -> ForceDistribution:
    """Force per unit length along every winding in the field of all coils, own field included.

    See the module docstring for what the own-field part means for a curved conductor.

    Parameters
    ----------
    model
        The discretised case.
    circuit_currents
        Terminal current of each circuit, shape (n_circuits,), A.

    Returns
    -------
    ForceDistribution

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, RoundSection, CirclePath
    >>> from fieldenergy.discretise import discretise
    >>> ring = Coil("ring", "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> dist = force_distribution(discretise(Case("ring", (Circuit("c", 1e3),), (ring,))), [1e3])
    >>> round(dist.peak, 1)    # hoop force; virtual work on the whole section gives 5.9
    5.4
    """
    fil = model.filaments
    currents = fil.currents(np.asarray(circuit_currents, dtype=np.float64))
    n_pieces = _pieces(model)
    parent = np.repeat(np.arange(fil.n_segments), n_pieces)
    k = np.arange(len(parent)) - np.repeat(np.cumsum(n_pieces) - n_pieces, n_pieces)
    d = fil.ends - fil.starts
    starts = fil.starts[parent] + (k / n_pieces[parent])[:, None] * d[parent]
    ends = fil.starts[parent] + ((k + 1) / n_pieces[parent])[:, None] * d[parent]
    live = currents != 0.0
    b = segment_field(
        0.5 * (starts + ends), fil.starts[live], fil.ends[live], currents[live], fil.radii[live], want_a=False
    )
    unit = d / np.linalg.norm(d, axis=1)[:, None]
    per_length = currents[parent, None] * np.cross(unit[parent], b)
    winding, centre = _winding_sum(model, parent, starts, ends, per_length)
    magnitude = np.linalg.norm(winding, axis=1)
    i = int(np.argmax(magnitude)) if len(magnitude) else -1
    return ForceDistribution(
        starts=starts,
        ends=ends,
        segment=parent,
        per_length=per_length,
        winding_per_length=winding,
        peak=float(magnitude[i]) if i >= 0 else 0.0,
        peak_location=centre[i] if i >= 0 else np.zeros(3),
        peak_coil=int(fil.coil[parent[i]]) if i >= 0 else -1,
    )


def _pieces(model: FilamentModel) -> NDArray[np.int64]:
    """Pieces of each segment (one on curved chords): the same for every filament at one chord."""
    fil = model.filaments
    out = np.ones(fil.n_segments, dtype=np.int64)
    n_fil = np.bincount(model.filament_coil, minlength=len(model.coil_names))
    length = np.linalg.norm(fil.ends - fil.starts, axis=1)
    for c, section in enumerate(model.coil_sections):
        rows = np.flatnonzero(fil.coil == c)
        chord = length[rows].reshape(int(n_fil[c]), -1).mean(axis=0)
        n_chords = len(chord)
        curve = model.curves[c]
        mid_t = 0.5 * (fil.t0[rows[:n_chords]] + fil.t1[rows[:n_chords]])
        straight = np.asarray(curve.straight)[curve.piece_of(mid_t)]  # type: ignore[attr-defined]
        size = 2.0 * section.radius if isinstance(section, RoundSection) else max(section.width, section.height)  # type: ignore[attr-defined]
        per_chord = np.where(straight, np.clip(np.ceil(chord / (PIECE_SPACING * size)), 1, MAX_PIECES), 1).astype(
            np.int64
        )
        out[rows] = np.tile(per_chord, int(n_fil[c]))
    return out


def _winding_sum(
    model: FilamentModel, parent: NDArray[np.int64], starts: Array, ends: Array, per_length: Array
) -> tuple[Array, Array]:
    """Winding force per unit length (sum over a section's filaments) and the place it acts, per piece."""
    piece_coil = model.filaments.coil[parent]
    length = np.linalg.norm(ends - starts, axis=1)
    mid = 0.5 * (starts + ends)
    winding = np.zeros_like(per_length)
    centre = np.zeros_like(mid)
    n_fil = np.bincount(model.filament_coil, minlength=len(model.coil_names))
    for c in range(len(model.coil_names)):
        rows = np.flatnonzero(piece_coil == c)
        k = int(n_fil[c])
        force = (per_length[rows] * length[rows, None]).reshape(k, -1, 3).sum(axis=0)
        along = length[rows].reshape(k, -1).mean(axis=0)
        winding[rows] = np.tile(force / along[:, None], (k, 1))
        centre[rows] = np.tile(mid[rows].reshape(k, -1, 3).mean(axis=0), (k, 1))
    return winding, centre
