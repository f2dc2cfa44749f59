"""B and A of straight segments: kernels against slow twins, published formulas and invariants."""

from __future__ import annotations

import doctest
import math
from collections.abc import Callable

import numpy as np
import pytest
from numba import njit
from numpy.typing import ArrayLike, NDArray

from fieldenergy import fields
from fieldenergy.errors import CaseError, GeometryError
from fieldenergy.fields import b_field, field_at, segment_field, vector_potential
from fieldenergy.kernels._biot_savart import _log1p
from fieldenergy.model.filaments import Filaments
from tests import reference

MU0 = 4e-7 * np.pi
K = 1e-7  # mu0 / (4 pi)

#: Kernel vs a twin of the same formula: only rounding differs (fma, summation order).
TWIN_RTOL = 1e-13
#: Kernel vs the 60-digit textbook form: a few ulp per pair, summed over a dozen segments.
DECIMAL_RTOL = 1e-13
#: Kernel vs quad of the line integral: quad is asked for 1e-12 per component.
QUAD_RTOL = 1e-10
#: rho = 1e-9 L off a skew segment: rounding p - a (eps |u|) moves the point by 1e-16 L,
#: 1e-7 of rho, so no float64 method can do better than ~1e-7 there (condition number 1e9).
NEAR_SKEW_RTOL = 1e-6
#: quad at rho = 1e-9 L: its nodes along the segment are rounded to eps L, 1e-7 of rho.
NEAR_QUAD_RTOL = 1e-6
#: Same sums in another order or frame (chain pieces, rigid motion): rounding only.
REARRANGED_RTOL = 1e-12
#: Long straight wire vs the infinite one: the ends change B by (rho / half length)^2 / 2,
#: at most 8e-8 in the test.
WIRE_RTOL = 1e-6
#: The kernels' log1p is within about 3 ulp by construction, the C library's within 1.
LOG1P_RTOL = 8 * np.finfo(np.float64).eps
#: Central differences with step 1e-4: truncation ~1e-8 of the field, rounding ~eps/h = 2e-12.
FD_RTOL = 1e-6


def rel_err(x: NDArray[np.float64], ref: NDArray[np.float64]) -> float:
    return float(np.max(np.abs(x - ref)) / np.max(np.abs(ref)))


def random_segments(rng: np.random.Generator, n: int, radius: float) -> tuple[NDArray[np.float64], ...]:
    starts = rng.normal(size=(n, 3))
    ends = starts + rng.normal(scale=0.5, size=(n, 3))
    return starts, ends, rng.normal(size=n), rng.uniform(0.0, radius, size=n)


def random_chain(rng: np.random.Generator, n: int, radius: float) -> tuple[NDArray[np.float64], ...]:
    """Joined segments (each starts where the previous ends), as discretised filaments are."""
    nodes = np.cumsum(rng.normal(scale=0.5, size=(n + 1, 3)), axis=0)
    return nodes[:-1], nodes[1:], rng.normal(size=n), rng.uniform(0.0, radius, size=n)


@pytest.mark.parametrize("joined", [False, True])
@pytest.mark.parametrize("radius", [0.0, 0.4])
def test_kernel_matches_loop_twin(radius: float, joined: bool) -> None:
    """Random points, some inside cores when radius > 0, against the plain-Python twin;
    loose segments and a chain (where the kernels reuse end-point distances)."""
    rng = np.random.default_rng(0)
    starts, ends, cur, rad = (random_chain if joined else random_segments)(rng, 12, radius)
    pts = np.concatenate(
        [rng.normal(size=(25, 3)), 0.5 * (starts + ends) + rng.normal(scale=0.2, size=(12, 3))]
    )
    b, a = segment_field(pts, starts, ends, cur, rad)
    b_ref, a_ref = reference.b_a_loop(pts, starts, ends, cur, rad)
    assert rel_err(b, b_ref) < TWIN_RTOL
    assert rel_err(a, a_ref) < TWIN_RTOL


def test_kernel_matches_numpy_twin() -> None:
    rng = np.random.default_rng(1)
    starts, ends, cur, rad = random_segments(rng, 40, 0.3)
    pts = rng.normal(size=(300, 3))
    b = segment_field(pts, starts, ends, cur, rad, want_a=False)
    assert rel_err(b, reference.b_numpy(pts, starts, ends, cur, rad)) < TWIN_RTOL


def sum_pairs(
    fun: Callable[..., tuple[NDArray[np.float64], NDArray[np.float64]]],
    pts: NDArray[np.float64],
    starts: NDArray[np.float64],
    ends: NDArray[np.float64],
    cur: NDArray[np.float64],
    *rad: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Sum a one-pair reference over all points and segments; the core radii ``rad`` (if any)
    apply only at points inside some conductor, as in the kernels."""
    b, a = np.zeros((len(pts), 3)), np.zeros((len(pts), 3))
    inside = [reference.inside_conductor(pts, starts, ends, r) for r in rad]
    for i, p in enumerate(pts):
        for j in range(len(starts)):
            bj, aj = fun(p, starts[j], ends[j], cur[j], *(r[j] if ins[i] else 0.0 for r, ins in zip(rad, inside)))
            b[i] += bj
            a[i] += aj
    return b, a


@pytest.mark.parametrize("radius", [0.0, 0.4])
def test_kernel_matches_textbook_form_in_decimal(radius: float) -> None:
    """Source: Hanson & Hirshman, Phys. Plasmas 9, 4410 (2002) (from memory), as printed."""
    rng = np.random.default_rng(2)
    starts, ends, cur, rad = random_segments(rng, 6, radius)
    pts = rng.normal(size=(8, 3))
    b, a = segment_field(pts, starts, ends, cur, rad)
    b_ref, a_ref = sum_pairs(reference.b_a_decimal, pts, starts, ends, cur, rad)
    assert rel_err(b, b_ref) < DECIMAL_RTOL
    assert rel_err(a, a_ref) < DECIMAL_RTOL


def test_line_segments_match_quadrature() -> None:
    """Source: the Biot-Savart law dB = mu0 I/(4 pi) dl x r/|r|^3, dA = mu0 I/(4 pi) dl/|r|
    (Jackson, Classical Electrodynamics, 3rd ed. 1999, from memory), by scipy quad."""
    rng = np.random.default_rng(3)
    starts, ends, cur, _ = random_segments(rng, 4, 0.0)
    pts = rng.normal(size=(6, 3))
    b, a = segment_field(pts, starts, ends, cur)
    b_ref, a_ref = sum_pairs(reference.b_a_quad, pts, starts, ends, cur)
    assert rel_err(b, b_ref) < QUAD_RTOL
    assert rel_err(a, a_ref) < QUAD_RTOL


SKEW_A = np.array([0.3, -0.2, 0.5])
SKEW_B = np.array([1.1, 0.4, -0.3])
SKEW_D = SKEW_B - SKEW_A
SKEW_N = np.cross(SKEW_D, [0.0, 0.0, 1.0]) / np.linalg.norm(np.cross(SKEW_D, [0.0, 0.0, 1.0]))
SKEW_L = float(np.linalg.norm(SKEW_D))
X_A, X_B = np.zeros(3), np.array([1.0, 0.0, 0.0])

# name: (point, start, end, radius, tolerance against the decimal textbook form)
EDGE_CASES = {
    "at start, radius > 0": (SKEW_A, SKEW_A, SKEW_B, 0.05, DECIMAL_RTOL),
    "inside the core near the end": (SKEW_B + 0.01 * SKEW_N, SKEW_A, SKEW_B, 0.05, DECIMAL_RTOL),
    "on the line beyond the end": (np.array([1.5, 0.0, 0.0]), X_A, X_B, 0.0, DECIMAL_RTOL),
    "on the line before the start, radius > 0": (np.array([-0.02, 0.0, 0.0]), X_A, X_B, 0.05, DECIMAL_RTOL),
    "rho = 1e-9 L, aligned": (np.array([0.37, 1e-9, 0.0]), X_A, X_B, 0.0, DECIMAL_RTOL),
    "rho = 1e-9 L, skew": (
        SKEW_A + 0.37 * SKEW_D + 1e-9 * SKEW_L * SKEW_N,
        SKEW_A,
        SKEW_B,
        0.0,
        NEAR_SKEW_RTOL,
    ),
    "very short segment": (np.array([0.5, -0.4, 0.9]), SKEW_A, SKEW_A + 1e-9 * SKEW_D, 0.0, DECIMAL_RTOL),
    "far, 1e6 L broadside": (
        0.5 * (SKEW_A + SKEW_B) + 1e6 * SKEW_L * SKEW_N,
        SKEW_A,
        SKEW_B,
        0.0,
        DECIMAL_RTOL,
    ),
    "far, 1e6 L oblique": (
        SKEW_A + 1e6 * SKEW_L * np.array([0.6, 0.0, 0.8]),
        SKEW_A,
        SKEW_B,
        0.0,
        DECIMAL_RTOL,
    ),
}


@pytest.mark.parametrize("name", list(EDGE_CASES))
def test_edge_cases_match_textbook_form_in_decimal(name: str) -> None:
    """Source: Hanson & Hirshman (2002) (from memory), in 60-digit arithmetic; errors are
    measured against the field scale mu0 I / (4 pi d), d the larger of the distance to the
    segment and its core radius, so that points where B vanishes are checked too."""
    p, s, e, radius, rtol = EDGE_CASES[name]
    b, a = segment_field(p[None], s[None], e[None], 2.0, radius)
    b_ref, a_ref = reference.b_a_decimal(p, s, e, 2.0, radius)
    scale = field_scale(p, s, e, radius)
    assert np.max(np.abs(b[0] - b_ref)) < rtol * max(scale, np.max(np.abs(b_ref)))
    assert np.max(np.abs(a[0] - a_ref)) < rtol * np.max(np.abs(a_ref))


def field_scale(
    p: NDArray[np.float64], s: NDArray[np.float64], e: NDArray[np.float64], radius: float
) -> float:
    """mu0 I / (4 pi d) for I = 2 A, d the larger of the distance to the segment and the core radius."""
    u, d = p - s, e - s
    t = np.clip(u @ d / (d @ d), 0.0, 1.0)
    return K * 2.0 / max(radius, float(np.linalg.norm(u - t * d)))


@pytest.mark.parametrize("name", [k for k, v in EDGE_CASES.items() if v[3] == 0.0])
def test_line_edge_cases_match_quadrature(name: str) -> None:
    """Source: the Biot-Savart line integrals (Jackson 1999, from memory), by scipy quad;
    B errors measured against the field scale as in the decimal check above."""
    p, s, e, _, _ = EDGE_CASES[name]
    b, a = segment_field(p[None], s[None], e[None], 2.0)
    b_ref, a_ref = reference.b_a_quad(p, s, e, 2.0)
    rtol = NEAR_QUAD_RTOL if name.startswith("rho") else QUAD_RTOL
    assert np.max(np.abs(b[0] - b_ref)) < rtol * max(field_scale(p, s, e, 0.0), np.max(np.abs(b_ref)))
    assert np.max(np.abs(a[0] - a_ref)) < rtol * np.max(np.abs(a_ref))


def test_on_line_beyond_end_b_is_zero() -> None:
    """On the line through a segment, outside it, dl x r = 0 along the whole segment."""
    b = segment_field([[1.5, 0.0, 0.0], [-3.0, 0.0, 0.0]], X_A[None], X_B[None], 1.0, want_a=False)
    assert np.max(np.abs(b)) == 0.0


def test_zero_current_gives_zero_field() -> None:
    rng = np.random.default_rng(4)
    starts, ends, _, rad = random_segments(rng, 5, 0.3)
    b, a = segment_field(rng.normal(size=(7, 3)), starts, ends, np.zeros(5), rad)
    assert np.max(np.abs(b)) == 0.0 and np.max(np.abs(a)) == 0.0


def polygon_loop(radius: float, n: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    phi = np.linspace(0.0, 2 * np.pi, n + 1)
    nodes = np.stack([radius * np.cos(phi), radius * np.sin(phi), np.zeros(n + 1)], axis=1)
    return nodes[:-1], nodes[1:]


def test_loop_on_axis_converges_at_second_order() -> None:
    """Source: on-axis field of a circular loop, mu0 I R^2 / (2 (R^2 + z^2)^(3/2))
    (Jackson, Classical Electrodynamics, 3rd ed. 1999, from memory; common practice).
    An inscribed N-gon misses it by O(N^-2)."""
    radius, current = 0.37, 3.0
    z = np.array([0.0, 0.2, -0.55])
    pts = np.stack([np.zeros(3), np.zeros(3), z], axis=1)
    exact = MU0 * current * radius**2 / (2 * (radius**2 + z**2) ** 1.5)
    counts = np.array([16, 32, 64, 128, 256])
    errors = []
    for n in counts:
        s, e = polygon_loop(radius, n)
        b = segment_field(pts, s, e, current, want_a=False)
        errors.append(np.max(np.abs(b[:, 2] - exact) / exact))
    slope = np.polyfit(np.log(counts), np.log(errors), 1)[0]
    assert abs(slope + 2.0) < 0.15, f"observed convergence rate {slope:.3f}, expected -2"


def test_long_wire_follows_amperes_law_inside_and_outside() -> None:
    """Source: Ampere's law for an infinite round wire of uniform current density,
    B = mu0 I / (2 pi rho) outside, mu0 I rho / (2 pi a^2) inside, and A(rho) - A(a) =
    mu0 I / (4 pi) (1 - rho^2 / a^2) inside (Jackson 1999, from memory; common practice)."""
    a, current, half = 0.01, 5.0, 1000.0
    rho = np.array([0.3 * a, 0.8 * a, a, 2.5 * a, 40 * a])
    pts = np.stack([rho * np.cos(0.7), rho * np.sin(0.7), np.full(5, 3 * a)], axis=1)
    b, pot = segment_field(pts, [[0, 0, -half]], [[0, 0, half]], current, a)
    inside = rho <= a
    expect = np.where(inside, MU0 * current * rho / (2 * np.pi * a**2), MU0 * current / (2 * np.pi * rho))
    b_phi = -b[:, 0] * np.sin(0.7) + b[:, 1] * np.cos(0.7)
    assert np.max(np.abs(b_phi / expect - 1)) < WIRE_RTOL
    a_wire = pot[:, 2] - pot[2, 2]
    expect_a = np.where(inside, K * current * (1 - rho**2 / a**2), -2 * K * current * np.log(rho / a))
    assert np.max(np.abs(a_wire - expect_a)) < WIRE_RTOL * K * current


@pytest.mark.parametrize("radius", [0.0, 0.05])
def test_collinear_chain_equals_one_segment(radius: float) -> None:
    """Superposition (common practice): a straight wire cut into pieces gives the same B and A,
    inside the core too (the core rule of the kernels is built to add up along a chain)."""
    cuts = np.array([0.0, 0.1, 0.35, 0.4, 0.72, 1.0])
    s, e = SKEW_A + cuts[:-1, None] * SKEW_D, SKEW_A + cuts[1:, None] * SKEW_D
    pts = SKEW_A + np.outer([0.05, 0.37, 0.4, 0.99, 1.3, -0.2], SKEW_D) + 0.02 * SKEW_N
    b1, a1 = segment_field(pts, SKEW_A[None], SKEW_B[None], 1.5, radius)
    bk, ak = segment_field(pts, s, e, 1.5, radius)
    assert rel_err(bk, b1) < REARRANGED_RTOL and rel_err(ak, a1) < REARRANGED_RTOL


def test_core_rule_stops_at_the_conductor_surface() -> None:
    """Outside every conductor the field is the filament chords' own (Biot-Savart, no core),
    also where a segment's line core reaches beyond its ends; inside, the core rule holds
    for every segment whose line core holds the point. The bend of two 5 cm wires (core
    radius 5 mm) is invented."""
    s = np.array([[0.0, 0.0, 0.0], [0.05, 0.0, 0.0]])
    e = np.array([[0.05, 0.0, 0.0], [0.05, 0.05, 0.0]])
    outside = np.array([[0.08, 0.002, 0.001], [-0.03, 0.003, 0.0], [0.05, 0.09, -0.002]])
    b, a = segment_field(outside, s, e, 2.0, 0.005)
    b0, a0 = segment_field(outside, s, e, 2.0, 0.0)
    assert rel_err(b, b0) < 1e-15 and rel_err(a, a0) < 1e-15
    # Inside the first wire, 2 mm short of the bend: in the second wire's line core too, so
    # the core rule applies to both (against the per-pair twin with both radii).
    inside = np.array([[0.048, 0.001, 0.0005]])
    b, a = segment_field(inside, s, e, 2.0, 0.005)
    b_ref, a_ref = sum_pairs(reference.b_a_decimal, inside, s, e, np.full(2, 2.0), np.full(2, 0.005))
    assert rel_err(b, b_ref) < DECIMAL_RTOL and rel_err(a, a_ref) < DECIMAL_RTOL
    b0, _ = segment_field(inside, s, e, 2.0, 0.0)
    assert rel_err(b, b0) > 0.1  # the core rule did act there


def test_b_is_curl_a_and_div_b_vanishes() -> None:
    """Invariant: B = curl A and div B = 0 off the conductors, by central differences."""
    rng = np.random.default_rng(5)
    nodes = rng.normal(size=(9, 3))
    s, e = nodes, np.roll(nodes, -1, axis=0)
    pts = rng.normal(scale=2.0, size=(6, 3))
    h = 1e-4
    b0 = segment_field(pts, s, e, 2.0, want_a=False)
    grad_a = np.empty((6, 3, 3))  # [point, d/dx_k, component]
    div_b = np.zeros(6)
    for k in range(3):
        step = np.zeros(3)
        step[k] = h
        bp, ap = segment_field(pts + step, s, e, 2.0)
        bm, am = segment_field(pts - step, s, e, 2.0)
        grad_a[:, k, :] = (ap - am) / (2 * h)
        div_b += (bp[:, k] - bm[:, k]) / (2 * h)
    curl = np.stack(
        [
            grad_a[:, 1, 2] - grad_a[:, 2, 1],
            grad_a[:, 2, 0] - grad_a[:, 0, 2],
            grad_a[:, 0, 1] - grad_a[:, 1, 0],
        ],
        axis=1,
    )
    scale = np.linalg.norm(b0, axis=1)
    assert np.max(np.linalg.norm(curl - b0, axis=1) / scale) < FD_RTOL
    assert np.max(np.abs(div_b) / scale) < FD_RTOL


def test_linear_in_circuit_currents() -> None:
    rng = np.random.default_rng(6)
    starts, ends, _, rad = random_segments(rng, 10, 0.2)
    fil = Filaments.from_segments(
        starts, ends, weights=rng.uniform(1, 3, 10), radii=rad, circuit=np.arange(10) % 2
    )
    pts = rng.normal(size=(20, 3))
    b1, a1 = field_at(pts, fil, [1.0, 0.0])
    b2, a2 = field_at(pts, fil, [0.0, 1.0])
    b, a = field_at(pts, fil, [2.5, -0.75])
    assert rel_err(b, 2.5 * b1 - 0.75 * b2) < TWIN_RTOL
    assert rel_err(a, 2.5 * a1 - 0.75 * a2) < TWIN_RTOL


def test_invariant_under_rotation_and_translation() -> None:
    """Moving sources and points together rotates B and A with them (rounding only)."""
    rng = np.random.default_rng(7)
    starts, ends, cur, rad = random_segments(rng, 10, 0.2)
    pts = rng.normal(size=(20, 3))
    rot, _ = np.linalg.qr(rng.normal(size=(3, 3)))
    rot *= np.sign(np.linalg.det(rot))
    shift = np.array([0.3, -1.2, 2.0])
    b, a = segment_field(pts, starts, ends, cur, rad)
    moved = [x @ rot.T + shift for x in (pts, starts, ends)]
    bm, am = segment_field(moved[0], moved[1], moved[2], cur, rad)
    assert rel_err(bm, b @ rot.T) < REARRANGED_RTOL and rel_err(am, a @ rot.T) < REARRANGED_RTOL


def test_public_wrappers_agree_and_weight_currents() -> None:
    rng = np.random.default_rng(8)
    starts, ends, _, rad = random_segments(rng, 6, 0.2)
    weights = rng.uniform(1, 4, 6)
    fil = Filaments.from_segments(
        starts, ends, weights=weights, radii=rad, circuit=np.array([0, 1, 1, 0, 1, 0])
    )
    pts = rng.normal(size=(9, 3))
    cur = np.array([2.0, -3.0])
    b, a = field_at(pts, fil, cur)
    b_raw, a_raw = segment_field(pts, starts, ends, weights * cur[fil.circuit], rad)
    assert np.array_equal(b_field(pts, fil, cur), b) and np.array_equal(vector_potential(pts, fil, cur), a)
    assert np.array_equal(b, b_raw) and np.array_equal(a, a_raw)


def test_chunks_report_progress_and_match_one_call(monkeypatch: pytest.MonkeyPatch) -> None:
    rng = np.random.default_rng(9)
    starts, ends, cur, rad = random_segments(rng, 5, 0.2)
    pts = rng.normal(size=(250, 3))
    whole = segment_field(pts, starts, ends, cur, rad)
    monkeypatch.setattr(fields, "CHUNK_POINTS", 64)
    done: list[int] = []
    parts = segment_field(pts, starts, ends, cur, rad, progress=done.append)
    assert done == [64, 128, 192, 250]
    assert np.array_equal(parts[0], whole[0]) and np.array_equal(parts[1], whole[1])


@pytest.mark.parametrize(
    ("points", "match"),
    [
        ([[0.0, np.nan, 1.0]], "field point 0 is not finite"),
        ([[0.0, 0.0, 1.0], [np.inf, 0.0, 0.0]], "field point 1 is not finite"),
        ([0.0, 0.0, 1.0], r"shape \(m, 3\)"),
        (np.zeros((4, 2)), r"shape \(m, 3\)"),
        ([[5.0, 5.0, 5.0], [0.25, 0.0, 0.0]], "field point 1 .* zero-radius filament"),
        ([[1.0, 0.0, 0.0]], "field point 0 .* zero-radius filament"),
    ],
)
def test_bad_points_raise_geometry_error(points: ArrayLike, match: str) -> None:
    with pytest.raises(GeometryError, match=match):
        segment_field(points, X_A[None], X_B[None], 1.0)


def test_point_on_zero_radius_filament_raises_for_b_alone() -> None:
    with pytest.raises(GeometryError, match="field point 0"):
        segment_field([[0.5, 0.0, 0.0]], X_A[None], X_B[None], 1.0, want_a=False)


def test_point_on_axis_with_core_is_fine() -> None:
    b, a = segment_field([[0.5, 0.0, 0.0]], X_A[None], X_B[None], 1.0, 0.01)
    assert np.max(np.abs(b)) == 0.0 and np.isfinite(a).all()


def test_bad_segments_and_currents_raise() -> None:
    with pytest.raises(GeometryError, match="segment 1 has zero length"):
        segment_field([[0.0, 1.0, 0.0]], [[0, 0, 0], [1, 1, 1]], [[1, 0, 0], [1, 1, 1]], 1.0)
    with pytest.raises(GeometryError, match="core radius"):
        segment_field([[0.0, 1.0, 0.0]], X_A[None], X_B[None], 1.0, -0.1)
    with pytest.raises(GeometryError, match=r"currents must be a scalar or have shape \(1,\)"):
        segment_field([[0.0, 1.0, 0.0]], X_A[None], X_B[None], [1.0, 2.0])
    fil = Filaments.from_segments(X_A[None], X_B[None], n_circuits=2)
    with pytest.raises(CaseError, match="expected 2 circuit currents"):
        b_field([[0.0, 1.0, 0.0]], fil, [1.0])


def test_docstring_examples_run() -> None:
    result = doctest.testmod(fields)
    assert result.attempted >= 4 and result.failed == 0


@njit(cache=True)
def _log1p_sweep(x):
    """float64 (n,) -> ln(1 + x) by the kernels' inline routine, float64 (n,)."""
    out = np.empty_like(x)
    for i in range(x.shape[0]):
        out[i] = _log1p(x[i])
    return out


def test_vectorisable_log1p_matches_libm() -> None:
    """The kernels' own ln(1 + x) against the C library's log1p, from 1e-300 to 1e300."""
    rng = np.random.default_rng(10)
    x = np.concatenate(
        [10.0 ** rng.uniform(-300, 300, 20000), rng.uniform(0.0, 1.0, 5000), [np.sqrt(2) - 1, 1.0]]
    )
    ref = np.array([math.log1p(v) for v in x])
    assert np.max(np.abs(_log1p_sweep(x) - ref) / ref) < LOG1P_RTOL
    assert _log1p_sweep(np.array([0.0]))[0] == 0.0 and np.isinf(_log1p_sweep(np.array([np.inf]))[0])


def test_log1p_at_the_ends_of_its_polynomial_range() -> None:
    """1 + x next to 2^k sqrt2 and 2^k / sqrt2, where |s| = |f / (2 + f)| is largest (0.172)
    and the fitted polynomial in s^2 is used at the end of its interval; against libm log1p."""
    k = np.arange(0, 200, dtype=np.float64)
    ends = np.concatenate([2.0**k * np.sqrt(2.0), 2.0 ** k[1:] / np.sqrt(2.0)])
    x = (ends[:, None] * (1.0 + np.arange(-8, 9) * np.finfo(np.float64).eps)).ravel() - 1.0
    x = x[x > 0.0]
    ref = np.array([math.log1p(v) for v in x])
    # The routine's stated bound (3 ulp); the fitted polynomial itself adds below 1/6 ulp.
    assert np.max(np.abs(_log1p_sweep(x) - ref) / ref) < 3 * np.finfo(np.float64).eps
