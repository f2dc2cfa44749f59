"""Neumann pair integrals of straight segments against quadrature and Grover's closed forms.

Sources of every reference value are in tests/analytic.py and next to each check.
"""

from __future__ import annotations

import math

import analytic
import numpy as np
import pytest
from scipy import integrate

from fieldenergy.energy import from_potential
from fieldenergy.energy.from_potential import inductance_matrix, partial_inductances
from fieldenergy.kernels import _neumann
from fieldenergy.model.filaments import Filaments

#: Per-pair accuracy the kernel promises; the quadrature reference is converged to ~1e-13.
PAIR_TOL = 1e-9
#: Sums of many same-sign pairs, each within PAIR_TOL.
SUM_TOL = 1e-9
#: The same pair values computed along two code paths: only rounding differs.
ROUNDING_TOL = 1e-12


def _pair_kernel(a0, a1, b0, b1, g: float) -> float:
    """The kernel's I = int int ds dt / sqrt(r^2 + g^2) for segments a and b."""
    geom = _neumann.segment_geometry(np.array([a0, b0], dtype=float), np.array([a1, b1], dtype=float))
    zt, nodes, wts, n_panel = _neumann._rules(from_potential.PAIR_RELATIVE_TOLERANCE)
    return _neumann.pair_integral(
        geom, 0, 1, g, zt, nodes, wts, from_potential.PAIR_RELATIVE_TOLERANCE, n_panel
    )


def _pair_reference(a0, a1, b0, b1, g: float) -> float:
    """Nested adaptive quadrature (scipy quad twice), split where the integrand is near-singular."""
    a0, a1, b0, b1 = (np.asarray(v, dtype=float) for v in (a0, a1, b0, b1))
    la, lb = np.linalg.norm(a1 - a0), np.linalg.norm(b1 - b0)
    ta, tb = (a1 - a0) / la, (b1 - b0) / lb

    def inner(s: float) -> float:
        w = a0 + s * ta - b0
        sp = float(w @ tb)
        h2 = float(np.sum(np.cross(w, tb) ** 2)) + g * g
        h = math.sqrt(h2)
        pts = [x for x in (sp - 30 * h, sp - h, sp, sp + h, sp + 30 * h) if 0.0 < x < lb]
        f = lambda t: 1.0 / math.sqrt((t - sp) ** 2 + h2)
        return integrate.quad(f, 0.0, lb, points=pts or None, epsabs=0.0, epsrel=1e-13, limit=200)[0]

    pts = []
    for q in (b0, b1):
        sq = float((q - a0) @ ta)
        dq = math.sqrt(max(float(np.sum((q - a0) ** 2)) - sq * sq, 0.0) + g * g)
        pts += [sq - 30 * dq, sq - dq, sq, sq + dq, sq + 30 * dq]
    pts = sorted(x for x in pts if 0.0 < x < la)
    return integrate.quad(inner, 0.0, la, points=pts or None, epsabs=0.0, epsrel=1e-13, limit=200)[0]


_TILT = np.radians(10.0)
PAIR_CASES = {
    "touching collinear": ([0, 0, 0], [1, 0, 0], [1, 0, 0], [2.5, 0, 0], 0.0),
    "touching 90 deg": ([0, 0, 0], [1, 0, 0], [1, 0, 0], [1, 1, 0], 0.0),
    "touching 170 deg": (
        [0, 0, 0],
        [1, 0, 0],
        [1, 0, 0],
        [1 - 0.7 * np.cos(_TILT), 0.7 * np.sin(_TILT), 0],
        0.0,
    ),
    "parallel d = 1e-3 L": ([0, 0, 0], [1, 0, 0], [0, 1e-3, 0], [1, 1e-3, 0], 0.0),
    "parallel close, offset": ([0, 0, 0], [1, 0, 0], [0.3, 1e-3, 0], [1.3, 1e-3, 0], 0.0),
    "nearly parallel": ([0, 0, 0], [1, 0, 0], [0, 1e-3, 0], [1, 1.1e-3, 1e-4], 0.0),
    "skew": ([0, 0, 0], [1, 0, 0], [0.5, -0.5, 0.1], [0.6, 0.5, 0.3], 0.0),
    "crossing nearly perpendicular": ([0, 0, 0], [1, 0, 0], [0.5, -0.5, 0.01], [0.52, 0.5, 0.01], 0.0),
    "perpendicular crossing": ([0, 0, 0], [1, 0, 0], [0.5, -0.5, 0.01], [0.5, 0.5, 0.01], 0.0),
    "lengths 1 : 1e-3": ([0, 0, 0], [1, 0, 0], [0.4, 0.01, 0], [0.401, 0.0105, 0], 0.0),
    "one chain, touching, g > 0": ([0, 0, 0], [1, 0, 0], [1, 0, 0], [1.5, 0.2, 0], 1e-2),
    "one chain, chords shorter than g": ([0, 0, 0], [0.01, 0, 0], [0.01, 0, 0], [0.02, 0.001, 0], 0.05),
    "identical segments, g > 0": ([0, 0, 0], [1, 0, 0], [0, 0, 0], [1, 0, 0], 1e-3),
    "distance 3 L (tensor Gauss)": ([0, 0, 0], [1, 0, 0], [2, 2, 1], [2.4, 2.8, 1], 0.0),
    "distance 30 L (tensor Gauss)": ([0, 0, 0], [1, 0, 0], [20, 20, 10], [20.5, 20.7, 10], 0.0),
    "distance 100 L (multipole)": ([0, 0, 0], [1, 0, 0], [60, 70, 40], [60.5, 70.7, 40.2], 0.0),
    "distance 1000 L (multipole)": (
        [0, 0, 0],
        [1, 0, 0],
        [700, 500, 500],
        [700.6, 500.7, 500],
        0.0,
    ),
}


@pytest.mark.parametrize("case", PAIR_CASES)
def test_pair_integral_matches_nested_quadrature(case: str) -> None:
    """Neumann pair integral vs scipy quad nested twice (dblquad split at singular points)."""
    a0, a1, b0, b1, g = PAIR_CASES[case]
    got, want = _pair_kernel(a0, a1, b0, b1, g), _pair_reference(a0, a1, b0, b1, g)
    assert abs(got / want - 1.0) <= PAIR_TOL, f"{case}: {got!r} vs {want!r}"


def test_random_pairs_match_nested_quadrature() -> None:
    """Seeded random pairs from touching to 100 lengths apart, all rules of the kernel."""
    rng = np.random.default_rng(0)
    worst = 0.0
    for _ in range(16):
        a0 = rng.normal(size=3)
        a1 = a0 + rng.normal(size=3)
        b0 = a1 + rng.normal(size=3) * 10 ** rng.uniform(-3, 2)
        b1 = b0 + rng.normal(size=3) * 10 ** rng.uniform(-2, 0.5)
        got, want = _pair_kernel(a0, a1, b0, b1, 0.0), _pair_reference(a0, a1, b0, b1, 0.0)
        worst = max(worst, abs(got / want - 1.0))
    assert worst <= PAIR_TOL, f"worst relative error {worst:.2e}"


def test_mutual_inductance_carries_direction_cosine() -> None:
    """M_ij = mu0/(4 pi) cos(angle) I_ij (Neumann's formula) in the dense matrix."""
    a0, a1, b0, b1, g = PAIR_CASES["skew"]
    wires = Filaments.from_segments([a0, b0], [a1, b1], radii=1e-3, filament=[0, 1])
    ta, tb = (np.subtract(a1, a0), np.subtract(b1, b0))
    cos = ta @ tb / np.linalg.norm(ta) / np.linalg.norm(tb)
    want = 1e-7 * cos * _pair_reference(a0, a1, b0, b1, g)
    assert abs(partial_inductances(wires)[0, 1] / want - 1.0) <= PAIR_TOL


def test_row_sum_path_matches_pair_path() -> None:
    """The vectorised row pass of the double sum gives the same M_ij as the pair routine.

    A seeded cloud with pairs in every rule (multipole, Gauss, near, one chain with g > 0).
    """
    rng = np.random.default_rng(11)
    starts = rng.uniform(-0.2, 0.2, size=(40, 3))
    ends = starts + rng.normal(size=(40, 3)) * 10 ** rng.uniform(-3, -1, size=(40, 1))
    chain = rng.integers(1, 3, size=40)
    chain[:14] = 0  # a connected random walk: one piece, softened where arc <= 2 x chord
    for k in range(1, 14):
        starts[k] = ends[k - 1]
        ends[k] = starts[k] + rng.normal(size=3) * 0.02
    wires = Filaments.from_segments(starts, ends, radii=1e-3, filament=chain)
    dense = partial_inductances(wires)
    t = (ends - starts) / np.linalg.norm(ends - starts, axis=1)[:, None]
    piece, arc, _loop = wires.chain_pieces()
    half = 0.5 * np.linalg.norm(ends - starts, axis=1)
    n_soft = 0
    for i, j in zip(*np.triu_indices(40, 1)):
        s = abs(arc[i] - arc[j])
        r = np.linalg.norm(0.5 * (starts[i] + ends[i] - starts[j] - ends[j]))
        soft = piece[i] == piece[j] and (s <= (1 + 1e-9) * (half[i] + half[j]) or s <= 2.0 * r)
        n_soft += soft
        g = wires.gmd[i] if soft else 0.0
        want = 1e-7 * (t[i] @ t[j]) * _pair_kernel(starts[i], ends[i], starts[j], ends[j], g)
        assert abs(dense[i, j] - want) <= ROUNDING_TOL * abs(dense).max(), f"pair {i}, {j}"
    assert 13 < n_soft < 13 * 14 // 2


@pytest.mark.parametrize(
    ("l1", "l2", "d", "offset"),
    [
        (1.0, 1.0, 0.1, 0.0),
        (1.0, 0.3, 0.02, 0.35),
        (0.5, 2.0, 1e-3, -0.7),
        (1.0, 0.4, 0.3, 1.5),
        (1.0, 1.0, 5.0, -2.0),
    ],
)
def test_parallel_filaments_match_grover(l1: float, l2: float, d: float, offset: float) -> None:
    """Parallel filaments, equal and unequal, overlapping and offset: Grover (1946)."""
    wires = Filaments.from_segments(
        [[0, 0, 0], [offset, d, 0]], [[l1, 0, 0], [offset + l2, d, 0]], radii=1e-4, filament=[0, 1]
    )
    want = analytic.parallel_filaments_mutual(l1, l2, d, offset)
    assert abs(partial_inductances(wires)[0, 1] / want - 1.0) <= PAIR_TOL


@pytest.mark.parametrize("n_pieces", [1, 2, 3, 10, 60])
def test_split_segment_keeps_self_inductance(n_pieces: int) -> None:
    """A straight wire cut into collinear chords of one chain: Grover (1946) / Rosa (1908).

    With 60 pieces the chords (0.83 mm) are shorter than the GMD (1.56 mm).
    """
    length, a = 0.05, 2e-3
    x = np.linspace(0.0, length, n_pieces + 1)
    p = np.stack([x, 0 * x, 0 * x], axis=1)
    wire = Filaments.from_segments(p[:-1], p[1:], radii=a)
    want = analytic.straight_wire_self_inductance(length, a * math.exp(-0.25))
    assert abs(inductance_matrix(wire)[0, 0] / want - 1.0) <= SUM_TOL


def test_gauss_table_matches_numpy() -> None:
    """The kernel's Gauss-Legendre rules vs numpy.polynomial.legendre.leggauss (Golub-Welsch)."""
    nodes, wts = _neumann.gauss_table(16)
    for n in (1, 2, 7, 16):
        x, w = np.polynomial.legendre.leggauss(n)
        assert np.max(np.abs(nodes[n, :n] - x)) <= 1e-14, "nodes agree to rounding"
        assert np.max(np.abs(wts[n, :n] - w)) <= 1e-14, "weights agree to rounding"
