"""Published closed forms used as references in the tests; each cites its source.

All functions take and return SI values (m, A, H, T). "From memory" marks a formula written
down from memory of the cited source rather than copied from it; the tests that use it check
it against an independent computation where they can.
"""

from __future__ import annotations

import math

from scipy.special import ellipe, ellipk, ellipkm1

MU0 = 4.0e-7 * math.pi

# ----------------------------------------------------------------------------------------------
# Inductance references: straight conductors, parallel filaments, loops, solenoids, toroids.
# ----------------------------------------------------------------------------------------------


def straight_wire_self_inductance(length: float, gmd: float) -> float:
    """Partial self-inductance of a straight conductor whose section has GMD ``gmd`` (H).

    L = mu0 l / (2 pi) [asinh(l/g) - sqrt(1 + (g/l)^2) + g/l]: the mutual inductance of two
    parallel filaments of length l at distance g. With g = a exp(-1/4) it is the self-inductance
    of a round wire of radius a including its internal inductance.

    Source: F. W. Grover, Inductance Calculations (1946), straight round wire and equal
    parallel filaments; E. B. Rosa, Bull. Bureau of Standards 4 (1908). From memory.
    """
    x = length / gmd
    return MU0 * length / (2.0 * math.pi) * (math.asinh(x) - math.sqrt(1.0 + 1.0 / x**2) + 1.0 / x)


def parallel_filaments_mutual(length1: float, length2: float, distance: float, offset: float) -> float:
    """Mutual inductance of two parallel straight filaments (H), currents in the same sense.

    Filament 1 runs from 0 to ``length1`` along x; filament 2 from ``offset`` to
    ``offset + length2``, at perpendicular ``distance``. With F(u) = u asinh(u/d) - sqrt(u^2+d^2),
    M = mu0/(4 pi) [F(l1 - s) + F(s + l2) - F(s) - F(l1 - l2 - s)], s = offset.

    Source: F. W. Grover, Inductance Calculations (1946), mutual inductance of parallel
    filaments of unequal lengths with offset ends (Grover writes it with the four lengths
    alpha, beta, gamma, delta); here in the antiderivative form, F'' = 1/sqrt(u^2 + d^2).
    From memory.
    """

    def f(u: float) -> float:
        return u * math.asinh(u / distance) - math.hypot(u, distance)

    s = offset
    total = f(length1 - s) + f(s + length2) - f(s) - f(length1 - length2 - s)
    return 1.0e-7 * total


def coaxial_loops_mutual(radius1: float, radius2: float, z: float) -> float:
    """Mutual inductance of two coaxial circular filaments at axial separation ``z`` (H).

    M = mu0 sqrt(R1 R2) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4 R1 R2 / ((R1 + R2)^2 + z^2);
    scipy's ellipk/ellipe take the parameter m = k^2. K is evaluated from 1 - m (ellipkm1),
    which keeps its accuracy for nearly touching loops (m -> 1).

    Source: J. C. Maxwell, A Treatise on Electricity and Magnetism (1873), vol. 2, art. 701.
    """
    denom = (radius1 + radius2) ** 2 + z * z
    m = 4.0 * radius1 * radius2 / denom
    m1 = ((radius1 - radius2) ** 2 + z * z) / denom
    k = math.sqrt(m)
    return MU0 * math.sqrt(radius1 * radius2) * ((2.0 / k - k) * ellipkm1(m1) - 2.0 / k * ellipe(m))


def round_wire_loop_self_inductance(radius: float, wire_radius: float) -> float:
    """Self-inductance of a circular loop of round wire, uniform current (H), a << R.

    L = mu0 R (ln(8R/a) - 7/4): the thin-wire formula with the internal term 1/4; its error
    is O((a/R)^2 ln(R/a)).

    Source: E. B. Rosa and F. W. Grover, Bull. Bureau of Standards 8 (1912); Grover,
    Inductance Calculations (1946), circular ring of round wire. From memory.
    """
    return MU0 * radius * (math.log(8.0 * radius / wire_radius) - 1.75)


def rectangle_loop_self_inductance(side1: float, side2: float, wire_radius: float) -> float:
    """Self-inductance of a rectangular loop of round wire, uniform current (H).

    Grover's method for polygons: the sum of the partial self-inductances of the four sides
    (straight conductors, GMD a exp(-1/4)) minus the mutual inductances of the opposite sides
    (parallel filaments at the side distance, each pair counted twice); adjacent sides are
    perpendicular and have none. Corner effects are neglected, as in Grover's formula.

    Source: F. W. Grover, Inductance Calculations (1946), rectangle of round wire, derived here
    from :func:`straight_wire_self_inductance` and :func:`parallel_filaments_mutual`.
    """
    gmd = wire_radius * math.exp(-0.25)
    selfs = 2.0 * straight_wire_self_inductance(side1, gmd) + 2.0 * straight_wire_self_inductance(side2, gmd)
    mutuals = 2.0 * parallel_filaments_mutual(side1, side1, side2, 0.0)
    mutuals += 2.0 * parallel_filaments_mutual(side2, side2, side1, 0.0)
    return selfs - mutuals


def nagaoka_coefficient(radius: float, length: float) -> float:
    """Nagaoka's coefficient K of a cylindrical current sheet of ``radius`` and ``length``.

    K = 4 / (3 pi k') [(k'^2 / k^2) (K(k) - E(k)) + E(k) - k], k^2 = 4 R^2 / (4 R^2 + l^2),
    k'^2 = 1 - k^2; K -> 1 - 8R / (3 pi l) for a long sheet.

    Source: H. Nagaoka, J. Coll. Sci. Tokyo 27 (1909); the elliptic-integral form of
    L. Lorenz's formula (Lorenz 1879). From memory.
    """
    m = 4.0 * radius**2 / (4.0 * radius**2 + length**2)
    k = math.sqrt(m)
    kp = length / math.sqrt(4.0 * radius**2 + length**2)
    big_k = ellipk(m)
    big_e = ellipe(m)
    return 4.0 / (3.0 * math.pi * kp) * ((kp * kp / m) * (big_k - big_e) + big_e - k)


def solenoid_current_sheet_inductance(radius: float, length: float, turns: float) -> float:
    """Self-inductance of a cylindrical current sheet (single-layer solenoid, no wire effects).

    L = mu0 pi R^2 N^2 / l * K (Lorenz 1879, with Nagaoka's coefficient K, Nagaoka 1909).
    From memory.
    """
    return MU0 * math.pi * radius**2 * turns**2 / length * nagaoka_coefficient(radius, length)


def toroid_rectangular_inductance(
    turns: float, height: float, inner_radius: float, outer_radius: float
) -> float:
    """Self-inductance of a toroid of rectangular cross-section, N turns, tight winding (H).

    L = mu0 N^2 h ln(b/a) / (2 pi), a and b the inner and outer radii, h the height.

    Source: common practice (Ampere's law for a uniform toroidal current sheet), from memory.
    """
    return MU0 * turns**2 * height * math.log(outer_radius / inner_radius) / (2.0 * math.pi)


def loop_axial_field(radius: float, current: float, z: float) -> float:
    """Axial flux density on the axis of a circular filament loop at distance ``z`` (T).

    B = mu0 I R^2 / (2 (R^2 + z^2)^(3/2)). Source: Biot-Savart law, common practice; from memory.
    """
    return MU0 * current * radius**2 / (2.0 * (radius**2 + z * z) ** 1.5)


def helmholtz_centre_field(radius: float, turns: float, current: float) -> float:
    """Flux density at the centre of a Helmholtz pair (two N-turn loops, spacing R) (T).

    B = (4/5)^(3/2) mu0 N I / R. Source: common practice (H. von Helmholtz's coil pair), from
    memory.
    """
    return (0.8**1.5) * MU0 * turns * current / radius
