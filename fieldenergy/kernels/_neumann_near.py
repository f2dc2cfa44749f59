"""Neumann integral of one near pair of straight segments: closed-form inner, graded outer.

For two segments i (outer, the shorter) and j (inner) the integral

    I_ij = int_i int_j ds dt / sqrt(r^2 + g^2)

is computed with the inner integral along j in closed form and the outer one along i by
composite Gauss-Legendre, on panels graded geometrically towards the points of i closest to
j and to j's end points (an hp-graded composite rule): every panel's nearest singularity then
lies outside a fixed Bernstein ellipse, so a fixed Gauss order per panel gives the requested
relative accuracy. Inputs are the (n, 7) ``geom`` array of :func:`segment_geometry`
(centre, unit tangent, half-length).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

#: Width ratio of consecutive panels in the grading towards a near point. With 0.25 the
#: nearest singularity of every panel lies outside its Bernstein ellipse of parameter 3.
_GRADING = 0.25

#: Safety factor on the per-panel Gauss error estimate C 3^(-2n) of the graded panels.
_NEAR_SAFETY = 10.0


#: Narrowest graded panel, relative to the outer segment's length, next to an end point shared
#: at g = 0 where the integrand is logarithmic: the Gauss error on that last panel, about
#: 1e-3 w |ln w| for width w, is then ~1e-12 of the pair integral.
_MIN_PANEL = 1e-10

#: Relative rounding level of a distance from a segment's line (a few units in the last place).
_ROUNDING = 1e-15


@njit(cache=True, error_model="numpy")
def panel_order(rel_tol):
    """Gauss order of one graded panel: smallest n with safety * 3^(-2n) <= rel_tol."""
    n = math.ceil(math.log(_NEAR_SAFETY / rel_tol) / (2.0 * math.log(3.0)))
    return min(max(n, 2), 40)


@njit(cache=True, error_model="numpy", inline="always")
def _line_integral(wx, wy, wz, geom, j, g2):
    """int dt / sqrt(|p - x(t)|^2 + g^2) along segment ``j``, in closed form; w = p - centre_j.

    = asinh(u/h) + asinh(v/h), with u, v the signed distances along the line from the
    projection of p to the segment's end and start, and h^2 = rho^2 + g^2 (rho the distance
    of p from the line). If p projects outside the segment one of u, v is negative and the
    two terms nearly cancel; the difference is then evaluated as
    log1p(l (1 + (f + e)/(r_f + r_e)) / (e + r_e)) with f > e >= 0 the distances to the far
    and near end, r_x = sqrt(x^2 + h^2) and l = f - e, which has no cancellation.
    """
    half = geom[j, 6]
    s = wx * geom[j, 3] + wy * geom[j, 4] + wz * geom[j, 5]
    cx = wy * geom[j, 5] - wz * geom[j, 4]
    cy = wz * geom[j, 3] - wx * geom[j, 5]
    cz = wx * geom[j, 4] - wy * geom[j, 3]
    # The floor stands for rounding in the distance from the line: it keeps a node that lies
    # on the line of j within rounding (near an end point shared at g = 0) from giving log(0).
    h2 = max(cx * cx + cy * cy + cz * cz + g2, (_ROUNDING * half) ** 2)
    u = half - s
    v = half + s
    if u >= 0.0 and v >= 0.0:
        return math.log((u + math.sqrt(u * u + h2)) * (v + math.sqrt(v * v + h2)) / h2)
    far = max(u, v)
    near = -min(u, v)
    r_far = math.sqrt(far * far + h2)
    r_near = math.sqrt(near * near + h2)
    return math.log1p(2.0 * half * (1.0 + (far + near) / (r_far + r_near)) / (near + r_near))


@njit(cache=True, error_model="numpy")
def _panel(geom, i, j, g2, x0, x1, xs, ws, n):
    """n-point Gauss rule for int_{x0}^{x1} F(s) ds along segment ``i`` (s from its start)."""
    # Points are taken relative to the centre of j, so that a node close to a shared end point
    # keeps its small distance from it to within rounding of the segment lengths.
    ox = geom[i, 0] - geom[j, 0]
    oy = geom[i, 1] - geom[j, 1]
    oz = geom[i, 2] - geom[j, 2]
    mid = 0.5 * (x0 + x1) - geom[i, 6]
    half = 0.5 * (x1 - x0)
    total = 0.0
    for k in range(n):
        s = mid + half * xs[k]
        total += ws[k] * _line_integral(
            ox + s * geom[i, 3], oy + s * geom[i, 4], oz + s * geom[i, 5], geom, j, g2
        )
    return total * abs(half)


@njit(cache=True, error_model="numpy")
def _graded(geom, i, j, g2, x_end, direction, width, scale, xs, ws, n):
    """Integral over ``width`` from ``x_end`` in ``direction``, panels graded towards x_end.

    Panels [w s^(k+1), w s^k] (s the grading ratio) until the innermost panel is no wider
    than ``scale``, the distance of the nearest singularity from x_end; no narrower than
    ``min_width`` when the scale is zero (a logarithmic end-point singularity).
    """
    total = 0.0
    e = width
    while e > scale:
        e_next = e * _GRADING
        total += _panel(geom, i, j, g2, x_end + direction * e_next, x_end + direction * e, xs, ws, n)
        e = e_next
    return total + _panel(geom, i, j, g2, x_end, x_end + direction * e, xs, ws, n)


@njit(cache=True, error_model="numpy", inline="always")
def _dist2_to_segment(wx, wy, wz, geom, j):
    """Squared distance of point p from segment ``j``; w = p - centre_j."""
    t = wx * geom[j, 3] + wy * geom[j, 4] + wz * geom[j, 5]
    t = min(max(t, -geom[j, 6]), geom[j, 6])
    dx = wx - t * geom[j, 3]
    dy = wy - t * geom[j, 4]
    dz = wz - t * geom[j, 5]
    return dx * dx + dy * dy + dz * dz


@njit(cache=True, error_model="numpy")
def _near_points(geom, i, j, g2):
    """Points along segment ``i`` (from its start) where the outer integrand is near-singular.

    Returns positions and squared scales (distance^2 + g^2) of: both ends of i, the points of
    i closest to each end of j, and the point of i closest to segment j (segment-segment
    closest points by minimising |a(s) - b(t)|^2 with clamping, as in Ericson, Real-Time
    Collision Detection, 2005), sorted by position.
    """
    la = 2.0 * geom[i, 6]
    pos = np.empty(5)
    scl = np.empty(5)
    r = np.empty(3)
    for k in range(3):
        # start of i minus start of j
        r[k] = geom[i, k] - geom[i, 6] * geom[i, 3 + k] - geom[j, k] + geom[j, 6] * geom[j, 3 + k]
    b = geom[i, 3] * geom[j, 3] + geom[i, 4] * geom[j, 4] + geom[i, 5] * geom[j, 5]
    c = r[0] * geom[i, 3] + r[1] * geom[i, 4] + r[2] * geom[i, 5]
    f = r[0] * geom[j, 3] + r[1] * geom[j, 4] + r[2] * geom[j, 5]
    lb = 2.0 * geom[j, 6]
    denom = 1.0 - b * b
    pos[0] = 0.0
    pos[1] = la
    pos[2] = min(max(-c, 0.0), la)
    pos[3] = min(max(b * lb - c, 0.0), la)
    s = min(max((b * f - c) / denom, 0.0), la) if denom > 1e-14 else 0.0
    t = b * s + f
    if t < 0.0:
        s = pos[2]
    elif t > lb:
        s = pos[3]
    pos[4] = s
    for k in range(5):
        x = pos[k] - geom[i, 6]
        scl[k] = g2 + _dist2_to_segment(
            geom[i, 0] - geom[j, 0] + x * geom[i, 3],
            geom[i, 1] - geom[j, 1] + x * geom[i, 4],
            geom[i, 2] - geom[j, 2] + x * geom[i, 5],
            geom,
            j,
        )
    order = np.argsort(pos)
    return pos[order], scl[order]


@njit(cache=True, error_model="numpy")
def _overlapping(geom, i, j):
    """True if segments i and j are collinear (within rounding) and share a stretch of line."""
    c = geom[i, 3] * geom[j, 3] + geom[i, 4] * geom[j, 4] + geom[i, 5] * geom[j, 5]
    if 1.0 - c * c > 1e-14:
        return False
    wx = geom[j, 0] - geom[i, 0]
    wy = geom[j, 1] - geom[i, 1]
    wz = geom[j, 2] - geom[i, 2]
    along = wx * geom[i, 3] + wy * geom[i, 4] + wz * geom[i, 5]
    off2 = wx * wx + wy * wy + wz * wz - along * along
    scale = geom[i, 6] + geom[j, 6]
    if off2 > (1e3 * _ROUNDING * scale) ** 2:
        return False
    overlap = min(geom[i, 6], along + geom[j, 6]) - max(-geom[i, 6], along - geom[j, 6])
    return overlap > _MIN_PANEL * scale


@njit(cache=True, error_model="numpy")
def near_integral(geom, i, j, g, rel_tol, xs, ws, n):
    """I_ij for a near pair: closed-form inner integral along j, graded Gauss along i.

    Each interval between consecutive near points is halved and each half is graded towards
    its end point, down to that point's scale sqrt(d^2 + g^2) (or rel_tol times the length of
    i when that scale is zero, for segments touching at an end). Returns NaN for collinear
    segments that overlap with g = 0, whose integral is infinite.
    """
    if g == 0.0 and _overlapping(geom, i, j):
        return np.nan
    g2 = g * g
    pos, scl = _near_points(geom, i, j, g2)
    min_width = max(rel_tol, _MIN_PANEL) * 2.0 * geom[i, 6]
    m = 1
    for k in range(1, 5):
        if pos[k] - pos[m - 1] <= min_width:
            scl[m - 1] = min(scl[m - 1], scl[k])
        else:
            pos[m] = pos[k]
            scl[m] = scl[k]
            m += 1
    pos[m - 1] = 2.0 * geom[i, 6]
    total = 0.0
    for k in range(1, m):
        half = 0.5 * (pos[k] - pos[k - 1])
        sl = max(math.sqrt(scl[k - 1]), min_width)
        sr = max(math.sqrt(scl[k]), min_width)
        total += _graded(geom, i, j, g2, pos[k - 1], 1.0, half, sl, xs, ws, n)
        total += _graded(geom, i, j, g2, pos[k], -1.0, half, sr, xs, ws, n)
    return total
