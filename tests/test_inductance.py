"""Inductance matrices and stored energy (the 1/2 integral of A.J route) against closed forms.

Sources of every reference value are in tests/analytic.py and next to each check.
"""

from __future__ import annotations

import doctest
import math

import analytic
import numba
import numpy as np
import pytest
from scipy import integrate

from fieldenergy.energy import from_potential
from fieldenergy.energy.from_potential import (
    coil_inductance_matrix,
    grouped_inductance,
    inductance_matrix,
    partial_inductances,
    stored_energy,
)
from fieldenergy.errors import CaseError, DiscretisationError, GeometryError
from fieldenergy.model.filaments import Filaments

#: Sums of many pairs, each within the kernel's per-pair accuracy 1e-9 of the total.
SUM_TOL = 1e-9
#: Identical pair values summed in another order: only rounding differs.
ROUNDING_TOL = 1e-12


def _polygon(radius: float, n: int, z: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Inscribed regular n-gon of a circle of ``radius`` in the plane at height z."""
    t = np.linspace(0.0, 2.0 * np.pi, n + 1)
    p = np.stack([radius * np.cos(t), radius * np.sin(t), np.full_like(t, z)], axis=1)
    return p[:-1], p[1:]


def _slope(ns: list[int], errors: list[float]) -> float:
    return float(np.polyfit(np.log(ns), np.log(np.abs(errors)), 1)[0])


def test_coaxial_polygons_converge_to_maxwell() -> None:
    """Coaxial loops as inscribed N-gons: O(N^-2), Richardson to 1e-6; Maxwell (1873)."""
    r1, r2, z = 0.4, 0.25, 0.15
    want = analytic.coaxial_loops_mutual(r1, r2, z)
    ns, values = [24, 48, 96, 192, 384], []
    for n in ns:
        s1, e1 = _polygon(r1, n)
        s2, e2 = _polygon(r2, n, z)
        loops = Filaments.from_segments(
            np.vstack([s1, s2]),
            np.vstack([e1, e2]),
            radii=1e-3,
            filament=np.repeat([0, 1], n),
            circuit=np.repeat([0, 1], n),
        )
        values.append(inductance_matrix(loops)[0, 1])
    rate = -_slope(ns, [v / want - 1.0 for v in values])
    assert abs(rate - 2.0) <= 0.15, f"observed rate {rate:.3f}, expected 2"
    extrapolated = (4.0 * values[-1] - values[-2]) / 3.0
    assert abs(extrapolated / want - 1.0) <= 1e-6, f"Richardson error {extrapolated / want - 1.0:.2e}"


def _ring(n: int, radius: float, a: float) -> float:
    s, e = _polygon(radius, n)
    return inductance_matrix(Filaments.from_segments(s, e, radii=a))[0, 0]


def test_round_wire_loop_matches_thin_wire_formula() -> None:
    """Circular loop of round wire, a/R = 1e-3: Rosa & Grover (1912), Grover (1946).

    The chord model tends to Maxwell's GMD limit, the mutual inductance of two coaxial rings of
    radius R at distance g = a exp(-1/4) (Maxwell 1873, from memory), which the thin-wire
    formula approximates to O((a/R)^2 ln(R/a)), here about 1.4e-7: hence 1e-5 against the thin
    formula (room for that term) and 1e-8 against the GMD limit (Richardson remainder O(N^-4)).
    """
    radius, a = 1.0, 1e-3
    ns = [1000, 2000, 4000]
    values = [_ring(n, radius, a) for n in ns]
    limit = analytic.coaxial_loops_mutual(radius, radius, a * math.exp(-0.25))
    rate = -_slope(ns, [v / limit - 1.0 for v in values])
    assert abs(rate - 2.0) <= 0.15, f"observed rate {rate:.3f}, expected 2"
    extrapolated = (4.0 * values[-1] - values[-2]) / 3.0
    thin = analytic.round_wire_loop_self_inductance(radius, a)
    assert abs(extrapolated / thin - 1.0) <= 1e-5, f"vs thin-wire formula {extrapolated / thin - 1.0:.2e}"
    assert abs(extrapolated / limit - 1.0) <= 1e-8, f"vs GMD limit {extrapolated / limit - 1.0:.2e}"


def test_round_wire_loop_converges_with_chords_shorter_than_wire() -> None:
    """Chords of 1.6 a, 0.79 a and 0.39 a: the error keeps falling as N^-2 (no log divergence).

    Reference: Maxwell's GMD limit as above (Maxwell 1873, from memory).
    """
    radius, a = 1.0, 4e-3
    ns = [1000, 2000, 4000]
    limit = analytic.coaxial_loops_mutual(radius, radius, a * math.exp(-0.25))
    errors = [_ring(n, radius, a) / limit - 1.0 for n in ns]
    rate = -_slope(ns, errors)
    assert abs(rate - 2.0) <= 0.15, (
        f"observed rate {rate:.3f} with chords down to {2 * np.pi * radius / ns[-1] / a:.2f} a"
    )


def test_rectangle_loop_matches_grover() -> None:
    """Rectangle of round wire, each side in 4 chords of one chain: Grover (1946).

    Grover's sum takes each side's self-inductance at the GMD and opposite sides at their
    centre distance d. The chain rule softens by g only the opposite-side pairs near a corner
    (arc <= 2 x chord), by at most (g/d)^2 / 2 = 7.6e-6 of such a pair; measured 4.2e-7 of L.
    """
    w, h, a = 0.3, 0.2, 1e-3
    c = np.array([[0, 0, 0], [w, 0, 0], [w, h, 0], [0, h, 0], [0, 0, 0]], dtype=float)
    pts = np.array([c[k] + (c[k + 1] - c[k]) * t for k in range(4) for t in np.arange(4) / 4])
    got = inductance_matrix(Filaments.from_segments(pts, np.roll(pts, -1, axis=0), radii=a))[0, 0]
    assert abs(got / analytic.rectangle_loop_self_inductance(w, h, a) - 1.0) <= 1e-6


def _three_loops(scale: float = 1.0, n: int = 48) -> Filaments:
    """Three tilted circular loops of round wire, one circuit and one chain each (seeded)."""
    rng = np.random.default_rng(3)
    starts, ends = [], []
    for k in range(3):
        s, e = _polygon(rng.uniform(0.1, 0.3), n)
        axis = rng.normal(size=3)
        q, _ = np.linalg.qr(np.column_stack([axis, rng.normal(size=(3, 2))]))
        centre = np.array([0.7 * k, rng.uniform(-0.1, 0.1), rng.uniform(-0.1, 0.1)])
        starts.append(s @ q.T + centre)
        ends.append(e @ q.T + centre)
    ids = np.repeat(np.arange(3), n)
    return Filaments.from_segments(
        scale * np.vstack(starts),
        scale * np.vstack(ends),
        radii=scale * 2e-3,
        filament=ids,
        circuit=ids,
        coil=ids,
    )


def test_matrix_is_symmetric_positive_definite() -> None:
    """Invariant (common practice): L = L^T, all eigenvalues > 0."""
    mat = inductance_matrix(_three_loops())
    assert np.array_equal(mat, mat.T)
    eig = np.linalg.eigvalsh(mat)
    assert eig.min() > 0.0, f"eigenvalues {eig}"


def test_energy_is_quadratic_in_current() -> None:
    """W = 1/2 I^T L I, so doubling every current multiplies the energy by 4 (common practice)."""
    loops = _three_loops()
    currents = np.array([3.0, -1.5, 2.0])
    w1, w2 = stored_energy(loops, currents), stored_energy(loops, 2.0 * currents)
    assert abs(w2 / w1 - 4.0) <= ROUNDING_TOL
    assert abs(w1 / (0.5 * currents @ inductance_matrix(loops) @ currents) - 1.0) <= ROUNDING_TOL


def test_inductance_scales_with_size() -> None:
    """Scaling geometry and wire by 3 scales L by 3 (Neumann's formula is homogeneous of degree 1)."""
    base, big = inductance_matrix(_three_loops()), inductance_matrix(_three_loops(scale=3.0))
    assert np.max(np.abs(big / (3.0 * base) - 1.0)) <= SUM_TOL


def test_rigid_motion_changes_nothing() -> None:
    """Rotation plus translation leaves every entry unchanged, up to the per-pair accuracy."""
    loops = _three_loops()
    q, _ = np.linalg.qr(np.random.default_rng(5).normal(size=(3, 3)))
    shift = np.array([1.5, -2.0, 0.7])
    moved = Filaments.from_segments(
        loops.starts @ q.T + shift,
        loops.ends @ q.T + shift,
        radii=2e-3,
        filament=loops.filament,
        circuit=loops.circuit,
    )
    assert np.max(np.abs(inductance_matrix(moved) / inductance_matrix(loops) - 1.0)) <= SUM_TOL


def test_grouped_sum_matches_dense_partials() -> None:
    """Weighted group sums of the dense partial matrix equal the grouped kernel's result."""
    rng = np.random.default_rng(7)
    s, e = _polygon(0.2, 30)
    starts = np.vstack([s, s + [0, 0, 0.01], s + [0, 0, 0.3]])
    ends = np.vstack([e, e + [0, 0, 0.01], e + [0, 0, 0.3]])
    fil = np.repeat([0, 1, 2], 30)
    coil = np.repeat([0, 0, 1], 30)
    weights = rng.uniform(0.5, 2.0, size=90)
    wires = Filaments.from_segments(
        starts, ends, weights=weights, radii=1e-3, filament=fil, coil=coil, circuit=0
    )
    dense = partial_inductances(wires) * np.outer(weights, weights)
    want = np.array([[dense[np.ix_(coil == p, coil == q)].sum() for q in range(2)] for p in range(2)])
    got = coil_inductance_matrix(wires, 2)
    assert np.max(np.abs(got / want - 1.0)) <= ROUNDING_TOL
    assert abs(inductance_matrix(wires)[0, 0] / got.sum() - 1.0) <= ROUNDING_TOL


def test_progress_reports_rows_and_leaves_result_unchanged() -> None:
    """The progress callback sees increasing row counts up to n; the sum is bit-identical."""
    loops = _three_loops()
    seen: list[int] = []
    with_progress = grouped_inductance(loops, loops.circuit, 3, progress=seen.append)
    assert seen == sorted(seen) and seen[-1] == loops.n_segments and len(seen) > 1
    assert np.array_equal(with_progress, inductance_matrix(loops))


def test_result_does_not_depend_on_thread_count() -> None:
    """Static chunks with one partial matrix each: 1 and 2 threads agree to the last bit."""
    loops = _three_loops()
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = inductance_matrix(loops)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = inductance_matrix(loops)
    finally:
        numba.set_num_threads(before)
    assert np.array_equal(one, two)


def _square(**changes: object) -> Filaments:
    corners = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], dtype=float)
    wire = Filaments.from_segments(corners, np.roll(corners, -1, axis=0), radii=1e-3)
    for name, (index, value) in changes.items():
        getattr(wire, name)[index] = value
    return wire


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"starts": ((1, 0), np.nan)}, "starts must be finite"),
        ({"weights": (2, np.inf)}, "weights must be finite"),
        ({"gmd": (0, 0.0)}, "gmd must be > 0"),
        ({"ends": (0, [0.0, 0.0, 0.0])}, "zero length"),
    ],
)
def test_bad_segments_are_refused(changes: dict, message: str) -> None:
    with pytest.raises(GeometryError, match=message):
        inductance_matrix(_square(**changes))


def test_bad_arguments_are_refused() -> None:
    wire = _square()
    with pytest.raises(GeometryError, match="shape"):
        grouped_inductance(wire, np.zeros(3, dtype=int), 1)
    with pytest.raises(GeometryError, match="range"):
        grouped_inductance(wire, np.array([0, 1, 2, 3]), 2)
    with pytest.raises(CaseError, match="circuit currents"):
        stored_energy(wire, [1.0, 2.0])
    with pytest.raises(DiscretisationError, match="rel_tol"):
        inductance_matrix(wire, rel_tol=0.0)
    with pytest.raises(TypeError, match="Filaments"):
        inductance_matrix(wire.starts)
    s, e = _polygon(1.0, from_potential.MAX_DENSE_SEGMENTS + 1)
    with pytest.raises(DiscretisationError, match="grouped_inductance"):
        partial_inductances(Filaments.from_segments(s, e, radii=1e-3))


def test_overlapping_filaments_are_refused() -> None:
    """Two filaments sharing a stretch of line have an infinite mutual inductance."""
    wires = Filaments.from_segments(
        [[0, 0, 0], [0.5, 0, 0]], [[1, 0, 0], [1.5, 0, 0]], radii=1e-3, filament=[0, 1]
    )
    with pytest.raises(GeometryError, match="overlap"):
        inductance_matrix(wires)
    with pytest.raises(GeometryError, match="overlap"):
        partial_inductances(wires)


def test_docstring_examples_run() -> None:
    assert doctest.testmod(from_potential).failed == 0


def test_nagaoka_matches_integrated_maxwell_loops() -> None:
    """Lorenz/Nagaoka current sheet (Nagaoka 1909) vs Maxwell's loops (1873) integrated over it."""
    radius, length, turns = 0.05, 0.2, 100.0
    f = lambda u: (length - u) * analytic.coaxial_loops_mutual(radius, radius, u)
    pieces = [(0.0, 1e-6), (1e-6, 1e-3), (1e-3, 0.1), (0.1, length)]
    sheet = (
        2.0
        * (turns / length) ** 2
        * sum(integrate.quad(f, lo, hi, epsabs=0.0, epsrel=1e-12, limit=200)[0] for lo, hi in pieces)
    )
    want = analytic.solenoid_current_sheet_inductance(radius, length, turns)
    assert abs(sheet / want - 1.0) <= 1e-10, "quadrature converged to ~1e-12"


def test_helmholtz_centre_is_two_loops() -> None:
    """Helmholtz centre field (from memory) = twice the on-axis loop field at R/2 (from memory)."""
    radius, turns, current = 0.3, 10.0, 2.0
    two = 2.0 * turns * analytic.loop_axial_field(radius, current, radius / 2.0)
    assert abs(analytic.helmholtz_centre_field(radius, turns, current) / two - 1.0) <= ROUNDING_TOL


def test_chain_pieces_split_disjoint_loops_and_find_closed_ones() -> None:
    """Two squares given one filament index are two closed pieces; an open run has loop 0."""
    sq = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], dtype=float)
    run = np.array([[5, 0, 0], [6, 0, 0], [6, 2, 0]], dtype=float)
    starts = np.vstack([sq, sq + [0, 0, 3], run[:-1]])
    ends = np.vstack([np.roll(sq, -1, axis=0), np.roll(sq, -1, axis=0) + [0, 0, 3], run[1:]])
    piece, arc, loop = Filaments.from_segments(starts, ends, radii=1e-3, filament=[0] * 8 + [1] * 2).chain_pieces()
    assert piece.tolist() == [0, 0, 0, 0, 1, 1, 1, 1, 2, 2]
    assert np.allclose(arc, [0.5, 1.5, 2.5, 3.5] * 2 + [0.5, 2.0], rtol=0, atol=1e-15)
    assert np.allclose(loop, [4.0] * 8 + [0.0] * 2, rtol=0, atol=1e-15)


def test_hairpin_legs_interact_at_their_centre_distance() -> None:
    """One chain out along x, across, and back at distance d = 3 GMD: the two long legs are
    two round wires, so their partial mutual inductance is that of parallel filaments at the
    centre distance d (Grover 1946, from memory), not at sqrt(d^2 + g^2) (1.5 % less)."""
    a = 1e-3
    g = a * math.exp(-0.25)
    d, length = 3.0 * g, 0.1
    pts = np.array([[0, 0, 0], [length, 0, 0], [length, d, 0], [0, d, 0]], dtype=float)
    wire = Filaments.from_segments(pts[:-1], pts[1:], radii=a)
    m = partial_inductances(wire)
    want = analytic.parallel_filaments_mutual(length, length, d, 0.0)
    assert abs(-m[0, 2] / want - 1.0) <= 1e-9
