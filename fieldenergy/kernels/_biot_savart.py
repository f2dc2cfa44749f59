"""Biot-Savart kernels: B and the vector potential A of straight current segments.

Three tiers (see the package docstring): scalar routines inlined into the loops, parallel
drivers that take C-contiguous float64 arrays and fill caller-allocated outputs, and the
public wrappers in :mod:`fieldenergy.fields`, which validate input.

Closed forms, for a segment a -> b of length L, unit direction e, current I, at a point p
with u = p - a, v = p - b, Ri = |u|, Rf = |v|, S = Ri + Rf (Hanson & Hirshman,
Phys. Plasmas 9, 4410 (2002))::

    B = mu0 I / (4 pi) * 2 L S / (Ri Rf (S^2 - L^2)) * (e x u)
    A = mu0 I / (4 pi) * ln((S + L) / (S - L)) * e

With d = b - a, e x u = (d x u) / L and S^2 - L^2 = 2 (Ri Rf + u.v). The sum Ri Rf + u.v
cancels next to the segment (u.v < 0 there); it is then evaluated as
|d x u|^2 / (Ri Rf - u.v), an identity that involves no subtraction. The logarithm is
evaluated as log1p(x) with x = 2 L / (S - L) = L (S + L) / (Ri Rf + u.v), which keeps its
relative accuracy both next to the segment and far from it (x -> 0).

Finite core. Each segment has a core radius ``a`` (0 for a line filament). A point at distance
rho < a from the segment's line is moved radially to rho = a (the "effective point", same
axial position); this is done on the squared distances, so it costs no extra square root::

    ext = max(0, a^2 - rho^2),  Ri'^2 = Ri^2 + ext,  Rf'^2 = Rf^2 + ext,  u.v' = u.v + ext
    B_core(rho) = B_line(a) * rho / a
    A_core(rho) = A_line(a) + mu0 I / (4 pi) * (1 - rho^2 / a^2) * w,
    w = (cos t1 - cos t2) / 2 at rho = a  (the half angle factor of the line field)

Both equal the uniform-current field of an infinite round wire (Ampere's law) when the
segment is long; the weight w makes the A correction add up along a straight chain of
segments (it telescopes to 1 inside a long chain and falls to 0 beyond its ends).

The core rule is for points inside the conductors. A point's line core (rho < a) reaches
along the whole line through a segment, also far beyond its ends, where it would shift a
filament's field slightly (by a fraction (a / distance)^2 of that segment's share). So the
rule is applied only at points that lie inside some conductor, that is within the core
radius of some segment (its capsule); elsewhere every segment adds its line field, the
exact Biot-Savart field of the filament chords. Every point inside a capsule is in that
segment's line core, so the test rides on the core pass below. Points inside a conductor
keep the rule for every segment whose line core holds them (inside a chain, its
neighbours' too), so the field is continuous inside the conductors; at their surface the
two rules differ only by the far-line terms above.

Singular cases: on a zero-radius segment (rho = 0 inside [a, b], end points included) the
result is not finite (NaN or inf); callers detect that and report the point. On the line
through a segment but beyond its ends B is 0 (d x u = 0, up to its rounding) and A finite;
there u.v > 0, so no special branch is needed. A core point at rho = 0, end points
included, is regular: the moved point lies at rho = a.

Layout. Target points are cut into blocks of at most _BLOCK; ``prange`` runs over blocks, so
each thread writes only its own output rows and no reduction crosses threads. Inside a
block the loop over segments is outer and the loop over the block's points inner: the inner
loop is branch-free (selects only) and the compiler vectorises it. Per segment, a first
pass applies the line formula to every point and counts the points in the line core; only
if there are any does a second pass sum those by both rules, and the choice between the two
sums is made per point once all segments are done. When a segment starts
exactly where the previous one ends (a chain, as discretised filaments are), |p - a| is the
previous segment's |p - b|, kept per point: one square root per pair instead of two. The
square root and the division are the costly operations (they share one unit that is not
pipelined like multiply-add), so this nearly halves the time of B for chains. For B alone
the first pass does not form x (the A argument), which saves about a tenth of its time.

Why the hardware square root and division stay. Multiply-add arithmetic in their place was
measured: 1/sqrt(x) from the "fast inverse square root" bit trick (Lomont, "Fast Inverse
Square Root", 2003; float64 constant 0x5FE6EB50C7B537A9) refined by four Newton-Raphson
steps, sqrt(x) = x * (1/sqrt(x)), and 1/D by three cubic Newton steps from a bit-pattern
guess, both within 2 ulp. On its own such a square root takes about 0.85 of the time of the
hardware one, but inside these loops B ran 1.75 times slower and B and A 1.5 times slower
(a 2-core AVX-512 Xeon, for which numba emits 256-bit vectors; with 512-bit vectors
forced, B was still 1.25 times slower). The first pass already issues about 45 multiply,
add and compare operations per pair, and the square root and division unit works beside
them; the 20 to 30 operations per pair that the Newton steps add compete with those 45 for
the same ports.

No fused multiply-add contraction is done by the compiler (fastmath is off); the kernels
call ``llvm.fma`` explicitly where a product is summed, which is exactly rounded.
"""

from __future__ import annotations

import math
import struct
from fractions import Fraction
from typing import Any

import numba
import numpy as np
from llvmlite import ir
from numba import njit, prange, types
from numba.extending import intrinsic

from fieldenergy.constants import MU0_OVER_4PI

#: Target points per block: each thread owns whole blocks, so it writes only its own rows.
_BLOCK = 128

#: Fewest blocks a call is cut into, so that a small point set still feeds every thread
#: (numba's thread count is not read inside a kernel: doing so would stop it from caching).
_MIN_BLOCKS = 16

_SQRT2 = 1.4142135623730951
_LN2 = 0.6931471805599453
_HUGE = 1.7976931348623157e308

# Rows of the per-segment table built by _segment_table (structure of arrays).
_AX, _AY, _AZ, _BX, _BY, _BZ, _DX, _DY, _DZ, _L, _L2, _INV_L2, _INV_L, _A2, _CUR, _JOINED = range(16)
_N_ROWS = 16


@intrinsic
def _fma_ir(typingctx, x, y, z):
    """x * y + z with one rounding (IEEE 754 fusedMultiplyAdd)."""
    sig = types.float64(types.float64, types.float64, types.float64)

    def codegen(context, builder, signature, args):
        d = ir.DoubleType()
        fn = builder.module.declare_intrinsic("llvm.fma", [d], ir.FunctionType(d, [d, d, d]))
        return builder.call(fn, args)

    return sig, codegen


@intrinsic
def _as_bits_ir(typingctx, x):
    """The IEEE 754 bit pattern of a float64, as int64."""
    sig = types.int64(types.float64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(64))

    return sig, codegen


@intrinsic
def _from_bits_ir(typingctx, n):
    """The float64 whose IEEE 754 bit pattern is the int64 ``n``."""
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.DoubleType())

    return sig, codegen


# Plain-Python stand-ins, used when the JIT is switched off (as in coverage runs), so that
# the kernels still run there, slowly: intrinsics exist only inside compiled code.


def _fma_py(x, y, z):
    """x * y + z with one rounding, in exact rational arithmetic."""
    if not (math.isfinite(x) and math.isfinite(y) and math.isfinite(z)):
        return x * y + z
    return float(Fraction(float(x)) * Fraction(float(y)) + Fraction(float(z)))


def _as_bits_py(x):
    """The IEEE 754 bit pattern of a float64, as int."""
    return struct.unpack("<q", struct.pack("<d", x))[0]


def _from_bits_py(n):
    """The float64 whose IEEE 754 bit pattern is the int ``n``."""
    return struct.unpack("<d", struct.pack("<q", n))[0]


_JIT_OFF: bool = bool(numba.config.DISABLE_JIT)  # type: ignore[attr-defined]
_fma: Any = _fma_py if _JIT_OFF else _fma_ir
_as_bits: Any = _as_bits_py if _JIT_OFF else _as_bits_ir
_from_bits: Any = _from_bits_py if _JIT_OFF else _from_bits_ir


@njit(cache=True, inline="always", error_model="numpy")
def _log1p(x):
    """ln(1 + x) for x >= 0, within 3 ulp; branch-free so the loops calling it vectorise.

    1 + x = 2^k m with m in [1/sqrt2, sqrt2) (exponent taken from the bit pattern);
    ln m = 2 atanh(s), s = f / (2 + f), f = m - 1, and atanh(s) / s = 1 + z/3 + z^2 q(z),
    z = s^2 <= 0.0295 (|s| <= 0.172). The series 1/5 + z/7 + z^2/9 + ... of q is replaced by
    its degree-5 Chebyshev interpolant on [0, 0.0295], which is near-minimax (Trefethen,
    "Approximation Theory and Approximation Practice", SIAM, 2013); the coefficients were
    computed in 50-digit arithmetic (mpmath.chebyfit(q, [0, zmax], 6)) and rounded to
    float64. The error this adds to 1 + z/3 + z^2 q is below 1.9e-17, a sixth of an ulp, and
    it takes three fewer multiply-adds than the truncated series of the same accuracy
    (through s^20/21): B and A together measured 4 to 10 % faster. The polynomial is
    evaluated by Estrin's scheme (a short dependency chain). When 1 + x < sqrt2 the exact
    f = x is used, so no rounding of 1 + x enters and small x keep full accuracy. inf and NaN
    pass through.
    """
    u = 1.0 + x
    bits = _as_bits(u)
    k = (bits >> 52) - 1023
    m = _from_bits((bits & 0x000FFFFFFFFFFFFF) | 0x3FF0000000000000)
    big = m >= _SQRT2
    m = 0.5 * m if big else m
    k = k + 1 if big else k
    f = x if u < _SQRT2 else m - 1.0
    s = f / (2.0 + f)
    z = s * s
    z2 = z * z
    z4 = z2 * z2
    a0 = _fma(1.0 / 3.0, z, 1.0)
    a1 = _fma(0.14285714290663779, z, 0.19999999999997975)
    a2 = _fma(0.09091191757940507, z, 0.11111109153226362)
    a3 = _fma(0.07212872927372754, z, 0.07673927112732978)
    p = _fma(_fma(a3, z2, a2), z4, _fma(a1, z2, a0))
    r = _fma(2.0 * s, p, k * _LN2)
    return r if x < _HUGE else x


@njit(cache=True, inline="always", error_model="numpy")
def _cross(px, py, pz, tab, j):
    """u = p - a, v = p - b, c = d x u and |c|^2 for one pair."""
    ux = px - tab[_AX, j]
    uy = py - tab[_AY, j]
    uz = pz - tab[_AZ, j]
    vx = px - tab[_BX, j]
    vy = py - tab[_BY, j]
    vz = pz - tab[_BZ, j]
    dx = tab[_DX, j]
    dy = tab[_DY, j]
    dz = tab[_DZ, j]
    cx = _fma(dy, uz, -(dz * uy))
    cy = _fma(dz, ux, -(dx * uz))
    cz = _fma(dx, uy, -(dy * ux))
    cc = _fma(cx, cx, _fma(cy, cy, cz * cz))
    return ux, uy, uz, vx, vy, vz, cx, cy, cz, cc


@njit(cache=True, inline="always", error_model="numpy")
def _factors(ri, rf, uv, mm_in, l):
    """(f, x) from Ri, Rf, u.v and |d x u|^2 (all at the effective point): B = K I f c and
    x = 2 L / (S - L) for A. Ri Rf + u.v is taken directly when u.v >= 0 (no cancellation),
    else as |d x u|^2 / (Ri Rf - u.v)."""
    rr = ri * rf
    s = ri + rf
    is_out = uv >= 0.0
    nn = 1.0 if is_out else rr - uv
    inv = 1.0 / (rr * (rr + uv if is_out else mm_in))
    return s * nn * inv, l * (s + l) * nn * rr * inv


@njit(cache=True, inline="always", error_model="numpy")
def _pair(px, py, pz, tab, j, core):
    """Full pair: (cx, cy, cz, f, ext, x), with the core rule (ext = max(0, a^2 - rho^2))
    if ``core``, else the line formula (ext = 0)."""
    ux, uy, uz, vx, vy, vz, cx, cy, cz, cc = _cross(px, py, pz, tab, j)
    ext = max(0.0, _fma(-cc, tab[_INV_L2, j], tab[_A2, j])) if core else 0.0
    ri = np.sqrt(_fma(ux, ux, _fma(uy, uy, _fma(uz, uz, ext))))
    rf = np.sqrt(_fma(vx, vx, _fma(vy, vy, _fma(vz, vz, ext))))
    uv = _fma(ux, vx, _fma(uy, vy, _fma(uz, vz, ext)))
    f, x = _factors(ri, rf, uv, _fma(tab[_L2, j], ext, cc), tab[_L, j])
    return cx, cy, cz, f, ext, x


@njit(cache=True, inline="always", error_model="numpy")
def _line_pass(qx, qy, qz, r_node, acc, xs, tab, j, want_x):
    """One segment against a block, line formula; returns how many points lie in the core.

    ``r_node`` holds |p - a_j| on entry (the previous segment's |p - b| when the two are
    joined) and |p - b_j| on exit, so a chain costs one square root per pair, not two.
    Points in the core add nothing here (_core_pass does them); ``xs`` gets x for A when
    ``want_x`` (a constant after inlining: for B alone x is not computed at all).
    """
    cur = tab[_CUR, j]
    n_core = 0
    for i in range(qx.shape[0]):
        ux, uy, uz, vx, vy, vz, cx, cy, cz, cc = _cross(qx[i], qy[i], qz[i], tab, j)
        # The same expression as in _core_pass, so the two passes agree on every point.
        in_core = _fma(-cc, tab[_INV_L2, j], tab[_A2, j]) > 0.0
        rf = np.sqrt(_fma(vx, vx, _fma(vy, vy, vz * vz)))
        f, x = _factors(r_node[i], rf, _fma(ux, vx, _fma(uy, vy, uz * vz)), cc, tab[_L, j])
        g = 0.0 if in_core else cur * f
        acc[0, i] = _fma(g, cx, acc[0, i])
        acc[1, i] = _fma(g, cy, acc[1, i])
        acc[2, i] = _fma(g, cz, acc[2, i])
        r_node[i] = rf
        if want_x:
            xs[i] = 0.0 if in_core else x
        n_core += in_core
    return n_core


@njit(cache=True, inline="always", error_model="numpy")
def _core_pass(qx, qy, qz, acc_c, acc_l, inside, tab, j, want_a):
    """The points of a block in segment j's line core: both rules' sums, and whether inside.

    For those points acc_c gets the core rule's B (and A when ``want_a``) and acc_l the line
    formula's; ``inside`` is set where the point lies within the core radius of the segment
    itself (its capsule). Every point inside any conductor is in that conductor's line core,
    so after all segments ``inside`` tells which points lie in some conductor.
    """
    cur = tab[_CUR, j]
    a2 = tab[_A2, j]
    for i in range(qx.shape[0]):
        ux, uy, uz, vx, vy, vz, cx, cy, cz, cc = _cross(qx[i], qy[i], qz[i], tab, j)
        ext = max(0.0, _fma(-cc, tab[_INV_L2, j], a2))
        in_core = ext > 0.0
        uu = _fma(ux, ux, _fma(uy, uy, uz * uz))
        vv = _fma(vx, vx, _fma(vy, vy, vz * vz))
        uv = _fma(ux, vx, _fma(uy, vy, uz * vz))
        f_c, x_c = _factors(np.sqrt(uu + ext), np.sqrt(vv + ext), uv + ext, _fma(tab[_L2, j], ext, cc), tab[_L, j])
        f_l, x_l = _factors(np.sqrt(uu), np.sqrt(vv), uv, cc, tab[_L, j])
        g_c = cur * f_c if in_core else 0.0
        g_l = cur * f_l if in_core else 0.0
        acc_c[0, i] = _fma(g_c, cx, acc_c[0, i])
        acc_c[1, i] = _fma(g_c, cy, acc_c[1, i])
        acc_c[2, i] = _fma(g_c, cz, acc_c[2, i])
        acc_l[0, i] = _fma(g_l, cx, acc_l[0, i])
        acc_l[1, i] = _fma(g_l, cy, acc_l[1, i])
        acc_l[2, i] = _fma(g_l, cz, acc_l[2, i])
        ud = _fma(ux, tab[_DX, j], _fma(uy, tab[_DY, j], uz * tab[_DZ, j]))
        vd = _fma(vx, tab[_DX, j], _fma(vy, tab[_DY, j], vz * tab[_DZ, j]))
        own = (ud >= 0.0 and vd <= 0.0) or uu < a2 or vv < a2
        inside[i] = inside[i] or (in_core and own)
        if want_a:
            # Core rule: A_line at the effective point plus the core term I f L ext / 2.
            h_c = cur * _fma(0.5 * tab[_L, j] * f_c, ext, _log1p(x_c)) * tab[_INV_L, j] if in_core else 0.0
            h_l = cur * _log1p(x_l) * tab[_INV_L, j] if in_core else 0.0
            acc_c[3, i] = _fma(h_c, tab[_DX, j], acc_c[3, i])
            acc_c[4, i] = _fma(h_c, tab[_DY, j], acc_c[4, i])
            acc_c[5, i] = _fma(h_c, tab[_DZ, j], acc_c[5, i])
            acc_l[3, i] = _fma(h_l, tab[_DX, j], acc_l[3, i])
            acc_l[4, i] = _fma(h_l, tab[_DY, j], acc_l[4, i])
            acc_l[5, i] = _fma(h_l, tab[_DZ, j], acc_l[5, i])


@njit(cache=True, inline="always", error_model="numpy")
def _block(points, i0, w, tab, n_acc):
    """B (and A, n_acc = 6) of all segments at points[i0 : i0 + w], unscaled, shape (n_acc, w)."""
    qx = points[i0 : i0 + w, 0].copy()
    qy = points[i0 : i0 + w, 1].copy()
    qz = points[i0 : i0 + w, 2].copy()
    acc = np.zeros((n_acc, w))
    r_node = np.empty(w)
    xs = np.empty(w)
    # The in-core pairs' sums by the core rule and by the line formula, kept apart until it
    # is known which points lie inside some conductor (module docstring).
    acc_c = np.zeros((n_acc, w))
    acc_l = np.zeros((n_acc, w))
    inside = np.zeros(w, np.bool_)
    any_core = False
    for j in range(tab.shape[1]):
        if tab[_JOINED, j] == 0.0:
            for i in range(w):
                ux = qx[i] - tab[_AX, j]
                uy = qy[i] - tab[_AY, j]
                uz = qz[i] - tab[_AZ, j]
                r_node[i] = np.sqrt(_fma(ux, ux, _fma(uy, uy, uz * uz)))
        if _line_pass(qx, qy, qz, r_node, acc, xs, tab, j, n_acc == 6) > 0:
            any_core = True
            _core_pass(qx, qy, qz, acc_c, acc_l, inside, tab, j, n_acc == 6)
        if n_acc == 6:
            # The logarithm in a loop of its own keeps each loop body small enough for the
            # CPU to overlap iterations (measured ~25 % faster than one fused loop).
            h = tab[_CUR, j] * tab[_INV_L, j]
            for i in range(w):
                g = h * _log1p(xs[i])
                acc[3, i] = _fma(g, tab[_DX, j], acc[3, i])
                acc[4, i] = _fma(g, tab[_DY, j], acc[4, i])
                acc[5, i] = _fma(g, tab[_DZ, j], acc[5, i])
    if any_core:
        for k in range(n_acc):
            for i in range(w):
                acc[k, i] += acc_c[k, i] if inside[i] else acc_l[k, i]
    return acc


@njit(cache=True)
def _segment_table(starts, ends, currents, radii):
    """Per-segment quantities, one contiguous row each, shape (16, n) (see the _AX.. names).

    Row _JOINED is 1 where a segment starts exactly (bitwise) where the previous one ends.
    """
    n = starts.shape[0]
    tab = np.empty((_N_ROWS, n))
    for j in range(n):
        joined = j > 0
        for k in range(3):
            tab[_AX + k, j] = starts[j, k]
            tab[_BX + k, j] = ends[j, k]
            tab[_DX + k, j] = ends[j, k] - starts[j, k]
            joined = joined and starts[j, k] == ends[j - 1, k]
        l2 = tab[_DX, j] ** 2 + tab[_DY, j] ** 2 + tab[_DZ, j] ** 2
        tab[_L2, j] = l2
        tab[_L, j] = np.sqrt(l2)
        tab[_INV_L2, j] = 1.0 / l2
        tab[_INV_L, j] = 1.0 / tab[_L, j]
        tab[_A2, j] = radii[j] * radii[j]
        tab[_CUR, j] = currents[j]
        tab[_JOINED, j] = 1.0 if joined else 0.0
    return tab


@njit(cache=True)
def _block_size(m):
    """Points per block: at most _BLOCK, and at least _MIN_BLOCKS blocks when m allows."""
    n_blocks = max(_MIN_BLOCKS, (m + _BLOCK - 1) // _BLOCK)
    return max(1, (m + n_blocks - 1) // n_blocks)


@njit(cache=True, parallel=True, error_model="numpy")
def b_from_segments(points, starts, ends, currents, radii, out):
    """Magnetic flux density of straight segments at target points (Biot-Savart, closed form).

    Formula: Hanson & Hirshman (2002), B of a straight segment, in the cancellation-free
    form and with the finite-core rule of the module docstring.

    Parameters
    ----------
    points : float64 (m, 3), C-contiguous, m
    starts, ends : float64 (n, 3), C-contiguous, m; no zero-length segment
    currents : float64 (n,), A
    radii : float64 (n,), m, >= 0
    out : float64 (m, 3), C-contiguous; overwritten with B in T

    Parallel over blocks of target points; each thread writes only its own rows of ``out``.
    A target on a zero-radius segment gives a non-finite row.
    """
    m = points.shape[0]
    tab = _segment_table(starts, ends, currents, radii)
    blk = _block_size(m)
    for kb in prange((m + blk - 1) // blk):
        i0 = kb * blk
        w = min(m, i0 + blk) - i0
        acc = _block(points, i0, w, tab, 3)
        for i in range(w):
            for k in range(3):
                out[i0 + i, k] = MU0_OVER_4PI * acc[k, i]


@njit(cache=True, parallel=True, error_model="numpy")
def b_and_a_from_segments(points, starts, ends, currents, radii, b_out, a_out):
    """B (T) and the vector potential A (T m) of straight segments at target points.

    Formulas: Hanson & Hirshman (2002), A and B of a straight segment, in the
    cancellation-free forms and with the finite-core rule of the module docstring.

    Parameters
    ----------
    points : float64 (m, 3), C-contiguous, m
    starts, ends : float64 (n, 3), C-contiguous, m; no zero-length segment
    currents : float64 (n,), A
    radii : float64 (n,), m, >= 0
    b_out, a_out : float64 (m, 3), C-contiguous; overwritten with B and A

    Parallel over blocks of target points; each thread writes only its own rows.
    A target on a zero-radius segment gives a non-finite row of ``b_out``.
    """
    m = points.shape[0]
    tab = _segment_table(starts, ends, currents, radii)
    blk = _block_size(m)
    for kb in prange((m + blk - 1) // blk):
        i0 = kb * blk
        w = min(m, i0 + blk) - i0
        acc = _block(points, i0, w, tab, 6)
        for i in range(w):
            for k in range(3):
                b_out[i0 + i, k] = MU0_OVER_4PI * acc[k, i]
                a_out[i0 + i, k] = MU0_OVER_4PI * acc[3 + k, i]
