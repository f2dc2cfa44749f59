"""Peak |B| on the conductor surface: Ampere's law for a thin ring, a dense naive sampling, linearity."""

from __future__ import annotations

import math

import numpy as np
import pytest

from fieldenergy.discretise import discretise
from fieldenergy.fields import b_field
from fieldenergy.geometry import section_frame
from fieldenergy.model import (
    Case,
    CirclePath,
    Circuit,
    Coil,
    RacetrackPath,
    RectSection,
    RoundSection,
)
from fieldenergy.peak_field import boundary_offsets, peak_field

MU0 = 4.0e-7 * math.pi


def test_thin_ring_surface_field_is_amperes_law() -> None:
    """|B| at the surface of a thin round wire is mu0 I / (2 pi a) (Ampere's law; common practice);
    the bend of a ring of radius R adds O((a/R) ln(8R/a)), here about 5e-3, inside the 1e-2 allowed."""
    radius, wire, current = 0.2, 2e-4, 50.0
    ring = Coil("ring", "c", RoundSection(wire), CirclePath(radius, [0.0, 0.0, 0.0], [0, 0, 1]))
    model = discretise(Case("ring", (Circuit("c", current),), (ring,)))
    pk = peak_field(model, [current])
    assert pk.value[0] == pytest.approx(MU0 * current / (2 * math.pi * wire), rel=1e-2)
    rho = math.hypot(np.linalg.norm(pk.location[0][:2]) - radius, pk.location[0][2])
    assert abs(rho - wire) <= 1.01 * model.sagittas[0]  # on the surface around the chord


def _pair() -> Case:
    track = Coil(
        "track",
        "a",
        RectSection(0.012, 0.008),
        RacetrackPath(0.12, 0.05, [0, 0, 0], [0, 0, 1], [1, 0, 0]),
        turns=20,
    )
    ring = Coil("ring", "b", RoundSection(1.5e-3), CirclePath(0.06, [0.1, 0.0, 0.025], [0, 0, 1]), turns=1)
    return Case("pair", (Circuit("a", 30.0), Circuit("b", 400.0)), (track, ring))


def _dense_peak(case: Case, c: int, n_straight: int, n_around: int) -> float:
    """Naive twin: |B| on a dense grid of one coil's surface around its chords: every curved
    chord at its midpoint, every straight chord at n_straight points, n_around round the section."""
    model = discretise(case)
    fil = model.filaments
    rows = np.flatnonzero(fil.coil == c)
    n_chords = len(rows) // int(np.count_nonzero(model.filament_coil == c))
    curve, section = model.curves[c], model.coil_sections[c]
    t0, t1 = fil.t0[rows[:n_chords]], fil.t1[rows[:n_chords]]
    t, centre = [], []
    for a, b in zip(t0, t1):
        straight = curve.straight[curve.piece_of(0.5 * (a + b))]
        f = (np.arange(n_straight) + 0.5) / n_straight if straight else np.array([0.5])
        p0, p1 = curve.position([a, b])
        t.append(a + f * (b - a))
        centre.append(p0 + f[:, None] * (p1 - p0))
    t, centre = np.concatenate(t), np.concatenate(centre)
    e_w, e_h = section_frame(curve, t)
    uv = boundary_offsets(section, np.arange(n_around) / n_around)
    pts = (centre[:, None, :] + uv[None, :, :1] * e_w[:, None, :] + uv[None, :, 1:] * e_h[:, None, :]).reshape(-1, 3)
    return float(np.max(np.linalg.norm(b_field(pts, fil, case.currents), axis=1)))


@pytest.mark.parametrize("coil", [0, 1])
def test_peak_matches_a_dense_sampling(coil: int) -> None:
    """The coarse-then-refined search finds the largest |B| of a dense sampling: never less than
    it by more than the dense grid's own sampling error (2e-3), never more than 1 %."""
    case = _pair()
    pk = peak_field(discretise(case), case.currents)
    dense = _dense_peak(case, coil, 200, 96)
    assert dense * (1 - 2e-3) <= pk.value[coil] <= dense * 1.01, f"{pk.value[coil]} against {dense}"


def test_peak_is_linear_in_current() -> None:
    """B is linear in the currents, so the peak scales with them (Biot-Savart; common practice)."""
    case = _pair()
    model = discretise(case)
    one = peak_field(model, case.currents).value
    three = peak_field(model, 3.0 * case.currents).value
    assert np.allclose(three, 3.0 * one, rtol=1e-12)


@pytest.mark.parametrize(
    ("section", "s", "expected"),
    [
        (
            RectSection(0.02, 0.01),
            [0.0, 0.125, 0.25, 0.5, 0.75, 0.875],
            [[0.01, -0.005], [0.01, 0.0], [0.01, 0.005], [-0.01, 0.005], [-0.01, -0.005], [0.0, -0.005]],
        ),
        (RoundSection(0.003), [0.0, 0.25, 0.5], [[0.003, 0.0], [0.0, 0.003], [-0.003, 0.0]]),
    ],
)
def test_boundary_offsets(section: object, s: list[float], expected: list[list[float]]) -> None:
    """Boundary points go round the rectangle corner to corner, and round the circle (geometry)."""
    assert np.allclose(boundary_offsets(section, s), expected, atol=1e-15)
