"""End-to-end solves (case -> inductance matrix and energy) against published closed forms.

Each reference names its source. Cases are built from the model records directly; the
case-file route is covered by tests/test_cli.py.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from fieldenergy.model import (
    Case,
    CirclePath,
    Circuit,
    Coil,
    Discretisation,
    PolygonPath,
    RectSection,
    Rotate,
    RotationalRepeat,
    RoundSection,
    Translate,
)
from fieldenergy.model.options import SolveOptions
from fieldenergy.run import solve
from tests import analytic

#: The accuracy the default preset promises against closed forms (README, SolveOptions).
DEFAULT_TARGET = 1e-4
#: These tests check the A.J route; the field route is checked in tests/test_field_route.py.
FAST = SolveOptions.from_preset("fast").with_changes(field_route=False)
DEFAULT = SolveOptions.from_preset("default").with_changes(field_route=False)


def _loop(name: str, circuit: str, radius: float, wire: float, z: float = 0.0, turns: float = 1.0) -> Coil:
    return Coil(name, circuit, RoundSection(wire), CirclePath(radius, [0, 0, z], [0, 0, 1]), turns=turns)


def test_round_wire_loop_meets_default_target_and_estimate_is_honest() -> None:
    """L = mu0 R (ln(8R/a) - 7/4) for a/R = 1e-3 (Rosa & Grover 1912; Grover 1946).

    The formula's own error is O((a/R)^2 ln(R/a)) ~ 1e-5 relative at most, well inside the target.
    """
    case = Case("loop", (Circuit("c", 1.5),), (_loop("l", "c", 0.25, 2.5e-4),))
    ref = analytic.round_wire_loop_self_inductance(0.25, 2.5e-4)
    default = solve(case, DEFAULT)
    assert abs(default.inductance[0, 0] / ref - 1) < DEFAULT_TARGET
    assert default.energy == pytest.approx(0.5 * 1.5**2 * default.inductance[0, 0], rel=1e-14)
    assert default.observed_order == pytest.approx(2.0, abs=0.15), f"observed order {default.observed_order:.3f}"
    fast = solve(case, FAST)
    true_error = abs(fast.inductance[0, 0] / ref - 1)
    assert true_error <= fast.relative_error, f"fast: error {true_error:.2e} above estimate {fast.relative_error:.2e}"


def test_coaxial_loops_mutual_against_maxwell() -> None:
    """Maxwell's elliptic-integral mutual inductance of coaxial circles (Maxwell 1873)."""
    case = Case(
        "pair",
        (Circuit("a", 1.0), Circuit("b", -2.0)),
        (_loop("big", "a", 0.2, 1e-4), _loop("small", "b", 0.13, 1e-4, z=0.06, turns=3)),
    )
    r = solve(case, DEFAULT)
    ref = 3 * analytic.coaxial_loops_mutual(0.2, 0.13, 0.06)
    assert r.inductance[0, 1] == pytest.approx(ref, rel=DEFAULT_TARGET)
    assert r.inductance[0, 1] == r.inductance[1, 0]
    assert np.all(np.linalg.eigvalsh(r.inductance) > 0)
    k = r.inductance[0, 1] / math.sqrt(r.inductance[0, 0] * r.inductance[1, 1])
    assert r.coupling[0, 1] == pytest.approx(k, rel=1e-12)
    expected_energy = 0.5 * float(case.currents @ r.inductance @ case.currents)
    assert r.energy == pytest.approx(expected_energy, rel=1e-14)


def test_rectangular_loop_against_grover() -> None:
    """Rectangle of round wire from partial inductances of its sides (Grover 1946).

    Straight sides are exact; what remains is the thin-wire model, O((a/side)^2) ~ 1e-5.
    """
    case = Case(
        "rect",
        (Circuit("c", 1.0),),
        (Coil("r", "c", RoundSection(1e-3), PolygonPath([[0, 0, 0], [0.3, 0, 0], [0.3, 0.2, 0], [0, 0.2, 0]])),),
    )
    r = solve(case, DEFAULT)
    assert r.inductance[0, 0] == pytest.approx(analytic.rectangle_loop_self_inductance(0.3, 0.2, 1e-3), rel=1e-5)


def test_thin_winding_pack_against_lorenz_nagaoka() -> None:
    """A pack 1/2000 of its radius thick on a cylinder vs the current sheet (Lorenz 1879; Nagaoka 1909).

    Uniform density over a thickness t lowers L by about t/(3R) relative to a sheet at the mean
    radius (field falls linearly across the winding: a long-solenoid estimate, from memory):
    here 1.7e-4, so the tolerance is the default target plus that and the section estimate.
    """
    radius, length, turns, thick = 0.05, 0.2, 100.0, 0.05 / 2000
    case = Case(
        "solenoid",
        (Circuit("c", 1.0),),
        (Coil("s", "c", RectSection(thick, length), CirclePath(radius, [0, 0, 0], [0, 0, 1]), turns=turns),),
        Discretisation(section_grid=(1, 24)),
    )
    r = solve(case, FAST)
    ref = analytic.solenoid_current_sheet_inductance(radius, length, turns)
    tolerance = DEFAULT_TARGET + thick / (3 * radius) + r.relative_error
    assert abs(r.inductance[0, 0] / ref - 1) < tolerance
    assert r.section_error > 0, "a rectangular grid carries a section error estimate"


def test_toroid_of_rectangular_section() -> None:
    """mu0 N^2 h ln(b/a) / (2 pi) for a toroidal current sheet (common practice, from memory).

    N discrete rectangular turns of wire (radius proportional to the turn spacing) differ from
    the sheet by each wire's own local field, a term N * lambda beside N^2 * Lambda, plus a
    smaller O(1) part: L/N^2 = Lambda + lambda/N + mu/N^2. Solving N = 36, 72, 144 and
    extrapolating twice in 1/N (Richardson) recovers the sheet's Lambda; 2e-4 allows for the
    next term (the observed remainder is about 1e-5).
    """
    inner, outer, height = 0.1, 0.16, 0.05
    per_turn_squared = []
    for n in (36, 72, 144):
        turn = Coil(
            "turn",
            "c",
            RoundSection(0.05 * 2 * math.pi * inner / n),
            PolygonPath([[inner, 0, -height / 2], [outer, 0, -height / 2], [outer, 0, height / 2], [inner, 0, height / 2]]),
            repeat=RotationalRepeat(n, [0, 0, 1], [0, 0, 0]),
        )
        r = solve(Case("toroid", (Circuit("c", 1.0),), (turn,)), FAST)
        per_turn_squared.append(r.inductance[0, 0] / n**2)
    first = [2 * per_turn_squared[k + 1] - per_turn_squared[k] for k in range(2)]
    sheet = (4 * first[1] - first[0]) / 3
    ref = analytic.toroid_rectangular_inductance(1, height, inner, outer)
    assert sheet == pytest.approx(ref, rel=2e-4)


def test_energy_grows_as_current_squared_and_inductance_with_size() -> None:
    """W = 1/2 L I^2 (definition); L scales with linear size at fixed shape (dimensional analysis)."""
    base = Case("loop", (Circuit("c", 1.0),), (_loop("l", "c", 0.1, 1e-3),))
    doubled_current = Case("loop", (Circuit("c", 2.0),), base.coils)
    scaled = Case("loop", (Circuit("c", 1.0),), (_loop("l", "c", 0.3, 3e-3),))
    r1, r2, r3 = solve(base, FAST), solve(doubled_current, FAST), solve(scaled, FAST)
    assert r2.energy == pytest.approx(4 * r1.energy, rel=1e-12)
    assert r3.inductance[0, 0] == pytest.approx(3 * r1.inductance[0, 0], rel=1e-9)


def test_rigid_motion_of_the_whole_case_changes_nothing() -> None:
    """Invariance under rotation and translation (a property of the Neumann double integral)."""
    coils = (
        Coil("a", "p", RectSection(0.01, 0.006), CirclePath(0.12, [0, 0, 0], [0, 0, 1]), turns=10),
        Coil("b", "s", RoundSection(5e-4), CirclePath(0.05, [0.03, 0.01, 0.04], [0.3, 0.1, 1]), turns=4),
    )
    moves = (Rotate([1, 2, 3], 0.7, [0.1, 0, 0]), Translate([0.5, -0.2, 1.0]))
    moved = tuple(Coil(c.name, c.circuit, c.section, c.path, turns=c.turns, transforms=moves) for c in coils)
    circuits = (Circuit("p", 1.0), Circuit("s", 1.0))
    grid = Discretisation(section_grid=(2, 2))
    r1 = solve(Case("a", circuits, coils, grid), FAST)
    r2 = solve(Case("b", circuits, moved, grid), FAST)
    np.testing.assert_allclose(r2.inductance, r1.inductance, rtol=1e-9, atol=1e-9 * r1.inductance[0, 0])


def test_result_carries_settings_and_levels() -> None:
    case = Case("loop", (Circuit("c", 1.0),), (_loop("l", "c", 0.1, 1e-3),))
    r = solve(case, replace(SolveOptions.from_preset("fine"), field_route=False))
    assert r.options.preset == "fine" and len(r.levels) == 4
    counts = [lv.n_segments for lv in r.levels]
    assert counts == [counts[0] * 2**k for k in range(4)], "each level halves every curved chord"
