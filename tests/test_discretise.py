"""Discretisation of a case into filaments: chords, section filaments, GMDs and checks."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from fieldenergy.constants import MAX_SEGMENTS_PER_COIL
from fieldenergy.discretise import (
    chord_grid,
    default_section_grid,
    discretise,
    rect_gmd,
    section_layout,
)
from fieldenergy.errors import (
    CaseError,
    DiscretisationError,
    FieldEnergyWarning,
    GeometryError,
)
from fieldenergy.geometry import exact_curve
from fieldenergy.model import (
    Case,
    CirclePath,
    Circuit,
    Coil,
    CurvePath,
    Discretisation,
    HelixPath,
    LinearRepeat,
    PolygonPath,
    RacetrackPath,
    RectSection,
    RotationalRepeat,
    RoundSection,
    SaddlePath,
)

#: Rounding of a sum of k equal shares, or of coordinates of order 1 m after a few operations.
ROUNDING = 1e-12

#: Test data (invented).
RING = CirclePath(0.23, [0, 0, 0], [0, 0, 1], start=[1, 0, 0])
TRACK = RacetrackPath(0.4, 0.12, [0, 0, 0], [0, 0, 1], [1, 0, 0])
SADDLE = SaddlePath(0.15, 0.45, 2.0, [0, 0, 0], [0, 0, 1], [1, 0, 0])
HELIX = HelixPath(0.07, 0.02, 3, [0, 0, 0], [0, 0, 1])
KNOT = CurvePath("0.2*cos(t) + 0.06*cos(2*t)", "0.2*sin(t) - 0.06*sin(2*t)", "0.04*sin(3*t)", 0.0, 2 * math.pi)
SQUARE = PolygonPath([[0, 0, 0], [0.5, 0, 0], [0.5, 0.5, 0], [0, 0.5, 0]])


def _case(*coils: Coil, circuits: tuple[str, ...] = ("main",), **kw: object) -> Case:
    return Case("test", tuple(Circuit(name, 1.0) for name in circuits), coils, **kw)  # type: ignore[arg-type]


def _coil(path: object, section: object = RoundSection(1e-3), name: str = "c", **kw: object) -> Coil:
    return Coil(name=name, circuit=kw.pop("circuit", "main"), section=section, path=path, **kw)  # type: ignore[arg-type]


def test_square_gmd_against_maxwell() -> None:
    """GMD of a square of side a from itself: 0.44705 a (Maxwell 1873; Rosa & Grover 1912, from memory)."""
    assert abs(rect_gmd(0.013, 0.013) / 0.013 - 0.44705) < 5e-6  # the published value has 5 digits


def test_thin_strip_gmd_tends_to_line_segment() -> None:
    """A strip of length a and vanishing width: GMD -> a exp(-3/2) (Maxwell 1873, from memory)."""
    assert abs(rect_gmd(0.2, 0.2e-7) / (0.2 * math.exp(-1.5)) - 1) < 1e-6  # O(b/a) correction


def test_rect_gmd_against_monte_carlo() -> None:
    """Maxwell's formula vs the mean of ln(distance) over random point pairs (definition of GMD)."""
    rng = np.random.default_rng(3)
    a, b, n = 0.03, 0.011, 400_000
    p = rng.uniform([0, 0], [a, b], size=(n, 2))
    q = rng.uniform([0, 0], [a, b], size=(n, 2))
    ln_r = np.log(np.linalg.norm(p - q, axis=1))
    estimate = math.exp(ln_r.mean())
    sigma = ln_r.std() / math.sqrt(n)
    # tolerance: 5 standard errors of the sampled mean of ln r
    assert abs(math.log(estimate / rect_gmd(a, b))) < 5 * sigma
    assert abs(rect_gmd(a, b) - rect_gmd(b, a)) < ROUNDING * a


def test_round_section_is_one_filament_with_round_gmd() -> None:
    """GMD of a circular area from itself: a exp(-1/4) (Maxwell 1873, from memory)."""
    layout = section_layout(RoundSection(0.004))
    assert layout.n_filaments == 1 and layout.shares.tolist() == [1.0]
    assert abs(layout.gmd[0] - 0.004 * math.exp(-0.25)) < ROUNDING * 0.004
    assert abs(layout.radii[0] - 0.004) < ROUNDING * 0.004


@pytest.mark.parametrize(("width", "height", "grid"), [(0.02, 0.02, None), (0.05, 0.01, None), (0.01, 0.03, (4, 7))])
def test_rect_pack_conserves_ampere_turns(width: float, height: float, grid: tuple[int, int] | None) -> None:
    layout = section_layout(RectSection(width, height), grid)
    n_w, n_h = grid if grid else default_section_grid(width, height)
    assert abs(layout.shares.sum() - 1.0) < ROUNDING
    assert layout.n_filaments == n_w * n_h
    # core radius of the round conductor with the cell's GMD (GMD of a disc = a e^(-1/4), Maxwell 1873)
    cw, ch = width / n_w, height / n_h
    assert np.abs(layout.radii * math.exp(-0.25) - rect_gmd(cw, ch)).max() < ROUNDING * max(cw, ch)
    assert np.abs(layout.offsets.mean(axis=0)).max() < ROUNDING * width
    assert abs(np.ptp(layout.offsets[:, 0]) - (width - width / n_w)) < ROUNDING * width
    model = discretise(_case(_coil(RING, RectSection(width, height), turns=37.0)), discretisation=Discretisation(section_grid=grid))
    per_chord = np.bincount(model.filaments.filament, model.filaments.weights) / np.bincount(model.filaments.filament)
    assert abs(per_chord.sum() - 37.0) < ROUNDING * 37.0


@pytest.mark.parametrize(("width", "height"), [(0.01, 0.01), (0.02, 0.01), (0.1, 0.003), (0.004, 0.03)])
def test_default_grid_is_near_square_with_9_to_16_filaments(width: float, height: float) -> None:
    n_w, n_h = default_section_grid(width, height)
    assert 9 <= n_w * n_h <= 16
    aspect = (width / n_w) / (height / n_h)
    best = min(abs(math.log((width / a) / (height / b))) for a in range(1, 17) for b in range(1, 17) if 9 <= a * b <= 16)
    assert abs(abs(math.log(aspect)) - best) < ROUNDING


def test_level_doubles_curved_chords_and_keeps_straights() -> None:
    curve = exact_curve(TRACK)
    base = chord_grid(curve, 1e-4, 0.2)
    for level in (1, 2, 3):
        refined = chord_grid(curve, 1e-4, 0.2, level=level)
        assert np.all(refined.counts[curve.straight] == 1)
        assert np.all(refined.counts[~curve.straight] == base.counts[~curve.straight] * 2**level)
        # nested: the level-0 chord ends are among the refined ones
        assert np.isin(np.round(base.t, 12), np.round(refined.t, 12)).all()


@pytest.mark.parametrize("path", [RING, KNOT, HELIX], ids=["circle", "curve", "helix"])
def test_sagitta_falls_as_four_to_the_minus_level(path: object) -> None:
    curve = exact_curve(path)  # type: ignore[arg-type]
    levels = [0, 1, 2, 3]
    sagittas = [chord_grid(curve, 1e-3, 0.3, level=k).sagitta for k in levels]
    rate = np.polyfit(levels, np.log2(sagittas), 1)[0]
    assert abs(rate + 2.0) < 0.15, f"sagitta falls as 2^({rate:.3f} level), expected 4^-level"


def test_model_indices_and_chains() -> None:
    coils = (
        _coil(RING, RectSection(0.01, 0.01), name="a", repeat=LinearRepeat(2, [0, 0, 0.1])),
        _coil(RacetrackPath(0.4, 0.12, [0, 0, 0.5], [0, 0, 1], [1, 0, 0]), RoundSection(0.002), name="b", circuit="second", turns=3.0),
    )
    model = discretise(_case(*coils, circuits=("second", "main")))
    f = model.filaments
    assert model.coil_names == ("a", "a[2]", "b")
    assert model.coil_circuit == (1, 1, 0)
    assert model.coil_sections == (RectSection(0.01, 0.01), RectSection(0.01, 0.01), RoundSection(0.002))
    assert np.array_equal(np.unique(f.coil), [0, 1, 2])
    assert np.array_equal(f.circuit, np.array(model.coil_circuit)[f.coil])
    assert len(model.filament_coil) == 9 + 9 + 1 == f.filament.max() + 1
    assert np.array_equal(model.filament_coil[f.filament], f.coil)
    for j in range(f.filament.max() + 1):
        rows = np.flatnonzero(f.filament == j)
        assert np.array_equal(rows, np.arange(rows[0], rows[-1] + 1)), "a chain's segments are contiguous"
        assert np.abs(f.starts[rows[1:]] - f.ends[rows[:-1]]).max() < ROUNDING, "chords join end to start"
        assert np.array_equal(f.starts[rows[0]], f.ends[rows[-1]]), "each filament closes exactly"
        assert np.array_equal(f.t0[rows[1:]], f.t1[rows[:-1]])
    assert np.abs(f.weights[f.coil == 2] - 3.0).max() < ROUNDING


def test_ring_filaments_sit_at_their_offsets() -> None:
    """On a ring the filament at (u, v) is a polygon inscribed in radius R - u at height v."""
    model = discretise(_case(_coil(RING, RectSection(0.02, 0.012))), discretisation=Discretisation(section_grid=(4, 3)))
    f = model.filaments
    u = model.filament_offset[f.filament, 0]
    v = model.filament_offset[f.filament, 1]
    assert np.abs(np.linalg.norm(f.starts[:, :2], axis=1) - (0.23 - u)).max() < ROUNDING
    assert np.abs(f.starts[:, 2] - v).max() < ROUNDING


def test_square_coil_corners_are_mitred() -> None:
    """Each filament of a square coil is a square whose sides are offset by u from the centre line."""
    model = discretise(_case(_coil(SQUARE, RectSection(0.04, 0.02))), discretisation=Discretisation(section_grid=(3, 1)))
    f = model.filaments
    assert f.n_segments == 3 * 4  # straight sides: one chord each
    for j, (u, _) in enumerate(model.filament_offset):
        rows = f.filament == j
        side = np.linalg.norm(f.ends[rows] - f.starts[rows], axis=1)
        assert np.abs(side - (0.5 - 2 * u)).max() < ROUNDING, "inward offset u shortens each side by 2u"
        assert np.abs(f.starts[rows][0] - [u, u, 0]).max() < ROUNDING


def test_non_planar_polygon_corners_are_mitred() -> None:
    """Each filament vertex lies at distance |(u, v)| from the lines of both adjacent centre edges."""
    bent = PolygonPath([[0, 0, 0], [0.4, 0, 0.05], [0.45, 0.3, -0.02], [0.1, 0.35, 0.08], [-0.05, 0.2, 0.0]])
    model = discretise(_case(_coil(bent, RectSection(0.02, 0.01))), discretisation=Discretisation(section_grid=(2, 2)))
    f = model.filaments
    centre = np.array(bent.points)
    edges = np.roll(centre, -1, axis=0) - centre
    incoming, outgoing = np.roll(edges, 1, axis=0), edges
    for j, (u, v) in enumerate(model.filament_offset):
        vertices = f.starts[f.filament == j] - centre
        for direction in (incoming, outgoing):
            unit = direction / np.linalg.norm(direction, axis=1, keepdims=True)
            normal_part = vertices - np.sum(vertices * unit, axis=1, keepdims=True) * unit
            distance = np.linalg.norm(normal_part, axis=1)
            assert np.abs(distance - math.hypot(u, v)).max() < ROUNDING


@pytest.mark.parametrize("path", [SADDLE, HELIX, KNOT], ids=["saddle", "helix", "curve"])
def test_reversed_coil_has_same_filaments_with_current_flipped(path: object) -> None:
    forward = discretise(_case(_coil(path, RectSection(0.01, 0.006)))).filaments
    backward = discretise(_case(_coil(path, RectSection(0.01, 0.006), reverse=True))).filaments
    def order(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return np.lexsort(np.round(np.hstack([a, b]), 9).T)

    i, k = order(forward.starts, forward.ends), order(backward.ends, backward.starts)
    assert np.abs(forward.starts[i] - backward.ends[k]).max() < ROUNDING
    assert np.abs(forward.ends[i] - backward.starts[k]).max() < ROUNDING


def test_repeated_copies_have_same_chords_moved() -> None:
    saddle = SaddlePath(0.15, 0.45, 1.2, [0, 0, 0], [0, 0, 1], [1, 0, 0])  # 4 copies of 1.2 rad leave gaps
    model = discretise(_case(_coil(saddle, RectSection(0.01, 0.004), repeat=RotationalRepeat(4, [0, 0, 1], [0, 0, 0]))))
    f = model.filaments
    first, second = f.coil == 0, f.coil == 1
    quarter = np.array([[0.0, -1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    assert np.abs(f.starts[first] @ quarter.T - f.starts[second]).max() < ROUNDING


def test_tall_pack_on_planar_ring_does_not_fold() -> None:
    """Only the in-plane half-width meets the bend of a planar path; a tall pack is fine."""
    model = discretise(_case(_coil(RING, RectSection(0.02, 0.6))))
    assert model.filaments.n_segments > 0


def test_pack_too_wide_for_bend_raises() -> None:
    with pytest.raises(GeometryError, match="coil 'c'.*fold"):
        discretise(_case(_coil(RING, RectSection(0.5, 0.01))))
    with pytest.raises(GeometryError, match="coil 'c'.*fold"):
        discretise(_case(_coil(TRACK, RoundSection(0.13))))


def test_zero_length_chords_raise() -> None:
    """The path stands still for t < 0, where t + abs(t) = 0 (and moves smoothly after: 8 t^3)."""
    angle = "(t + abs(t))**3"
    still = CurvePath(f"0.1*cos({angle})", f"0.1*sin({angle})", "0", -1.0, (math.pi / 4) ** (1 / 3))
    with pytest.raises(GeometryError, match="coil 'c'.*zero length"):
        discretise(_case(_coil(still)))


def test_too_many_chords_raise_naming_coil_and_tolerance() -> None:
    with pytest.raises(DiscretisationError, match=r"coil 'c'.*1e-13 m.*" + str(MAX_SEGMENTS_PER_COIL)):
        discretise(_case(_coil(RING)), discretisation=Discretisation(sagitta=1e-13))


@pytest.mark.parametrize(
    ("kwargs", "level"),
    [({"sagitta": -1.0}, 0), ({"sagitta_fraction": 0.0}, 0), ({"max_angle": 0.0}, 0), ({"section_grid": (0, 3)}, 0), ({}, -1)],
)
def test_bad_settings_raise(kwargs: dict, level: int) -> None:
    with pytest.raises(DiscretisationError):
        discretise(_case(_coil(RING, RectSection(0.01, 0.01))), level, Discretisation(**kwargs))


def test_unknown_circuit_is_a_case_error() -> None:
    with pytest.raises(CaseError, match="coil 'c'.*'nowhere'"):
        discretise(_case(_coil(RING, circuit="nowhere")))


def test_intersecting_coils_warn_and_touching_packs_do_not() -> None:
    upper = CirclePath(0.23, [0, 0, 0.008], [0, 0, 1], start=[1, 0, 0])
    with pytest.warns(FieldEnergyWarning, match="'a' and 'b'"):
        discretise(_case(_coil(RING, RectSection(0.02, 0.01), name="a"), _coil(upper, RectSection(0.02, 0.01), name="b")))
    touching = CirclePath(0.23, [0, 0, 0.01], [0, 0, 1], start=[1, 0, 0])
    with warnings.catch_warnings():
        warnings.simplefilter("error", FieldEnergyWarning)
        model = discretise(_case(_coil(RING, RectSection(0.02, 0.01), name="a"), _coil(touching, RectSection(0.02, 0.01), name="b")))
    assert model.coil_names == ("a", "b")


def test_max_angle_limits_turning_of_coarse_tolerance() -> None:
    model = discretise(_case(_coil(RING)), discretisation=Discretisation(sagitta=0.1, max_angle=0.25))
    assert model.filaments.n_segments == math.ceil(2 * math.pi / 0.25)


def test_corner_inside_expression_curve_warns_and_keeps_sagitta() -> None:
    """A D shape in one expression: half circle, then y = 0 for t in (pi, 2 pi); a 90 degree corner at t = pi."""
    d_shape = CurvePath("0.2*cos(t)", "0.1*(sin(t) + abs(sin(t)))", "0", 0.0, 2 * math.pi)
    with pytest.warns(FieldEnergyWarning, match=r"coil 'd'.*corner or cusp"):
        model = discretise(_case(_coil(d_shape, name="d")), discretisation=Discretisation(sagitta=1e-4))
    assert model.sagittas[0] <= 1e-4

