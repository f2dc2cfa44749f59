"""Exact curves of each path kind, rigid transforms, coil instances and section frames."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from fieldenergy.discretise import chord_grid
from fieldenergy.errors import CaseError, GeometryError
from fieldenergy.geometry import (
    coil_instances,
    exact_curve,
    reversed_curve,
    rotation_matrix,
    rotation_minimising_frame,
    section_frame,
    transformed,
)
from fieldenergy.geometry.transforms import repeat_maps
from fieldenergy.model import (
    CirclePath,
    Coil,
    CurvePath,
    HelixPath,
    LinearRepeat,
    Mirror,
    PolygonPath,
    RacetrackPath,
    Rotate,
    RotationalRepeat,
    RoundSection,
    SaddlePath,
    Translate,
)

#: Rounding in arc-length bookkeeping and trigonometry of a few pieces (values of order 1).
ROUNDING = 1e-12

#: Test data (invented): one path of each kind, sizes of order 0.1 m.
PATHS = {
    "circle": CirclePath(0.37, [0.1, -0.2, 0.05], [0.3, 0.2, 1.0]),
    "polygon": PolygonPath([[0, 0, 0], [0.3, 0.02, 0], [0.35, 0.25, 0.05], [0.1, 0.3, 0.1], [-0.05, 0.12, 0.02]]),
    "racetrack": RacetrackPath(0.42, 0.11, [0, 0, 0.3], [0, 1, 1], [1, 0, 0]),
    "saddle": SaddlePath(0.13, 0.5, 2.1, [0, 0, 0], [0, 0, 1], [1, 0.2, 0]),
    "helix": HelixPath(0.06, 0.013, 4.5, [0, 0, 0], [0.2, 0, 1]),
    "curve": CurvePath("0.2*cos(t) + 0.05*cos(2*t)", "0.2*sin(t) - 0.05*sin(2*t)", "0.03*sin(3*t)", 0.0, 2 * math.pi),
}


def _slope(x: list[float], y: list[float]) -> float:
    return float(np.polyfit(np.log(x), np.log(y), 1)[0])


def test_inscribed_polygon_perimeter_and_area_converge_at_second_order() -> None:
    """Regular N-gon inscribed in a circle: perimeter -> 2 pi R, area -> pi R^2 as N^-2.

    Elementary geometry (common practice): perimeter 2 N R sin(pi/N), area (N/2) R^2 sin(2 pi/N).
    """
    radius = 0.29
    ns = [8, 16, 32, 64, 128]
    perimeter_err, area_err = [], []
    for n in ns:
        phi = 2 * math.pi * np.arange(n) / n
        points = radius * np.column_stack([np.cos(phi), np.sin(phi), np.zeros(n)])
        curve = exact_curve(PolygonPath(points))
        vertices = curve.position(curve.breaks[:-1])
        area = 0.5 * np.linalg.norm(np.sum(np.cross(vertices, np.roll(vertices, -1, axis=0)), axis=0))
        perimeter_err.append(abs(curve.length() - 2 * math.pi * radius))
        area_err.append(abs(area - math.pi * radius**2))
    p_rate, a_rate = _slope(ns, perimeter_err), _slope(ns, area_err)
    assert abs(p_rate + 2.0) < 0.15, f"perimeter error falls as N^{p_rate:.3f}, expected N^-2"
    assert abs(a_rate + 2.0) < 0.15, f"area error falls as N^{a_rate:.3f}, expected N^-2"


def test_chords_of_exact_circle_converge_at_second_order() -> None:
    """Chords of the exact circle: their total length -> 2 pi R as N^-2 (common practice)."""
    curve = exact_curve(PATHS["circle"])
    counts, errors = [], []
    for tolerance in [1e-2, 3e-3, 1e-3, 3e-4, 1e-4]:
        grid = chord_grid(curve, tolerance, 0.5 * math.pi)
        nodes = curve.position(grid.t)
        counts.append(grid.n_chords)
        errors.append(2 * math.pi * 0.37 - np.linalg.norm(np.diff(nodes, axis=0), axis=1).sum())
    rate = _slope(counts, errors)
    assert abs(rate + 2.0) < 0.15, f"chord length error falls as N^{rate:.3f}, expected N^-2"


@pytest.mark.parametrize("kind", sorted(PATHS))
def test_chord_sagitta_and_angle_respected(kind: str) -> None:
    """Densely sampled, the exact curve never strays further than the tolerance from its chords."""
    curve = exact_curve(PATHS[kind])
    tolerance, max_angle = 2e-4, 0.2
    grid = chord_grid(curve, tolerance, max_angle)
    fractions = np.linspace(0.0, 1.0, 65)
    t = grid.t[:-1, None] + fractions[None, :] * np.diff(grid.t)[:, None]
    p = curve.position(t.ravel(), np.repeat(grid.piece, len(fractions))).reshape(*t.shape, 3)
    a, b = p[:, :1], p[:, -1:]
    d = b - a
    s = np.clip(np.sum((p - a) * d, axis=2) / np.sum(d * d, axis=2), 0, 1)
    distance = np.linalg.norm(p - a - s[..., None] * d, axis=2).max()
    assert distance <= tolerance * (1 + ROUNDING), f"{kind}: sagitta {distance:.3g} m > {tolerance} m"
    assert grid.turn <= max_angle, f"{kind}: chords turn by {grid.turn:.3g} rad > {max_angle}"
    # straight pieces are exact and get one chord each
    assert np.all(grid.counts[curve.straight] == 1)


@pytest.mark.parametrize("kind", sorted(PATHS))
def test_every_kind_is_closed(kind: str) -> None:
    curve = exact_curve(PATHS[kind])
    gap = np.linalg.norm(curve.position(curve.t_end) - curve.position(curve.t_start))
    assert gap <= ROUNDING * curve.size(), f"{kind}: end {gap:.3g} m from start"


def test_racetrack_saddle_helix_lengths() -> None:
    """Lengths against elementary geometry (common practice)."""
    track = exact_curve(RacetrackPath(0.42, 0.11, [0, 0, 0], [0, 0, 1], [1, 0, 0]))
    assert abs(track.length() - (2 * 0.42 + 2 * math.pi * 0.11)) < ROUNDING
    # generic Gauss-Legendre (128 x 8 nodes per piece) on a piecewise-constant speed: ~1e-14
    assert abs(_quadrature_length(track) - (2 * 0.42 + 2 * math.pi * 0.11)) < 1e-9
    saddle = exact_curve(SaddlePath(0.13, 0.5, 2.1, [0, 0, 0], [0, 0, 1], [1, 0, 0]))
    assert abs(saddle.length() - (2 * 0.5 + 2 * 0.13 * 2.1)) < ROUNDING
    # the return lead: radius in, turns * pitch back along the axis, radius out
    helix = exact_curve(HelixPath(0.06, 0.013, 5, [0, 0, 0], [0, 0, 1]))
    expected = 5 * math.hypot(2 * math.pi * 0.06, 0.013) + 5 * 0.013 + 2 * 0.06
    assert abs(helix.length() - expected) < ROUNDING
    assert abs(_quadrature_length(helix) - expected) < 1e-9  # same quadrature, constant speed


def _quadrature_length(curve: object) -> float:
    """Arc length by the generic quadrature of the Curve base class (independent of arc-length bookkeeping)."""
    from fieldenergy.geometry import Curve

    return Curve.length(curve)  # type: ignore[arg-type]


def test_long_helix_is_sampled_per_turn() -> None:
    """128 whole turns: sampled once per piece, every point would sit at azimuth 0 or pi."""
    helix = exact_curve(HelixPath(0.05, 0.002, 128, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    assert helix.plane_normal() is None
    box = math.sqrt(2 * 0.1**2 + (128 * 0.002) ** 2)  # 2r x 2r x turns*pitch
    assert abs(helix.size() - box) < ROUNDING


def test_fractional_helix_return_lead_runs_back_along_the_axis() -> None:
    path = HelixPath(0.06, 0.013, 2.25, [0, 0, 0], [0, 0, 1], start=[1, 0, 0])
    helix = exact_curve(path)
    last = np.array([0.0, 0.06, 2.25 * 0.013])  # a quarter turn past two whole turns
    lead = 0.06 + 2.25 * 0.013 + 0.06  # in to the axis, down the axis, out to the start
    assert helix.straight.tolist() == [False, True, True, True]
    assert np.allclose(helix.position(helix.breaks[1]), last, atol=ROUNDING)
    assert np.allclose(helix.position(helix.breaks[2]), [0, 0, 2.25 * 0.013], atol=ROUNDING)
    assert np.allclose(helix.position(helix.breaks[3]), [0, 0, 0], atol=ROUNDING)
    assert abs(helix.length() - (2.25 * math.hypot(2 * math.pi * 0.06, 0.013) + lead)) < ROUNDING


def test_expression_curve_length_and_derivative_accuracy() -> None:
    """A circle written as expressions: length 2 pi r (common practice); derivative vs the analytic one."""
    curve = exact_curve(CurvePath("0.3*cos(t)", "0.3*sin(t)", "0", 0.0, 2 * math.pi))
    assert abs(curve.length() - 2 * math.pi * 0.3) < 1e-10  # Gauss-Legendre on a smooth speed
    t = np.random.default_rng(0).uniform(0, 2 * math.pi, 50)
    exact = 0.3 * np.column_stack([-np.sin(t), np.cos(t), 0 * t])
    err = np.abs(curve.derivative(t) - exact).max() / 0.3
    assert err < 1e-8, f"derivative relative error {err:.3g} (4th-order differences should reach ~1e-11)"
    assert np.allclose(curve.plane_normal(), [0, 0, 1], atol=ROUNDING)


def test_plane_normals_follow_circulation() -> None:
    assert exact_curve(PATHS["saddle"]).plane_normal() is None
    assert exact_curve(PATHS["helix"]).plane_normal() is None
    clockwise = exact_curve(PolygonPath([[0, 0, 0], [0, 1, 0], [1, 1, 0], [1, 0, 0]]))
    assert np.allclose(clockwise.plane_normal(), [0, 0, -1], atol=ROUNDING)
    track = exact_curve(RacetrackPath(0.42, 0.11, [0, 0, 0], [0, 0, 3], [1, 0, 0]))
    assert np.allclose(track.plane_normal(), [0, 0, 1], atol=ROUNDING)


def _check_orthonormal(curve: object, t: np.ndarray, e_w: np.ndarray, e_h: np.ndarray) -> None:
    tangent = curve.tangent(t)  # type: ignore[attr-defined]
    for name, value in [
        ("|e_w|", np.linalg.norm(e_w, axis=1) - 1),
        ("|e_h|", np.linalg.norm(e_h, axis=1) - 1),
        ("e_w.e_h", np.sum(e_w * e_h, axis=1)),
        ("e_w.T", np.sum(e_w * tangent, axis=1)),
        ("e_h.T", np.sum(e_h * tangent, axis=1)),
        ("e_w x e_h - T", np.linalg.norm(np.cross(e_w, e_h) - tangent, axis=1)),
    ]:
        assert np.abs(value).max() < ROUNDING, f"{name} off by {np.abs(value).max():.3g}"


@pytest.mark.parametrize("kind", ["helix", "curve", "saddle", "circle"])
def test_section_frame_is_orthonormal(kind: str) -> None:
    curve = exact_curve(PATHS[kind])
    t = np.random.default_rng(1).uniform(curve.t_start, curve.t_end, 300)
    _check_orthonormal(curve, t, *section_frame(curve, t))


def test_rotation_minimising_frame_does_not_twist_on_helix() -> None:
    """On the helix the frame turns about the tangent only by the spread closure angle.

    Away from corners, d(e_w)/ds . e_h must equal closure / length. Relative to the Frenet
    normal (towards the axis) e_w then turns at -torsion + closure/length, with the helix
    torsion c / (r^2 + c^2), c = pitch / 2 pi (elementary differential geometry, from memory).
    """
    radius, pitch = 0.06, 0.013
    curve = exact_curve(HelixPath(radius, pitch, 3, [0, 0, 0], [0, 0, 1], start=[1, 0, 0]))
    h = 1e-4  # m of arc; central differences then err by ~h^2 * rate^3, far below the tolerance
    s = np.linspace(0.05, curve.breaks[1] - 0.05, 40)
    t = np.concatenate([s - h, s, s + h])
    e_w, e_h, closure = rotation_minimising_frame(curve, t)
    w_minus, w_mid, w_plus = np.split(e_w, 3)
    rate = np.sum((w_plus - w_minus) / (2 * h) * np.split(e_h, 3)[1], axis=1)
    expected = closure / curve.length()
    # tolerance: rounding (~1e-16) of e_w over the 2h difference step, plus its h^2 truncation
    assert np.abs(rate - expected).max() < 1e-5, f"twist rate {rate.min():.4g}..{rate.max():.4g}, expected {expected:.4g}"
    c = pitch / (2 * math.pi)
    torsion = c / (radius**2 + c**2)
    points = curve.position(s)
    inward = -points[:, :2] / np.linalg.norm(points[:, :2], axis=1, keepdims=True)
    frenet_n = np.column_stack([inward, np.zeros(len(s))])
    frenet_b = np.cross(curve.tangent(s), frenet_n)
    angle = np.unwrap(np.arctan2(np.sum(w_mid * frenet_b, axis=1), np.sum(w_mid * frenet_n, axis=1)))
    slope = np.polyfit(s, angle, 1)[0]
    # tolerance: double reflection on 0.02 rad steps errs by ~step^4 per radian turned
    assert abs(slope - (-torsion + expected)) < 1e-9 * torsion, f"e_w turns at {slope:.6g} rad/m vs Frenet"


def test_saddle_frame_keeps_cylinder_normal() -> None:
    """On a saddle the rotation-minimising frame started across the cylinder stays so all round.

    Straights along the generators and arcs in planes normal to the axis carry the cylinder's
    normal without rotation, so no closure correction is needed (common practice).
    """
    curve = exact_curve(SaddlePath(0.13, 0.5, 2.1, [0, 0, 0], [0, 0, 1], [1, 0, 0]))
    t = np.linspace(curve.t_start, curve.t_end, 400)
    _, e_h, closure = rotation_minimising_frame(curve, t)
    points = curve.position(t)
    radial = np.column_stack([points[:, :2], np.zeros(len(t))]) / 0.13
    assert abs(closure) < 1e-9, f"closure angle {closure:.3g} rad"
    assert np.abs(np.sum(e_h * radial, axis=1) + 1).max() < 1e-9  # e_h points to the axis everywhere


def test_planar_frame_is_normal_and_inward() -> None:
    curve = exact_curve(CirclePath(0.37, [0, 0, 0], [0, 0, 1]))
    t = np.linspace(0, curve.t_end, 17)
    e_w, e_h = section_frame(curve, t)
    inward = -curve.position(t) / 0.37
    assert np.abs(e_w - inward).max() < ROUNDING
    assert np.abs(e_h - [0, 0, 1]).max() < ROUNDING


def test_section_frame_starts_along_reference() -> None:
    curve = exact_curve(PATHS["curve"])
    tangent = curve.tangent(curve.t_start)[0]
    reference = np.array([0.3, -1.0, 0.4])
    expected = reference - (reference @ tangent) * tangent
    e_w, _ = section_frame(curve, [curve.t_start], reference)
    assert np.abs(e_w[0] - expected / np.linalg.norm(expected)).max() < ROUNDING


def test_rotation_matrix_matches_scipy() -> None:
    """Rodrigues' formula against scipy.spatial.transform.Rotation, an independent implementation."""
    rng = np.random.default_rng(2)
    for _ in range(5):
        axis, angle = rng.normal(size=3), rng.uniform(-4, 4)
        ref = Rotation.from_rotvec(angle * axis / np.linalg.norm(axis)).as_matrix()
        assert np.abs(rotation_matrix(axis, angle) - ref).max() < ROUNDING


def test_translate_rotate_mirror_move_points() -> None:
    base = exact_curve(PATHS["polygon"])
    t = np.linspace(base.t_start, base.t_end, 23)
    p = base.position(t)
    shifted = transformed(base, Translate([0.1, -0.2, 0.3]))
    assert np.abs(shifted.position(t) - (p + [0.1, -0.2, 0.3])).max() < ROUNDING
    origin = np.array([0.2, 0.1, -0.3])
    turned = transformed(base, Rotate([1, 1, 0], 0.7, origin))
    ref = Rotation.from_rotvec(0.7 * np.array([1, 1, 0]) / math.sqrt(2)).apply(p - origin) + origin
    assert np.abs(turned.position(t) - ref).max() < ROUNDING
    normal = np.array([0.0, 0.6, 0.8])
    # reflection in a plane: p - 2 ((p - o) . n) n (elementary geometry, common practice)
    mirrored = transformed(base, Mirror(normal, origin))
    reflected = p - 2 * ((p - origin) @ normal)[:, None] * normal
    assert np.abs(mirrored.position(t) - reflected).max() < ROUNDING
    twice = transformed(mirrored, Mirror(normal, origin))
    assert np.abs(twice.position(t) - p).max() < ROUNDING
    # the circulation normal is a pseudovector: a mirror reflects it and flips its sign
    circle = exact_curve(PATHS["circle"])
    n = circle.plane_normal()
    mirrored_n = transformed(circle, Mirror(normal, origin)).plane_normal()
    assert np.abs(mirrored_n + (n - 2 * (n @ normal) * normal)).max() < ROUNDING


def test_reverse_flips_current_direction() -> None:
    base = exact_curve(PATHS["racetrack"])
    back = reversed_curve(base)
    t = np.linspace(base.t_start, base.t_end, 31)[1:-1]
    mirror_t = base.t_start + base.t_end - t
    assert np.abs(back.position(t) - base.position(mirror_t)).max() < ROUNDING
    assert np.abs(back.tangent(t) + base.tangent(mirror_t)).max() < ROUNDING
    assert np.abs(back.plane_normal() + base.plane_normal()).max() < ROUNDING
    assert reversed_curve(back) is base
    assert back.straight.tolist() == base.straight[::-1].tolist()


def _coil(**kw: object) -> Coil:
    args = {"name": "c", "circuit": "main", "section": RoundSection(1e-3), "path": PATHS["racetrack"]}
    args.update(kw)
    return Coil(**args)  # type: ignore[arg-type]


def test_linear_repeat_count_spacing_and_names() -> None:
    step = np.array([0.0, 0.05, 0.2])
    instances = coil_instances(_coil(repeat=LinearRepeat(4, step)))
    assert [name for name, _ in instances] == ["c", "c[2]", "c[3]", "c[4]"]
    t = np.linspace(0, instances[0][1].t_end, 9)
    for k, (_, curve) in enumerate(instances):
        assert np.abs(curve.position(t) - instances[0][1].position(t) - k * step).max() < ROUNDING


def test_rotating_a_repeated_set_equals_rotating_each_copy() -> None:
    """G (R_k p) = (G R_k G^T)(G p): rotating the repeat axis with the coil rotates every copy."""
    g_axis, g_angle = np.array([0.3, 1.0, -0.2]), 0.9
    g = Rotation.from_rotvec(g_angle * g_axis / np.linalg.norm(g_axis))
    origin = np.array([0.1, 0.0, 0.2])
    first = coil_instances(_coil(transforms=(Rotate([1, 0, 0], 0.3, [0, 0, 0]),), repeat=RotationalRepeat(5, [0, 0, 1], origin)))
    second = coil_instances(
        _coil(
            transforms=(Rotate([1, 0, 0], 0.3, [0, 0, 0]), Rotate(g_axis, g_angle, [0, 0, 0])),
            repeat=RotationalRepeat(5, g.apply([0, 0, 1]), g.apply(origin)),
        )
    )
    t = np.linspace(0, first[0][1].t_end, 13)
    assert len(first) == len(second) == 5
    for (_, a), (_, b) in zip(first, second):
        assert np.abs(g.apply(a.position(t)) - b.position(t)).max() < ROUNDING


def test_rotational_repeat_copies_are_evenly_turned() -> None:
    maps = repeat_maps(RotationalRepeat(6, [0, 0, 2], [0, 0, 0]))
    p = np.array([1.0, 0.0, 0.5])
    angles = [math.atan2(*(q @ p + o)[[1, 0]]) % (2 * math.pi) for q, o in maps]
    assert np.abs(np.array(angles) - 2 * math.pi * np.arange(6) / 6).max() < ROUNDING


def test_transforms_apply_in_order_then_reverse() -> None:
    coil = _coil(transforms=(Translate([1, 0, 0]), Rotate([0, 0, 1], math.pi / 2, [0, 0, 0])), reverse=True)
    (_, curve), = coil_instances(coil)
    base = exact_curve(PATHS["racetrack"])
    p = base.position(base.t_start)[0] + [1, 0, 0]
    expected = np.array([-p[1], p[0], p[2]])  # translate first, then a quarter turn about z
    assert np.abs(curve.position(curve.t_end)[0] - expected).max() < ROUNDING


BAD_PATHS = [
    (CirclePath(0.0, [0, 0, 0], [0, 0, 1]), "radius"),
    (CirclePath(0.1, [0, 0, 0], [0, 0, 0]), "normal"),
    (CirclePath(0.1, [0, 0, 0], [0, 0, 1], start=[0, 0, 2]), "parallel"),
    (PolygonPath([[0, 0, 0], [1, 0, 0], [1, 0, 0], [0, 1, 0]]), "repeat"),
    (PolygonPath([[0, 0, 0], [1, 0, 0], [2, 0, 0]]), "one line"),
    (PolygonPath([[0, 0, 0], [1, 0, 0]]), "at least 3"),
    (PolygonPath([[0, 0, 0], [1, np.nan, 0], [0, 1, 0]]), "finite"),
    (RacetrackPath(0.2, 0.1, [0, 0, 0], [0, 0, 1], [0, 0, 1]), "parallel"),
    (RacetrackPath(-0.2, 0.1, [0, 0, 0], [0, 0, 1], [1, 0, 0]), "straight"),
    (SaddlePath(0.1, 0.3, 2.0, [0, 0, 0], [0, 0, 0], [1, 0, 0]), "axis"),
    (SaddlePath(0.1, 0.3, 7.0, [0, 0, 0], [0, 0, 1], [1, 0, 0]), "opening"),
    (HelixPath(0.1, 0.01, 3, [0, 0, 0], [0, 0, 0]), "axis"),
    (HelixPath(0.1, 0.01, -1, [0, 0, 0], [0, 0, 1]), "turns"),
    (CurvePath("cos(t)", "sin(t)", "t", 0.0, 2 * math.pi), "not closed"),
    (CurvePath("cos(t)", "sin(t)", "log(t)", 0.0, 2 * math.pi), "not finite"),
    (CurvePath("cos(t)", "sin(t)", "0", 1.0, 1.0), "t1 > t0"),
]


@pytest.mark.parametrize(("path", "text"), BAD_PATHS)
def test_degenerate_paths_raise_geometry_error_naming_coil(path: object, text: str) -> None:
    with pytest.raises(GeometryError, match=text) as info:
        exact_curve(path, "bad")  # type: ignore[arg-type]
    assert "coil 'bad'" in str(info.value)


@pytest.mark.parametrize(
    ("kw", "text"),
    [
        ({"transforms": (Rotate([0, 0, 0], 1.0, [0, 0, 0]),)}, "rotation axis"),
        ({"transforms": (Mirror([0, 0, 0], [0, 0, 0]),)}, "mirror normal"),
        ({"repeat": RotationalRepeat(3, [0, 0, 0], [0, 0, 0])}, "repeat axis"),
        ({"repeat": LinearRepeat(0, [0, 0, 1])}, "repeat count"),
    ],
)
def test_degenerate_transforms_raise_geometry_error(kw: dict, text: str) -> None:
    with pytest.raises(GeometryError, match=text) as info:
        coil_instances(_coil(**kw))
    assert "coil 'c'" in str(info.value)


def test_bad_expression_is_a_case_error() -> None:
    with pytest.raises(CaseError, match="coil 'bad'"):
        exact_curve(CurvePath("cos(t)", "__import__('os')", "0", 0, 1), "bad")


def test_explicit_closing_point_is_dropped() -> None:
    square = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]]
    assert exact_curve(PolygonPath(square + [[0, 0, 0]])).n_pieces == 4
    assert abs(exact_curve(PolygonPath(square + [[0, 0, 0]])).length() - 4.0) < ROUNDING


def test_reference_along_start_tangent_is_refused() -> None:
    curve = exact_curve(PATHS["saddle"])
    with pytest.raises(GeometryError, match="reference"):
        section_frame(curve, [0.1], reference=curve.tangent(curve.t_start)[0])
