"""Biot-Savart field of curved current elements integrated along their exact path.

Each curved element is one piece of a filament's exact path, parametrised by s in [-1, 1]
and given by its positions r_i at the q Gauss-Legendre nodes x_i, with ``tang`` the current
times dr/ds at the nodes. The path between the nodes is their interpolating polynomial of
degree q - 1 (barycentric form, Berrut & Trefethen, SIAM Review 46, 2004); for chords of a
few degrees on a smooth curve it reproduces the curve to rounding. The line integrals::

    B(p) = mu0/(4 pi) int I dr/ds x (p - r) / |p - r|^3 ds
    A(p) = mu0/(4 pi) int I dr/ds / |p - r| ds

are evaluated by three rules, chosen per (point, element) pair by a lower bound d of the
distance from the point to the element: its distance to the element's chord (from s = -1
to s = 1, of length h) less the largest distance ``sag`` of the path from that chord:

- far (d >= ratio h): the q-point Gauss-Legendre rule on the element;
- near (d >= ratio h / max_sub and d >= the core radius): the element is cut into k =
  ceil(ratio h / d) equal parameter intervals, each integrated with the q-point rule on the
  interpolant, so each interval is again "far" from the point;
- on the conductor (otherwise): the interpolant is cut into ``max_sub`` straight chords whose
  field is evaluated in closed form (Hanson & Hirshman, Phys. Plasmas 9, 4410 (2002)) with
  the finite-core rule of :mod:`fieldenergy.kernels._biot_savart` (the point is moved
  radially to the core radius; B then scales by rho / a inside the core).

The Gauss rule converges like rho^(-2q) with rho = 2d/h + sqrt((2d/h)^2 + 1) (the Bernstein
ellipse through the integrand's nearest complex singularity); with q = 8 and ratio = 1 a
single element is integrated to about 1e-10 relative.

On a zero-radius element, a point on the conductor gives a non-finite result; callers
detect that. ``prange`` runs over points: each thread writes only its own output rows.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from fieldenergy.constants import MU0_OVER_4PI


@njit(cache=True, inline="always")
def _interpolant(s, e, nodes, tang, xg, bary, q):
    """Position and current-weighted derivative (I dr/ds) of element e at s (barycentric)."""
    for i in range(q):
        if abs(s - xg[i]) < 1e-15:
            return (nodes[e, i, 0], nodes[e, i, 1], nodes[e, i, 2],
                    tang[e, i, 0], tang[e, i, 1], tang[e, i, 2])
    nx = ny = nz = dnx = dny = dnz = 0.0
    den = dden = 0.0
    for i in range(q):
        c = bary[i] / (s - xg[i])
        c2 = c / (s - xg[i])
        den += c
        dden -= c2
        nx += c * nodes[e, i, 0]
        ny += c * nodes[e, i, 1]
        nz += c * nodes[e, i, 2]
        dnx -= c2 * nodes[e, i, 0]
        dny -= c2 * nodes[e, i, 1]
        dnz -= c2 * nodes[e, i, 2]
    px, py, pz = nx / den, ny / den, nz / den
    cur = tang[e, 0, 3]
    return (px, py, pz,
            cur * (dnx - px * dden) / den, cur * (dny - py * dden) / den, cur * (dnz - pz * dden) / den)


@njit(cache=True, inline="always")
def _point_source(px, py, pz, rx, ry, rz, tx, ty, tz, w, acc):
    """Add w * (t x (p - r)) / |p - r|^3 to acc[0:3] and w * t / |p - r| to acc[3:6]."""
    dx, dy, dz = px - rx, py - ry, pz - rz
    inv = 1.0 / math.sqrt(dx * dx + dy * dy + dz * dz)
    inv3 = w * inv * inv * inv
    acc[0] += (ty * dz - tz * dy) * inv3
    acc[1] += (tz * dx - tx * dz) * inv3
    acc[2] += (tx * dy - ty * dx) * inv3
    acc[3] += w * tx * inv
    acc[4] += w * ty * inv
    acc[5] += w * tz * inv


@njit(cache=True, inline="always")
def _chord(px, py, pz, ax, ay, az, bx, by, bz, cur, rad, acc):
    """Closed-form B and A (over mu0/4pi) of a straight chord a -> b with a round core."""
    dx, dy, dz = bx - ax, by - ay, bz - az
    ux, uy, uz = px - ax, py - ay, pz - az
    vx, vy, vz = px - bx, py - by, pz - bz
    ll = dx * dx + dy * dy + dz * dz
    cx, cy, cz = dy * uz - dz * uy, dz * ux - dx * uz, dx * uy - dy * ux
    cc = cx * cx + cy * cy + cz * cz
    rho2 = cc / ll
    ext = max(0.0, rad * rad - rho2)
    ri = math.sqrt(ux * ux + uy * uy + uz * uz + ext)
    rf = math.sqrt(vx * vx + vy * vy + vz * vz + ext)
    uv = ux * vx + uy * vy + uz * vz + ext
    den = ri * rf + uv if uv >= 0.0 else ll * (rho2 + ext) / (ri * rf - uv)
    length = math.sqrt(ll)
    f = cur * (ri + rf) / (ri * rf * den)
    acc[0] += f * cx
    acc[1] += f * cy
    acc[2] += f * cz
    g = cur * math.log1p(length * (ri + rf + length) / den) / length
    if ext > 0.0:
        du = dx * ux + dy * uy + dz * uz
        dv = dx * vx + dy * vy + dz * vz
        g += cur * (1.0 - rho2 / (rad * rad)) * 0.5 * (du / ri - dv / rf) / ll
    acc[3] += g * dx
    acc[4] += g * dy
    acc[5] += g * dz


@njit(cache=True, inline="always")
def _distance(px, py, pz, ends, e):
    """Distance from p to the chord ends[e, 0:3] -> ends[e, 3:6], and the chord's length."""
    dx, dy, dz = ends[e, 3] - ends[e, 0], ends[e, 4] - ends[e, 1], ends[e, 5] - ends[e, 2]
    ux, uy, uz = px - ends[e, 0], py - ends[e, 1], pz - ends[e, 2]
    ll = dx * dx + dy * dy + dz * dz
    f = min(1.0, max(0.0, (ux * dx + uy * dy + uz * dz) / ll))
    ux, uy, uz = ux - f * dx, uy - f * dy, uz - f * dz
    return math.sqrt(ux * ux + uy * uy + uz * uz), math.sqrt(ll)


@njit(cache=True)
def _element(px, py, pz, e, nodes, tang, ends, sag, radii, xg, wg, bary, ratio, max_sub, acc):
    """Add element e's B and A (over mu0/4pi) at p to acc, choosing the rule by distance."""
    q = len(xg)
    d, h = _distance(px, py, pz, ends, e)
    d -= sag[e]
    if d >= ratio * h:
        for i in range(q):
            _point_source(px, py, pz, nodes[e, i, 0], nodes[e, i, 1], nodes[e, i, 2],
                          tang[e, i, 0], tang[e, i, 1], tang[e, i, 2], wg[i], acc)
        return
    if d * max_sub >= ratio * h and d >= radii[e]:
        k = math.ceil(ratio * h / d)
        for j in range(k):
            for i in range(q):
                s = -1.0 + (2.0 * j + xg[i] + 1.0) / k
                rx, ry, rz, tx, ty, tz = _interpolant(s, e, nodes, tang, xg, bary, q)
                _point_source(px, py, pz, rx, ry, rz, tx, ty, tz, wg[i] / k, acc)
        return
    ax, ay, az, tx, ty, tz = _interpolant(-1.0, e, nodes, tang, xg, bary, q)
    cur = tang[e, 0, 3]
    for j in range(max_sub):
        bx, by, bz, tx, ty, tz = _interpolant(-1.0 + 2.0 * (j + 1) / max_sub, e, nodes, tang, xg, bary, q)
        _chord(px, py, pz, ax, ay, az, bx, by, bz, cur, radii[e], acc)
        ax, ay, az = bx, by, bz


@njit(cache=True, parallel=True)
def exact_path_field(points, nodes, tang, ends, sag, radii, xg, wg, bary, ratio, max_sub, b_out, a_out):
    """B (T) and A (T m) of curved elements at points, filling b_out and a_out.

    Parameters (float64, C-contiguous): points (m, 3); nodes (n, q, 3) positions at the
    Gauss nodes; tang (n, q, 4): I dr/ds at the nodes in columns 0-2 and the element
    current I (A) in column 3; ends (n, 6) the chord from s = -1 to s = 1; sag (n,) the
    largest distance of the path from that chord; radii (n,)
    core radii; xg, wg, bary (q,) Gauss nodes, weights and barycentric weights on
    [-1, 1]; ratio (float) the far-field distance in element sizes; max_sub (int) the
    most sub-intervals before the closed-form chords take over; b_out, a_out (m, 3).
    """
    m = points.shape[0]
    n = nodes.shape[0]
    for t in prange(m):
        acc = np.zeros(6)
        px, py, pz = points[t, 0], points[t, 1], points[t, 2]
        for e in range(n):
            _element(px, py, pz, e, nodes, tang, ends, sag, radii, xg, wg, bary, ratio, max_sub, acc)
        for c in range(3):
            b_out[t, c] = MU0_OVER_4PI * acc[c]
            a_out[t, c] = MU0_OVER_4PI * acc[3 + c]
