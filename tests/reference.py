"""Slow, plainly written twins of the numba kernels, used only by the tests and benchmarks."""

from __future__ import annotations

import math
import warnings
from decimal import Decimal, localcontext
from itertools import pairwise

import numpy as np
from numpy.typing import NDArray
from scipy import integrate

Array = NDArray[np.float64]

# ---------------------------------------------------------------------------------------
# Biot-Savart twins of fieldenergy.kernels._biot_savart
#
#   b_a_loop      the kernels' formula, point by point in plain Python (math module)
#   b_numpy       the same formula for B, vectorised with NumPy over (points x segments)
#   b_a_decimal   the textbook Hanson-Hirshman form (with its cancellation) in 60-digit
#                 decimal arithmetic, starting from the exact values of the float inputs
#   b_a_quad      the Biot-Savart line integrals dB, dA summed by scipy.integrate.quad
# ---------------------------------------------------------------------------------------

_K = 1.0e-7  # mu0 / (4 pi), H/m


def _pair_loop(p: list[float], a: list[float], b: list[float], radius: float) -> tuple[list[float], float]:
    """Per unit current and for one pair: B / (mu0/(4 pi)) and the coefficient of d in A."""
    u = [p[k] - a[k] for k in range(3)]
    v = [p[k] - b[k] for k in range(3)]
    d = [b[k] - a[k] for k in range(3)]
    c = [d[1] * u[2] - d[2] * u[1], d[2] * u[0] - d[0] * u[2], d[0] * u[1] - d[1] * u[0]]
    cc = sum(ck * ck for ck in c)
    l2 = sum(dk * dk for dk in d)
    length = math.sqrt(l2)
    ext = max(0.0, radius * radius - cc / l2)
    ri = math.sqrt(sum(x * x for x in u) + ext)
    rf = math.sqrt(sum(x * x for x in v) + ext)
    uv = sum(u[k] * v[k] for k in range(3)) + ext
    rr, s = ri * rf, ri + rf
    if uv >= 0.0:
        nn, mm = 1.0, rr + uv
    else:
        nn, mm = rr - uv, cc + l2 * ext
    f = s * nn / (rr * mm)
    x = length * (s + length) * nn / mm
    a_coef = (math.log1p(x) + 0.5 * f * length * ext) / length
    return [f * ck for ck in c], a_coef


def inside_conductor(
    points: NDArray[np.float64], starts: NDArray[np.float64], ends: NDArray[np.float64], radii: NDArray[np.float64]
) -> NDArray[np.bool_]:
    """Which points lie within the core radius of some segment (the kernels apply their core
    rule only there; elsewhere every segment adds its line field)."""
    pts = np.asarray(points, dtype=float)[:, None, :]
    d = ends - starts
    t = np.clip(np.einsum("ijk,jk->ij", pts - starts[None], d) / np.einsum("ij,ij->i", d, d), 0.0, 1.0)
    gap = pts - (starts[None] + t[..., None] * d[None])
    return np.asarray((np.einsum("ijk,ijk->ij", gap, gap) < radii[None] ** 2).any(axis=1))


def b_a_loop(
    points: NDArray[np.float64],
    starts: NDArray[np.float64],
    ends: NDArray[np.float64],
    currents: NDArray[np.float64],
    radii: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """B and A from the kernels' own formula, one pair at a time in plain Python floats."""
    b_out = np.zeros((len(points), 3))
    a_out = np.zeros((len(points), 3))
    inside = inside_conductor(points, starts, ends, radii)
    for i, p in enumerate(np.asarray(points, dtype=float).tolist()):
        for j in range(len(starts)):
            a, b = starts[j].tolist(), ends[j].tolist()
            fc, a_coef = _pair_loop(p, a, b, float(radii[j]) if inside[i] else 0.0)
            for k in range(3):
                b_out[i, k] += _K * currents[j] * fc[k]
                a_out[i, k] += _K * currents[j] * a_coef * (b[k] - a[k])
    return b_out, a_out


def b_numpy(
    points: NDArray[np.float64],
    starts: NDArray[np.float64],
    ends: NDArray[np.float64],
    currents: NDArray[np.float64],
    radii: NDArray[np.float64],
    chunk: int = 256,
) -> NDArray[np.float64]:
    """B from the kernels' formula, vectorised with NumPy over chunks of points x all segments."""
    d = ends - starts
    l2 = np.einsum("ij,ij->i", d, d)
    inside = inside_conductor(points, starts, ends, radii)
    out = np.empty((len(points), 3))
    for i0 in range(0, len(points), chunk):
        p = points[i0 : i0 + chunk, None, :]
        a2 = np.where(inside[i0 : i0 + chunk, None], radii[None] ** 2, 0.0)
        u = p - starts[None]
        v = p - ends[None]
        c = np.cross(d[None], u)
        cc = np.einsum("ijk,ijk->ij", c, c)
        ext = np.maximum(0.0, a2 - cc / l2)
        ri = np.sqrt(np.einsum("ijk,ijk->ij", u, u) + ext)
        rf = np.sqrt(np.einsum("ijk,ijk->ij", v, v) + ext)
        uv = np.einsum("ijk,ijk->ij", u, v) + ext
        rr = ri * rf
        is_out = uv >= 0.0
        nn = np.where(is_out, 1.0, rr - uv)
        mm = np.where(is_out, rr + uv, cc + l2 * ext)
        f = currents * (ri + rf) * nn / (rr * mm)
        out[i0 : i0 + chunk] = _K * np.einsum("ij,ijk->ik", f, c)
    return out


def b_a_decimal(
    point: NDArray[np.float64],
    start: NDArray[np.float64],
    end: NDArray[np.float64],
    current: float,
    radius: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """B and A of one segment from the textbook forms, in 60-digit decimal arithmetic.

    ``radius`` is the core radius to apply: pass 0 for a point inside no conductor.

    Hanson & Hirshman, Phys. Plasmas 9, 4410 (2002), written as printed: with S = Ri + Rf,
    B = K I 2 L S / (Ri Rf (S^2 - L^2)) e x u and A = K I ln((S + L)/(S - L)) e. The core
    rule is applied in its geometric form: the point is moved to rho = a at the same axial
    position t; B is scaled by rho / a; A gains K I (1 - rho^2/a^2) (t/Ri' - (t - L)/Rf') / 2.
    60 digits leave over 40 after the cancellation in S^2 - L^2 at rho = 1e-9 L.
    """
    with localcontext() as ctx:
        ctx.prec = 60
        p, a, b = ([Decimal(float(x)) for x in arr] for arr in (point, start, end))
        u = [p[k] - a[k] for k in range(3)]
        d = [b[k] - a[k] for k in range(3)]
        length = sum((x * x for x in d), Decimal(0)).sqrt()
        e = [x / length for x in d]
        t = sum((u[k] * e[k] for k in range(3)), Decimal(0))
        exu = [e[1] * u[2] - e[2] * u[1], e[2] * u[0] - e[0] * u[2], e[0] * u[1] - e[1] * u[0]]
        rho2 = sum((x * x for x in exu), Decimal(0))
        rad = Decimal(float(radius))
        in_core = rho2 < rad * rad
        rho_eff2 = rad * rad if in_core else rho2
        ri = (t * t + rho_eff2).sqrt()
        rf = ((t - length) ** 2 + rho_eff2).sqrt()
        s = ri + rf
        # e x u at the moved point is (a / rho) e x u and B is then scaled by rho / a, so the
        # factor of the moved point multiplies the e x u of the true point.
        fb = 2 * length * s / (ri * rf * (s * s - length * length))
        fa = ((s + length) / (s - length)).ln()
        if in_core:
            fa += (1 - rho2 / (rad * rad)) * (t / ri - (t - length) / rf) / 2
        k_i = Decimal(_K) * Decimal(float(current))
        b_vec = np.array([float(k_i * fb * x) for x in exu])
        a_vec = np.array([float(k_i * fa * x) for x in e])
    return b_vec, a_vec


def b_a_quad(
    point: NDArray[np.float64], start: NDArray[np.float64], end: NDArray[np.float64], current: float
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """B and A of one line segment by adaptive quadrature of the Biot-Savart line integrals.

    dB = K I dl x r / |r|^3 and dA = K I dl / |r| with r = p - x(t), x(t) = a + t (b - a),
    t in [0, 1]; each component is one scipy.integrate.quad call. For a point at distance
    rho from the line the integrand peaks over a width rho around the foot t0 of the
    perpendicular, so for rho < L the sinh substitution t = t0 + h sinh(w), h = rho / L, is used: it
    spreads the peak evenly in w (common practice for nearly singular integrals).
    """
    p, a, b = (np.asarray(x, dtype=float).tolist() for x in (point, start, end))
    d = [b[k] - a[k] for k in range(3)]
    l2 = sum(x * x for x in d)
    t0 = sum((p[k] - a[k]) * d[k] for k in range(3)) / l2
    foot = [p[k] - (a[k] + t0 * d[k]) for k in range(3)]
    h = math.hypot(*foot) / math.sqrt(l2)
    if h == 0.0 or h > 1.0:
        t0, h = 0.0, 1.0  # no peak narrower than the segment: t = sinh(w) is then just smooth

    def r_of(w: float) -> list[float]:
        t = t0 + h * math.sinh(w)
        return [p[k] - (a[k] + t * d[k]) for k in range(3)]

    def db(w: float, k: int) -> float:
        r = r_of(w)
        i, j = (k + 1) % 3, (k + 2) % 3
        return (d[i] * r[j] - d[j] * r[i]) / math.hypot(*r) ** 3 * h * math.cosh(w)

    def inv_r(w: float) -> float:
        return 1.0 / math.hypot(*r_of(w)) * h * math.cosh(w)

    lo, hi = math.asinh((0.0 - t0) / h), math.asinh((1.0 - t0) / h)
    cuts = [lo, hi] if not lo < 0.0 < hi else [lo, 0.0, hi]

    def integral(fun: object, *args: int) -> float:
        # Next to the line the integrand itself carries rounding noise (the cross product of
        # nearly parallel vectors), which quad reports as a warning; the tests' tolerances
        # account for that noise, so the warning is not repeated for every call.
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", integrate.IntegrationWarning)
            return sum(
                integrate.quad(fun, w0, w1, args=args, epsabs=0.0, epsrel=1e-12, limit=200)[0]
                for w0, w1 in pairwise(cuts)
            )

    b_vec = _K * current * np.array([integral(db, k) for k in range(3)])
    a_vec = _K * current * integral(inv_r) * np.array(d)
    return b_vec, a_vec


def point_elements_numpy(targets: Array, positions: Array, charges: Array, chunk: int = 256) -> Array:
    """A and B of point current elements q at y, without mu0/(4 pi): rows Bx, By, Bz, Ax, Ay, Az
    of shape (6, m); B = sum q x r / |r|^3, A = sum q / |r|, r = x - y; coincident pairs left out."""
    out = np.zeros((6, len(targets)))
    for i0 in range(0, len(targets), chunk):
        r = targets[i0 : i0 + chunk, None, :] - positions[None, :, :]
        dist = np.linalg.norm(r, axis=2)
        inv = np.divide(1.0, dist, out=np.zeros_like(dist), where=dist > 0)
        out[:3, i0 : i0 + chunk] = np.einsum("ijk,ij->ki", np.cross(charges[None, :, :], r), inv**3)
        out[3:, i0 : i0 + chunk] = np.einsum("jk,ij->ki", charges, inv)
    return out
