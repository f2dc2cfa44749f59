"""Lorentz forces on the conductors: the net force and torque on each coil from the other coils.

Net force and torque. The force on coil c is the line integral of I dl x B over its filament
segments, with B the field of every *other* coil (a rigid closed coil exerts no net force or
torque on itself). Each segment is integrated by Gauss-Legendre quadrature, whose order grows
with the ratio of the segment's length to its distance from the nearest source segment, so
that neighbouring coils are integrated as accurately as distant ones::

    F_seg = I_seg sum_q w_q (d x B(s + x_q d)),   tau_seg = sum_q (p_q - o) x dF_q

with d = end - start, (x_q, w_q) the Gauss-Legendre rule on [0, 1] and o the point the torque
is taken about (the coil's centroid unless given).

The force along a winding, own field included, is in :mod:`fieldenergy.winding_forces`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.spatial import cKDTree

from fieldenergy.errors import GeometryError
from fieldenergy.fields import segment_field
from fieldenergy.model.filaments import FilamentModel, Filaments

#: Gauss-Legendre order per unit of (segment length / distance to the nearest source): the
#: rule's error falls geometrically with the order at a rate set by that ratio, so the order
#: grows with it; 3 per unit ratio keeps Newton's third law between coils to 1e-7 and the
#: virtual-work forces to 2e-5 in the tests (the latter limited by the difference quotient).
ORDER_PER_RATIO: float = 3.0

#: Fewest and most Gauss-Legendre points on one piece of a segment.
MIN_ORDER: int = 2
MAX_ORDER: int = 16

#: Largest length-to-gap ratio of one piece: a longer segment is cut into equal pieces, so the
#: order stays below MIN_ORDER + 3 * 4 = 14 points.
MAX_RATIO_PER_PIECE: float = 4.0

#: Most pieces per segment (touching conductors: their gap is floored, see MIN_GAP_FRACTION).
MAX_PIECES: int = 64

#: Floor of the gap as a fraction of the segment length, for conductors that touch; there the
#: finite cores keep the integrand bounded and the composite rule still converges.
MIN_GAP_FRACTION: float = 1.0e-2

Array = NDArray[np.float64]


@dataclass(frozen=True, slots=True, eq=False)
class CoilForces:
    """Net force and torque on each coil instance from the other coils.

    Attributes
    ----------
    force
        Net force on each coil instance, shape (n_coils, 3), N.
    torque
        Net torque about ``about``, shape (n_coils, 3), N m.
    about
        Point each torque is taken about, shape (n_coils, 3), m.
    """

    force: Array
    torque: Array
    about: Array


def coil_centroids(model: FilamentModel) -> Array:
    """Centroid of each coil instance's conductor (length-weighted segment midpoints), shape (n_coils, 3), m."""
    fil = model.filaments
    n = len(model.coil_names)
    mid = 0.5 * (fil.starts + fil.ends)
    w = np.linalg.norm(fil.ends - fil.starts, axis=1)
    total = np.bincount(fil.coil, weights=w, minlength=n)
    out = np.stack([np.bincount(fil.coil, weights=w * mid[:, i], minlength=n) for i in range(3)], axis=1)
    return out / np.where(total > 0, total, 1.0)[:, None]


def coil_forces(model: FilamentModel, circuit_currents: ArrayLike, about: ArrayLike | None = None) -> CoilForces:
    """Net Lorentz force and torque on every coil instance from all other coils.

    Parameters
    ----------
    model
        The discretised case.
    circuit_currents
        Terminal current of each circuit, shape (n_circuits,), A.
    about
        Point (3,) or one point per coil (n_coils, 3) to take torques about, m; the coils'
        centroids if omitted.

    Returns
    -------
    CoilForces

    Examples
    --------
    >>> from fieldenergy.model import Case, Circuit, Coil, RoundSection, CirclePath
    >>> from fieldenergy.discretise import discretise
    >>> loops = tuple(Coil(n, "c", RoundSection(1e-3), CirclePath(0.1, [0, 0, z], [0, 0, 1]))
    ...               for n, z in (("a", 0.0), ("b", 0.05)))
    >>> model = discretise(Case("pair", (Circuit("c", 100.0),), loops))
    >>> f = coil_forces(model, [100.0]).force
    >>> bool(f[0, 2] > 0), bool(abs(f[0, 2] + f[1, 2]) < 1e-9 * abs(f[0, 2]))  # attract; Newton 3
    (True, True)
    """
    fil = model.filaments
    n_coils = len(model.coil_names)
    currents = fil.currents(np.asarray(circuit_currents, dtype=np.float64))
    origin = _about(model, about)
    force = np.zeros((n_coils, 3))
    torque = np.zeros((n_coils, 3))
    for c in range(n_coils):
        target = fil.coil == c
        source = (~target) & (currents != 0.0)
        if not source.any() or not np.any(currents[target]):
            continue
        f, t = segment_forces(fil, currents, target, source, origin[c])
        force[c], torque[c] = f.sum(axis=0), t.sum(axis=0)
    return CoilForces(force=force, torque=torque, about=origin)


def segment_forces(
    filaments: Filaments, currents: Array, target: NDArray[np.bool_], source: NDArray[np.bool_], about: Array
) -> tuple[Array, Array]:
    """Force (N) and torque about ``about`` (N m) on each target segment from the source segments.

    ``currents`` are segment currents (A); ``target`` and ``source`` boolean masks over the
    segments. A segment long compared with its distance to the sources is cut into pieces,
    each integrated by its own rule. Returns two arrays of shape (n_target, 3).
    """
    s, e, cur = filaments.starts[target], filaments.ends[target], currents[target]
    src = (filaments.starts[source], filaments.ends[source], currents[source], filaments.radii[source])
    pieces, orders = _rules(s, e, src[0], src[1])
    parent = np.repeat(np.arange(len(s)), pieces)
    k = np.arange(len(parent)) - np.repeat(np.cumsum(pieces) - pieces, pieces)
    frac0, frac1 = (k / pieces[parent])[:, None], ((k + 1) / pieces[parent])[:, None]
    d = e - s
    ps, pe = s[parent] + frac0 * d[parent], s[parent] + frac1 * d[parent]
    piece_order = orders[parent]
    force = np.zeros((len(s), 3))
    torque = np.zeros((len(s), 3))
    for order in np.unique(piece_order):
        rows = np.flatnonzero(piece_order == order)
        f, t = _gauss(ps[rows], pe[rows], cur[parent[rows]], src, int(order), about)
        np.add.at(force, parent[rows], f)
        np.add.at(torque, parent[rows], t)
    return force, torque


def _gauss(s: Array, e: Array, cur: Array, src: tuple[Array, ...], order: int, about: Array) -> tuple[Array, Array]:
    x, w = np.polynomial.legendre.leggauss(order)
    x, w = 0.5 * (x + 1.0), 0.5 * w
    d = e - s
    pts = s[:, None, :] + x[None, :, None] * d[:, None, :]
    b = segment_field(pts.reshape(-1, 3), *src, want_a=False).reshape(pts.shape)
    df = (cur[:, None] * w[None, :])[:, :, None] * np.cross(d[:, None, :], b)
    return df.sum(axis=1), np.cross(pts - about, df).sum(axis=1)


def _rules(s: Array, e: Array, src_s: Array, src_e: Array) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Pieces and Gauss-Legendre order of each target segment, from its length over its source gap.

    The gap is a lower bound on the distance from any point of the segment to any source: the
    distance from the segment's midpoint to the nearest sample of the sources (spaced at most
    ``h``), less h/2 and less half the segment's length.
    """
    length = np.linalg.norm(e - s, axis=1)
    h = float(np.median(length))
    src_len = np.linalg.norm(src_e - src_s, axis=1)
    n_samples = np.ceil(src_len / h).astype(np.int64) + 1
    owner = np.repeat(np.arange(len(src_s)), n_samples)
    frac = (np.arange(len(owner)) - np.repeat(np.cumsum(n_samples) - n_samples, n_samples)) / (n_samples[owner] - 1)
    samples = src_s[owner] + frac[:, None] * (src_e - src_s)[owner]
    dist, _ = cKDTree(samples).query(0.5 * (s + e))
    gap = np.maximum(dist - 0.5 * h - 0.5 * length, MIN_GAP_FRACTION * length)
    ratio = length / gap
    pieces = np.clip(np.ceil(ratio / MAX_RATIO_PER_PIECE), 1, MAX_PIECES).astype(np.int64)
    order = np.ceil(MIN_ORDER + ORDER_PER_RATIO * ratio / pieces)
    return pieces, np.clip(order, MIN_ORDER, MAX_ORDER).astype(np.int64)


def _about(model: FilamentModel, about: ArrayLike | None) -> Array:
    n = len(model.coil_names)
    if about is None:
        return coil_centroids(model)
    point = np.asarray(about, dtype=np.float64)
    if point.shape == (3,):
        point = np.broadcast_to(point, (n, 3))
    if point.shape != (n, 3) or not np.isfinite(point).all():
        raise GeometryError(
            f"torque reference must be a finite point (3,) or one per coil ({n}, 3), got shape {point.shape}"
        )
    return np.array(point)
