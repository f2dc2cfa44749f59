"""Lorentz forces and torques: Newton's third law, virtual work, Maxwell's coaxial loops, m x B."""

from __future__ import annotations

import math
from dataclasses import replace

import analytic
import numpy as np
import pytest

from fieldenergy.discretise import discretise
from fieldenergy.energy.from_potential import grouped_inductance
from fieldenergy.fields import b_field
from fieldenergy.forces import coil_centroids, coil_forces
from fieldenergy.model import (
    Case,
    CirclePath,
    Circuit,
    Coil,
    CurvePath,
    Discretisation,
    PolygonPath,
    RacetrackPath,
    RectSection,
    Rotate,
    RoundSection,
    Translate,
)
from fieldenergy.winding_forces import force_distribution

MU0 = 4.0e-7 * math.pi

#: Gauss-Legendre rules are chosen for ~1e-8; sums over thousands of segments keep ~1e-9.
QUADRATURE_RTOL = 1.0e-7

#: The partial inductances are accurate to ~1e-9 relative and a step h = 1e-3 of the coil size
#: changes M by ~1e-3, so the difference quotient carries ~1e-6 relative error.
VIRTUAL_WORK_RTOL = 2.0e-5


def _two_coil_case(offset: list[float], tilt: float = 0.0) -> Case:
    """A round-wire circle and a rectangular-pack racetrack, tilted and offset: no symmetry."""
    ring = Coil("ring", "a", RoundSection(2e-3), CirclePath(0.12, [0, 0, 0], [0, 0, 1]), turns=3)
    track = Coil(
        "track",
        "b",
        RectSection(8e-3, 6e-3),
        RacetrackPath(0.1, 0.05, [0.02, -0.01, 0.0], [0.1, 0.2, 1.0], [1.0, 0.0, 0.0]),
        turns=5,
        transforms=(Rotate([1.0, 0.3, 0.0], tilt, [0.0, 0.0, 0.0]), Translate(offset)),
    )
    # coarse chords and a 2 x 1 pack keep the Neumann sums quick; virtual work holds at any level
    disc = Discretisation(sagitta_fraction=2e-3, section_grid=(2, 1))
    return Case("pair", (Circuit("a", 40.0), Circuit("b", -25.0)), (ring, track), disc)


def _mutual(case: Case, level: int = 0) -> float:
    model = discretise(case, level=level)
    return float(grouped_inductance(model.filaments, model.filaments.coil, 2)[0, 1])


def _derivative(f, h: float) -> float:
    """Five-point central difference, error O(h^4) (common practice)."""
    return (-f(2 * h) + 8 * f(h) - 8 * f(-h) + f(-2 * h)) / (12 * h)


def test_newtons_third_law_between_coils() -> None:
    """F_ab = -F_ba and tau_ab = -tau_ba about a common point (closed circuits; common practice)."""
    case = _two_coil_case([0.03, 0.02, 0.07], tilt=0.4)
    model = discretise(case)
    res = coil_forces(model, case.currents, about=[0.01, 0.02, 0.03])
    scale = np.linalg.norm(res.force[0])
    assert np.linalg.norm(res.force[0] + res.force[1]) < QUADRATURE_RTOL * scale
    t_scale = np.linalg.norm(res.torque[0])
    assert np.linalg.norm(res.torque[0] + res.torque[1]) < QUADRATURE_RTOL * t_scale


@pytest.mark.parametrize("axis", [0, 1, 2])
def test_force_equals_virtual_work(axis: int) -> None:
    """F = grad (1/2 I^T L I) at constant current = I_a I_b dM/dx (virtual work; common practice),
    with M from the A.J (Neumann) route on the same chords, translated rigidly."""
    base = np.array([0.03, 0.02, 0.07])
    step = np.zeros(3)
    step[axis] = 1.0
    case = _two_coil_case(list(base), tilt=0.4)
    force = coil_forces(discretise(case), case.currents).force[1, axis]
    h = 1e-3 * 0.2
    dm = _derivative(lambda d: _mutual(_two_coil_case(list(base + d * step), tilt=0.4)), h)
    expected = case.currents[0] * case.currents[1] * dm
    assert force == pytest.approx(expected, rel=VIRTUAL_WORK_RTOL)


def test_torque_equals_virtual_work() -> None:
    """tau . n = I_a I_b dM/dtheta for a rotation about n through the torque point (virtual work)."""
    case = _two_coil_case([0.03, 0.02, 0.07], tilt=0.4)
    model = discretise(case)
    about = np.array([0.05, 0.0, 0.07])
    axis = np.array([0.2, 1.0, 0.4]) / np.linalg.norm([0.2, 1.0, 0.4])
    torque = coil_forces(model, case.currents, about=about).torque[1]

    def mutual(angle: float) -> float:
        moved = replace(case.coils[1], transforms=case.coils[1].transforms + (Rotate(axis, angle, about),))
        return _mutual(replace(case, coils=(case.coils[0], moved)))

    dm = _derivative(mutual, 1e-3)
    assert float(torque @ axis) == pytest.approx(case.currents[0] * case.currents[1] * dm, rel=VIRTUAL_WORK_RTOL)


def test_coaxial_loops_against_maxwell_converge_at_order_two() -> None:
    """F_z = I1 I2 dM/dz with Maxwell's M of coaxial circles (Maxwell 1873, vol. 2 art. 701),
    differentiated by a five-point difference of tests/analytic.coaxial_loops_mutual (h = 1e-4 z:
    truncation ~1e-16). The chords' error falls as h^2."""
    r1, r2, z = 0.1, 0.08, 0.03
    expected = _derivative(lambda d: analytic.coaxial_loops_mutual(r1, r2, z + d), 1e-4 * z)
    errors = []
    for level in (1, 2, 3):
        loops = (
            Coil("a", "a", RoundSection(1e-3), CirclePath(r1, [0, 0, 0], [0, 0, 1])),
            Coil("b", "b", RoundSection(1e-3), CirclePath(r2, [0, 0, z], [0, 0, 1])),
        )
        model = discretise(Case("coaxial", (Circuit("a", 1.0), Circuit("b", 1.0)), loops), level=level)
        errors.append(abs(coil_forces(model, [1.0, 1.0]).force[1, 2] / expected - 1.0))
    slope = -np.polyfit(np.arange(3), np.log2(errors), 1)[0]
    assert abs(slope - 2.0) < 0.15, f"observed order {slope:.3f}, errors {errors}"
    assert errors[-1] < 1e-5, f"finest relative error {errors[-1]:.2e}"


def test_torque_on_small_tilted_loop_is_m_cross_b() -> None:
    """tau = m x B for a small loop in a nearly uniform field (magnetic dipole; common practice).
    The field is a Helmholtz pair's centre field (uniform to (r/R)^4 ~ 1e-8); m uses the vector
    area of the loop's chord polygon, so the chords cost nothing here."""
    big = 1.0
    pair = [
        Coil(n, "field", RoundSection(5e-3), CirclePath(big, [0, 0, z], [0, 0, 1]), turns=10)
        for n, z in (("top", 0.5 * big), ("bottom", -0.5 * big))
    ]
    normal = [0.0, math.sin(0.5), math.cos(0.5)]
    probe = Coil("probe", "probe", RoundSection(2e-4), CirclePath(0.01, [0.0, 0.0, 0.0], normal))
    case = Case("dipole", (Circuit("field", 200.0), Circuit("probe", 3.0)), (*pair, probe))
    model = discretise(case)
    torque = coil_forces(model, case.currents, about=[0.0, 0.0, 0.0]).torque[2]
    fil = model.filaments
    mine = fil.coil == 2
    area = 0.5 * np.cross(fil.starts[mine], fil.ends[mine]).sum(axis=0)
    b = b_field([[0.0, 0.0, 0.0]], fil, [200.0, 0.0])[0]
    expected = 3.0 * np.cross(area, b)
    assert np.linalg.norm(torque - expected) < 1e-6 * np.linalg.norm(expected)


@pytest.mark.parametrize(("level", "bound"), [(0, 1e-3), (2, 1e-4)])
def test_zero_net_self_force_on_a_closed_rigid_coil(level: int, bound: float) -> None:
    """The own field exerts no net force on a closed rigid conductor (common practice). The
    distribution samples the field at chord midpoints, which is not antisymmetric pair by pair,
    so its sum is a sampling error: bounded against the sum of the magnitudes and shrinking
    with refinement (measured 4e-4 at level 0, 3e-6 at level 2)."""
    path = CurvePath("0.1*cos(t) + 0.02*cos(2*t)", "0.07*sin(t)", "0.015*sin(3*t)", 0.0, 2 * math.pi)
    coil = Coil("wavy", "c", RectSection(6e-3, 4e-3), path, turns=10)
    model = discretise(Case("one", (Circuit("c", 100.0),), (coil,)), level=level)
    dist = force_distribution(model, [100.0])
    fil = model.filaments
    length = np.linalg.norm(fil.ends - fil.starts, axis=1)
    net = (dist.per_length * length[:, None]).sum(axis=0)
    gross = (np.linalg.norm(dist.per_length, axis=1) * length).sum()
    assert np.linalg.norm(net) < bound * gross, f"net / gross = {np.linalg.norm(net) / gross:.2e}"


def test_hoop_force_of_a_ring_against_virtual_work() -> None:
    """Force per unit length on a thin ring from its own field, against virtual work on
    L = mu0 R (ln(8R/a) - 7/4) (Rosa & Grover 1912): f = I^2/(4 pi R) dL/dR
    = mu0 I^2/(4 pi R) (ln(8R/a) - 3/4). The model samples the finite-core field on the centre
    line, not the section average: they differ by O(1/ln(8R/a)), here within 5 %."""
    radius, wire, current = 0.1, 1e-3, 500.0
    ring = Coil("ring", "c", RoundSection(wire), CirclePath(radius, [0, 0, 0], [0, 0, 1]))
    dist = force_distribution(discretise(Case("ring", (Circuit("c", current),), (ring,)), level=1), [current])
    expected = MU0 * current**2 / (4 * math.pi * radius) * (math.log(8 * radius / wire) - 0.75)
    assert dist.peak == pytest.approx(expected, rel=0.05)
    i = int(np.argmax(np.linalg.norm(dist.winding_per_length, axis=1)))
    assert np.linalg.norm(dist.peak_location[:2]) == pytest.approx(radius, rel=1e-3)  # on the centre line
    outward = dist.peak_location / np.linalg.norm(dist.peak_location)
    assert dist.winding_per_length[i] @ outward > 0.999 * dist.peak  # the hoop force points outward


def test_centroid_of_a_circle_is_its_centre() -> None:
    """The length-weighted centroid of a circle's chord polygon is its centre (symmetry)."""
    coil = Coil("c", "c", RoundSection(1e-3), CirclePath(0.2, [0.1, -0.3, 0.5], [1, 1, 0]))
    model = discretise(Case("c", (Circuit("c", 1.0),), (coil,)))
    assert np.allclose(coil_centroids(model)[0], [0.1, -0.3, 0.5], atol=1e-12)


def test_force_along_a_long_narrow_loop_is_the_parallel_wire_force() -> None:
    """Mid-way along a long narrow rectangular loop the force per unit length is that between two
    parallel wires, mu0 I^2 / (2 pi w), pushing the sides apart (Ampere's force law; common
    practice); the short ends 5 m away change it by ~(w/L)^2 = 4e-4. Corners are resolved: the
    largest value sits near one."""
    length, width, current = 10.0, 0.1, 100.0
    corners = [[0, 0, 0], [length, 0, 0], [length, width, 0], [0, width, 0]]
    loop = Coil("loop", "c", RoundSection(1e-3), PolygonPath(corners))
    dist = force_distribution(discretise(Case("loop", (Circuit("c", current),), (loop,))), [current])
    mid = 0.5 * (dist.starts + dist.ends)
    i = int(np.argmin(np.linalg.norm(mid - [0.5 * length, 0.0, 0.0], axis=1)))
    expected = MU0 * current**2 / (2 * math.pi * width)
    assert dist.winding_per_length[i][1] == pytest.approx(-expected, rel=1e-3)  # away from the other side
    assert dist.peak > expected
    assert min(np.linalg.norm(dist.peak_location - np.array(corners, dtype=float), axis=1)) < 0.05
