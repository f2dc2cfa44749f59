"""Field of a discretised case integrated along the exact conductor paths.

Chords on straight pieces are exact: each becomes a straight element (integrated by the same
rules, with the closed form on the conductor). Every chord on a curved piece becomes a curved
element: the exact path of its filament over the chord's
parameter interval (the centre line moved across the section along the section frame),
sampled at Gauss-Legendre nodes; :mod:`fieldenergy.kernels._exact_path` integrates the
Biot-Savart law along it (Gauss rules away from the conductor, subdivided near it, closed-form
sub-chords on it). Circles are thus circles, not polygons.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.fields import _check_finite_result, _points
from fieldenergy.geometry import Curve, coil_instances, mapped_direction, section_frame
from fieldenergy.kernels._exact_path import exact_path_field
from fieldenergy.model import Case, FilamentModel

#: Gauss-Legendre points per curved element (rule error ~ 8.1^-16 ~ 3e-15 at two element sizes).
GAUSS_ORDER: int = 8

#: A point farther than this many element sizes from an element gets the plain Gauss rule;
#: closer, the element is subdivided so that every piece is again this far away.
FAR_RATIO: float = 2.0

#: Most sub-intervals per element; closer points (on the conductor) get as many closed-form
#: sub-chords, whose sagitta is 1/MAX_SUBDIVISIONS^2 of the element's.
MAX_SUBDIVISIONS: int = 64

#: A curved element's end is joined to its segment's end by a straight jog when they are
#: farther apart than this fraction of the segment (only at corners: see exact_elements).
JOG_TOLERANCE: float = 1.0e-9

#: Points per kernel call: bounds scratch memory and paces progress reports.
CHUNK_POINTS: int = 32768

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True, eq=False)
class ExactElements:
    """The elements of a model: each chord's exact path sampled at Gauss nodes.

    Attributes
    ----------
    nodes
        Positions at the Gauss nodes, shape (n, q, 3), m.
    tang
        Current times d position / ds at the nodes (s in [-1, 1]) in columns 0-2 and the
        element current (A) in column 3, shape (n, q, 4).
    ends
        The chord of each element (start in columns 0-2, end in 3-5), shape (n, 6), m.
    sag
        Largest distance of each element's path from its chord (5 % margin), shape (n,), m.
    radii
        Core radius of each element, shape (n,), m.
    order
        Gauss points per element.
    """

    nodes: Array
    tang: Array
    ends: Array
    sag: Array
    radii: Array
    order: int


def gauss_rule(order: int) -> tuple[Array, Array, Array, Array]:
    """Gauss-Legendre nodes and weights on [-1, 1], barycentric weights and differentiation matrix."""
    x, w = np.polynomial.legendre.leggauss(order)
    diff = x[:, None] - x[None, :]
    np.fill_diagonal(diff, 1.0)
    bary = 1.0 / diff.prod(axis=1)
    d = (bary[None, :] / bary[:, None]) / diff
    np.fill_diagonal(d, 0.0)
    np.fill_diagonal(d, -d.sum(axis=1))
    return x, w, bary, d


def exact_elements(case: Case, model: FilamentModel, order: int = GAUSS_ORDER) -> ExactElements:
    """The curved and straight elements of a discretised case at its circuit currents.

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, CirclePath, RoundSection
    >>> from fieldenergy.discretise import discretise
    >>> coil = Coil("ring", "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, 0], [0, 0, 1]))
    >>> case = Case("demo", (Circuit("c", 1.0),), (coil,))
    >>> el = exact_elements(case, discretise(case))
    >>> el.nodes.shape
    (94, 8, 3)
    """
    fil = model.filaments
    currents = fil.currents(case.currents)
    xg = gauss_rule(order)[0]
    references = _instance_references(case)
    parts: list[tuple[Array, Array, Array]] = []
    straight_mask = np.zeros(fil.n_segments, dtype=bool)
    for c, curve_of_coil in enumerate(model.curves):
        curve = cast(Curve, curve_of_coil)
        idx = np.flatnonzero(fil.coil == c)
        mid = 0.5 * (fil.t0[idx] + fil.t1[idx])
        piece = curve.piece_of(mid)
        is_straight = np.asarray(curve.straight)[piece]
        straight_mask[idx[is_straight]] = True
        idx, piece = idx[~is_straight], piece[~is_straight]
        if len(idx) == 0:
            continue
        half = 0.5 * (fil.t1[idx] - fil.t0[idx])
        # Gauss nodes, then the two ends of each element's parameter interval
        t = mid[~is_straight][:, None] + half[:, None] * np.concatenate([xg, [-1.0, 1.0]])[None, :]
        q = order + 2
        p = np.repeat(piece, q)
        pos = curve.position(t.ravel(), p)
        offset = model.filament_offset[fil.filament[idx]]
        if np.any(offset != 0.0):
            e_w, e_h = section_frame(curve, t.ravel(), references[c], p)
            pos = pos + np.repeat(offset[:, 0], q)[:, None] * e_w + np.repeat(offset[:, 1], q)[:, None] * e_h
        pos = pos.reshape(len(idx), q, 3)
        nodes = pos[:, :order]
        parts.append((nodes, currents[idx], fil.radii[idx]))
        # Where the path has a corner, a filament off the centre line turns it at the mitre
        # point (the model's segment end), not where its offset path ends: a straight jog
        # joins the two, so the current path is continuous (as the model's chords are, in
        # their limit). Elsewhere the two points agree to rounding and no jog is added.
        for own, exact, sign in ((fil.starts[idx], pos[:, order], 1.0), (fil.ends[idx], pos[:, order + 1], -1.0)):
            gap = np.linalg.norm(own - exact, axis=1)
            jog = gap > JOG_TOLERANCE * np.linalg.norm(fil.ends[idx] - fil.starts[idx], axis=1)
            if jog.any():
                a, b = (own[jog], exact[jog]) if sign > 0 else (exact[jog], own[jog])
                d = b - a
                jog_nodes = a[:, None, :] + 0.5 * (1.0 + xg)[None, :, None] * d[:, None, :]
                parts.append((jog_nodes, currents[idx][jog], fil.radii[idx][jog]))
    s = straight_mask
    d = fil.ends[s] - fil.starts[s]
    parts.append((fil.starts[s][:, None, :] + 0.5 * (1.0 + xg)[None, :, None] * d[:, None, :], currents[s], fil.radii[s]))
    return _elements(parts, order)


def straight_elements(starts: Array, ends: Array, currents: Array, radii: Array, order: int = GAUSS_ORDER) -> ExactElements:
    """Straight elements of segments (n, 3) -> (n, 3) m with currents (A) and core radii (m).

    Their field is that of the segments (the kernels integrate straight elements exactly,
    with the same finite-core rule as :mod:`fieldenergy.kernels._biot_savart`).
    """
    xg = gauss_rule(order)[0]
    d = np.asarray(ends, dtype=np.float64) - starts
    nodes = np.asarray(starts, dtype=np.float64)[:, None, :] + 0.5 * (1.0 + xg)[None, :, None] * d[:, None, :]
    return _elements([(nodes, np.asarray(currents, dtype=np.float64), np.asarray(radii, dtype=np.float64))], order)


def _elements(parts: list[tuple[Array, Array, Array]], order: int) -> ExactElements:
    """ExactElements from (nodes (n, q, 3), currents (n,), radii (n,)) groups."""
    _, _, _, dmat = gauss_rule(order)
    nodes = np.concatenate([p[0] for p in parts])
    cur = np.concatenate([p[1] for p in parts])
    radii = np.concatenate([p[2] for p in parts])
    tang = np.empty((len(nodes), order, 4))
    tang[:, :, :3] = np.einsum("ij,ejk->eik", dmat, nodes) * cur[:, None, None]
    tang[:, :, 3] = cur[:, None]
    ends, sag = _chords(nodes, order)
    return ExactElements(np.ascontiguousarray(nodes), tang, ends, sag, np.ascontiguousarray(radii), order)


def exact_field(
    points: ArrayLike,
    elements: ExactElements,
    *,
    max_subdivisions: int = MAX_SUBDIVISIONS,
    progress: Callable[[int], None] | None = None,
) -> tuple[Array, Array]:
    """B (T) and A (T m) at points (m, shape (m, 3)) of the elements, summed directly.

    Raises
    ------
    GeometryError
        For bad points, or a point on a zero-radius conductor.
    """
    pts = _points(points)
    xg, wg, bary, _ = gauss_rule(elements.order)
    b = np.zeros((len(pts), 3))
    a = np.zeros((len(pts), 3))
    for i0 in range(0, len(pts), CHUNK_POINTS):
        i1 = min(len(pts), i0 + CHUNK_POINTS)
        if len(elements.nodes):
            exact_path_field(pts[i0:i1], elements.nodes, elements.tang, elements.ends, elements.sag,
                             elements.radii, xg, wg, bary, FAR_RATIO, max_subdivisions, b[i0:i1], a[i0:i1])
        if progress is not None:
            progress(i1)
    _check_finite_result(b, pts)
    return b, a


def _chords(nodes: Array, order: int) -> tuple[Array, Array]:
    """Chord (s = -1 to 1) of each element's interpolated path and the path's largest distance from it."""
    xg, _, bary, _ = gauss_rule(order)
    s = np.linspace(-1.0, 1.0, 2 * order + 1)
    diff = s[:, None] - xg[None, :]
    exact = np.isclose(diff, 0.0, atol=1e-15)
    diff[exact] = 1.0
    basis = bary[None, :] / diff
    basis /= basis.sum(axis=1, keepdims=True)
    hit = exact.any(axis=1)
    basis[hit] = exact[hit].astype(float)
    samples = np.einsum("sj,ejk->esk", basis, nodes)
    a, b = samples[:, :1], samples[:, -1:]
    d = b - a
    f = np.clip(np.einsum("esk,eik->es", samples - a, d) / np.einsum("eik,eik->ei", d, d), 0.0, 1.0)
    sag = np.linalg.norm(samples - a - f[:, :, None] * d, axis=2).max(axis=1) * 1.05
    return np.ascontiguousarray(np.concatenate([a[:, 0], b[:, 0]], axis=1)), sag


def _instance_references(case: Case) -> list[NDArray[np.float64] | None]:
    """The section reference direction of each coil instance, as seen on the moved curve."""
    out: list[NDArray[np.float64] | None] = []
    for coil in case.coils:
        for _, curve in coil_instances(coil):
            out.append(None if coil.reference is None else mapped_direction(curve, coil.reference))
    return out
