"""Far-pair rules of the Neumann integral: multipole expansion and tensor Gauss-Legendre.

For two straight segments a, b (centres, unit tangents t, half-lengths h) and softening g,

    I_ab = int_a int_b ds dt / sqrt(r^2 + g^2)

is evaluated, when the segments are far apart compared with their lengths, by

* the multipole expansion of the kernel about the two centres to fourth order, when
  x = (h_a^2 + h_b^2) / R^2 is small enough (:func:`far_thresholds` entry 0);
* else a tensor Gauss-Legendre rule of point-point terms, with orders per segment from the
  threshold table (entries 1..FAR_MAX_ORDER).

Also here: the Gauss-Legendre tables, the closed-form self term and the per-segment geometry.
Scalars and float64 arrays only; nothing here validates input.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

#: Highest Gauss order of the tensor product; pairs that would need more are near pairs.
FAR_MAX_ORDER = 10

#: Safety factor on the error estimates of the far rules (C rho^(-2n) for Gauss, the
#: calibrated remainder bound for the multipole), set so that the per-pair error stays below
#: rel_tol on random pair tests (worst seen: half of rel_tol).
_FAR_SAFETY = 5.0

_THIRD = 1.0 / 3.0


@njit(cache=True, error_model="numpy")
def gauss_table(n_max):
    """Gauss-Legendre nodes and weights on [-1, 1] for orders 1..n_max.

    Newton iteration on the three-term recurrence of the Legendre polynomials, started from
    Tricomi's approximation of the roots. Returns ``(nodes, weights)``, each (n_max + 1, n_max);
    row n holds the n-point rule in its first n entries.
    """
    nodes = np.zeros((n_max + 1, n_max))
    wts = np.zeros((n_max + 1, n_max))
    for n in range(1, n_max + 1):
        for i in range(n):
            z = math.cos(math.pi * (i + 0.75) / (n + 0.5))
            dp = 1.0
            for _ in range(100):
                p1, p0 = 1.0, 0.0
                for k in range(1, n + 1):
                    p1, p0 = ((2 * k - 1) * z * p1 - (k - 1) * p0) / k, p1
                dp = n * (z * p1 - p0) / (z * z - 1.0)
                step = p1 / dp
                z -= step
                if abs(step) < 1e-16:
                    break
            nodes[n, i] = -z
            wts[n, i] = 2.0 / ((1.0 - z * z) * dp * dp)
    return nodes, wts


@njit(cache=True, error_model="numpy")
def far_thresholds(rel_tol):
    """Limits of the far rules for a per-pair relative error ``rel_tol``, as one array.

    Entry n in 1..FAR_MAX_ORDER is the smallest normalised distance z_n at which the n-point
    Gauss rule meets ``rel_tol``: for a segment of half-length h and sources at distance
    >= z h from its centre, the error of a 1/r integrand is about C rho^(-2n) with
    rho = z + sqrt(z^2 - 1) (the Bernstein ellipse through the nearest singularity), solved
    for z. Entry 0 is the largest x = (h_a^2 + h_b^2) / R^2 at which the fourth-order
    multipole meets ``rel_tol`` (remainder below x^3 / 2).
    """
    z = np.empty(FAR_MAX_ORDER + 1)
    z[0] = (2.0 * rel_tol / _FAR_SAFETY) ** (1.0 / 3.0)
    for n in range(1, FAR_MAX_ORDER + 1):
        rho = (_FAR_SAFETY / rel_tol) ** (1.0 / (2.0 * n))
        z[n] = 0.5 * (rho + 1.0 / rho)
    return z


@njit(cache=True, error_model="numpy")
def segment_geometry(starts, ends):
    """Centre (3), unit tangent (3) and half-length (1) of each segment, as an (n, 7) array.

    The double sums also use its transpose (7, n), whose rows are contiguous for vector loads.
    """
    n = starts.shape[0]
    geom = np.empty((n, 7))
    for i in range(n):
        dx = ends[i, 0] - starts[i, 0]
        dy = ends[i, 1] - starts[i, 1]
        dz = ends[i, 2] - starts[i, 2]
        length = math.sqrt(dx * dx + dy * dy + dz * dz)
        geom[i, 0] = 0.5 * (starts[i, 0] + ends[i, 0])
        geom[i, 1] = 0.5 * (starts[i, 1] + ends[i, 1])
        geom[i, 2] = 0.5 * (starts[i, 2] + ends[i, 2])
        geom[i, 3] = dx / length
        geom[i, 4] = dy / length
        geom[i, 5] = dz / length
        geom[i, 6] = 0.5 * length
    return geom


@njit(cache=True, error_model="numpy", inline="always")
def order_for(z, zt):
    """Smallest Gauss order whose threshold ``zt[n]`` lies below ``z`` (0 if none does)."""
    for n in range(1, FAR_MAX_ORDER + 1):
        if z >= zt[n]:
            return n
    return 0


@njit(cache=True, error_model="numpy", inline="always")
def gauss_product(rx, ry, rz, tax, tay, taz, ha, tbx, tby, tbz, hb, g2, na, nb, nodes, wts):
    """Tensor Gauss rule of orders ``na`` x ``nb`` for I_ab; r = centre_a - centre_b."""
    total = 0.0
    for k in range(na):
        s = ha * nodes[na, k]
        px = rx + s * tax
        py = ry + s * tay
        pz = rz + s * taz
        inner = 0.0
        for m in range(nb):
            t = hb * nodes[nb, m]
            dx = px - t * tbx
            dy = py - t * tby
            dz = pz - t * tbz
            inner += wts[nb, m] / math.sqrt(dx * dx + dy * dy + dz * dz + g2)
        total += wts[na, k] * inner
    return total * ha * hb


#: Largest sideways drift (sin(angle) x total length) relative to the distance between the
#: lines for which two segments count as parallel: rounding in chords of offset filaments
#: leaves ~1e-16 rad, far below this; a real angle never passes.
PARALLEL_DRIFT = 1e-12


@njit(cache=True, error_model="numpy", inline="always")
def _phi(z, d):
    """Second antiderivative of 1 / sqrt(z^2 + d^2): z asinh(z/d) - sqrt(z^2 + d^2)."""
    return z * math.asinh(z / d) - math.sqrt(z * z + d * d)


@njit(cache=True, error_model="numpy", inline="always")
def parallel_integral(rx, ry, rz, tax, tay, taz, tbx, tby, tbz, ha, hb, g2):
    """I_ab in closed form for parallel segments, or -1.0 when they are not parallel.

    Grover (1946), two parallel filaments of any lengths and offset: with c the offset of the
    centres along the common direction and d^2 = rho^2 + g^2 (rho the distance between the
    lines), I = Phi(ha - c + hb) - Phi(ha - c - hb) - Phi(-ha - c + hb) + Phi(-ha - c - hb),
    Phi(z) = z asinh(z/d) - sqrt(z^2 + d^2). r = centre_a - centre_b. Used for near and middle
    pairs only, where the four terms do not cancel badly (far pairs take the multipole).
    """
    cx = tay * tbz - taz * tby
    cy = taz * tbx - tax * tbz
    cz = tax * tby - tay * tbx
    c = -(rx * tax + ry * tay + rz * taz)
    d2 = rx * rx + ry * ry + rz * rz - c * c + g2
    span = ha + hb
    if d2 <= 0.0 or (cx * cx + cy * cy + cz * cz) * span * span > PARALLEL_DRIFT * PARALLEL_DRIFT * d2:
        return -1.0
    d = math.sqrt(d2)
    return _phi(ha - c + hb, d) - _phi(ha - c - hb, d) - _phi(-ha - c + hb, d) + _phi(-ha - c - hb, d)


@njit(cache=True, error_model="numpy")
def self_integral(length, g):
    """I_ii = 2 [l asinh(l/g) - sqrt(l^2 + g^2) + g], written without cancellation.

    Grover (1946), straight round conductor / two parallel filaments of equal length at
    distance g; sqrt(l^2+g^2) - g is rewritten as l^2 / (sqrt(l^2+g^2) + g).
    """
    return 2.0 * (
        length * math.asinh(length / g) - length * length / (math.sqrt(length * length + g * g) + g)
    )


@njit(cache=True, error_model="numpy", inline="always")
def multipole(rx, ry, rz, tax, tay, taz, ha, tbx, tby, tbz, hb, inv):
    """I_ab from the multipole expansion of the kernel about the centres, to fourth order.

    r = centre_a - centre_b, t unit tangents, h half-lengths, inv = 1 / R^2 with
    R^2 = |r|^2 + g^2. With X = (r, g) (the softening as a fourth coordinate) and
    u = s t_a - t t_b, 1/|X + u| = sum_l (-|u|)^l P_l(cos) / |X|^(l+1) (the Legendre generating
    function). Averaged over s in [-h_a, h_a] and t in [-h_b, h_b] the odd terms vanish; with
    A = h_a^2/3, B = h_b^2/3, a = t_a.r/R, b = t_b.r/R, c = t_a.t_b:
    I = l_a l_b / R (1 + T2 + T4 + ...), T2 = (3 (A a^2 + B b^2) - A - B) / (2 R^2),
    T4 = (35 E[(u.X/R)^4] - 30 E[(u.X/R)^2 |u|^2] + 3 E[|u|^4]) / (8 R^4), the moments
    written out below (E s^4 = 9 A^2 / 5). With x = (h_a^2 + h_b^2) / R^2 the remainder is below
    x^3 / 2 (checked on random pairs). Scalars only and no branches: it is vectorised.
    """
    pa = rx * tax + ry * tay + rz * taz
    pb = rx * tbx + ry * tby + rz * tbz
    ra = pa * pa * inv
    rb = pb * pb * inv
    a = ha * ha * _THIRD
    b = hb * hb * _THIRD
    ab = a * b
    c = tax * tbx + tay * tby + taz * tbz
    e4a = 1.8 * (ra * ra * a * a + rb * rb * b * b) + 6.0 * ra * rb * ab
    e4b = 1.8 * (a * a * ra + b * b * rb) + ab * (ra + rb + 4.0 * c * pa * pb * inv)
    e4c = 1.8 * (a * a + b * b) + ab * (2.0 + 4.0 * c * c)
    series = 1.0 + 0.5 * (3.0 * (a * ra + b * rb) - a - b) * inv
    series += (35.0 * e4a - 30.0 * e4b + 3.0 * e4c) * (0.125 * inv * inv)
    return 4.0 * ha * hb * series * math.sqrt(inv)
