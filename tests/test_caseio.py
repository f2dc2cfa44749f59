"""Reading and writing case files: one fixture per path kind, units, and read -> write -> read."""

from __future__ import annotations

import dataclasses
import doctest
import math
import shutil
from pathlib import Path

import numpy as np
import pytest

import fieldenergy.caseio._reader as reader_module
import fieldenergy.caseio._units as units_module
import fieldenergy.caseio._writer as writer_module
from fieldenergy.caseio import read_case, write_case
from fieldenergy.caseio._units import ANGLE, CURRENT, LENGTH, RESISTANCE, parse_quantity
from fieldenergy.errors import CaseError, FieldEnergyWarning
from fieldenergy.model import (
    CirclePath,
    CurvePath,
    HelixPath,
    LinearRepeat,
    Mirror,
    PolygonPath,
    RacetrackPath,
    RectSection,
    Rotate,
    RotationalRepeat,
    RoundSection,
    SaddlePath,
    Translate,
)

DATA = Path(__file__).parent / "data" / "caseio"
KINDS = ["circle", "polygon", "file", "racetrack", "saddle", "helix", "curve"]

#: Unit conversions are a multiplication or division by an exact power of ten, so
#: values agree to the last bit or two.
UNIT_RTOL = 1e-15


def close(value: float, expected: float) -> bool:
    return math.isclose(value, expected, rel_tol=UNIT_RTOL, abs_tol=0.0)


def vec(values: np.ndarray, expected: list[float]) -> bool:
    return np.allclose(values, expected, rtol=UNIT_RTOL, atol=0.0) and values.shape == (len(expected),)


@pytest.mark.parametrize(
    "text, kind, expected",
    [
        ("18 mm", LENGTH, 0.018),
        ("0.05 mm", LENGTH, 5e-5),
        ("3.5 kA", CURRENT, 3500.0),
        ("12.5 A", CURRENT, 12.5),
        ("2.2 mOhm", RESISTANCE, 2.2e-3),
        ("2.2 milliohm", RESISTANCE, 2.2e-3),
        ("0.5 ohm", RESISTANCE, 0.5),
        ("3 kOhm", RESISTANCE, 3000.0),
        ("30 deg", ANGLE, math.pi / 6),  # SI Brochure, 9th ed., Table 8: 1 deg = (pi/180) rad
        ("1 inch", LENGTH, 0.0254),  # NIST SP 811 (2008), B.8: 1 in = 0.0254 m exactly
        ("-4e-2 m", LENGTH, -0.04),
        ("7um", LENGTH, 7e-6),
    ],
)
def test_parse_quantity_converts_to_si(text: str, kind: units_module.QuantityKind, expected: float) -> None:
    assert close(parse_quantity(text, kind), expected)


def test_circle_fixture_values() -> None:
    case = read_case(DATA / "circle")
    assert case.title == "Bench coil pair for magnetometer calibration"
    assert case.source == str(DATA / "circle" / "case.toml")
    assert case.folder == str(DATA / "circle")
    disc = case.discretisation
    assert close(disc.sagitta, 5e-5) and disc.sagitta_fraction == 2e-4
    assert close(disc.max_angle, math.pi / 18) and disc.section_grid == (3, 2)
    (circuit,) = case.circuits
    assert (circuit.name, circuit.current) == ("drive", 12.5)
    assert close(circuit.resistance, 2.2e-3) and circuit.dump_resistance == 0.5
    (coil,) = case.coils
    assert (coil.name, coil.circuit, coil.turns, coil.reverse) == ("upper", "drive", 40.0, True)
    assert coil.section == RectSection(width=0.018, height=0.012)
    assert vec(coil.reference, [1, 0, 0])
    path = coil.path
    assert isinstance(path, CirclePath) and path.radius == 0.31
    assert vec(path.center, [0, 0, 0.0775]) and vec(path.normal, [0, 0, 1]) and vec(path.start, [0, 1, 0])
    translate, rotate, mirror, rotate_default = coil.transforms
    assert isinstance(translate, Translate) and vec(translate.offset, [0, 0, 0.1])
    assert isinstance(rotate, Rotate) and close(rotate.angle, math.pi / 6)
    assert vec(rotate.axis, [0, 0, 1]) and vec(rotate.origin, [0, 0, 0])
    assert isinstance(mirror, Mirror) and vec(mirror.normal, [1, 0, 0]) and vec(mirror.origin, [0.05, 0, 0])
    assert isinstance(rotate_default, Rotate) and rotate_default.angle == 0.25
    assert vec(rotate_default.origin, [0, 0, 0])
    repeat = coil.repeat
    assert isinstance(repeat, RotationalRepeat) and repeat.count == 4
    assert vec(repeat.axis, [0, 0, 1]) and vec(repeat.origin, [0, 0, 0])


def test_polygon_fixture_values() -> None:
    case = read_case(DATA / "polygon" / "case.toml")
    assert case.discretisation.sagitta is None and case.discretisation.sagitta_fraction == 5e-4
    assert case.discretisation.section_grid is None
    assert close(case.circuits[0].current, 3500.0) and case.circuits[0].resistance == 0.0
    (coil,) = case.coils
    assert coil.turns == 2.5 and coil.section == RoundSection(radius=0.0012)
    assert coil.transforms == () and coil.reference is None and coil.reverse is False
    assert isinstance(coil.path, PolygonPath) and coil.path.source is None
    # plain numbers are in the path's unit (mm); a unit string keeps its own unit
    expected = [[-0.04, -0.04, 0], [0.04, -0.04, 0], [0.04, 0.04, 0.01], [-0.04, 0.04, 0]]
    assert np.allclose(coil.path.points, expected, rtol=UNIT_RTOL, atol=0.0)
    assert isinstance(coil.repeat, LinearRepeat) and coil.repeat.count == 5
    assert vec(coil.repeat.step, [0, 0, 0.02])


def test_file_fixture_values() -> None:
    case = read_case(DATA / "file")
    (circuit,) = case.circuits
    assert circuit.current == -7.0 and close(circuit.resistance, 2.2e-3)
    path = case.coils[0].path
    assert isinstance(path, PolygonPath) and path.source == "winding.csv"
    expected = [[0.1, 0, 0], [0.031, 0.095, 0], [-0.081, 0.059, 0.005], [-0.081, -0.059, 0], [0.031, -0.095, 0]]
    assert np.allclose(path.points, expected, rtol=UNIT_RTOL, atol=0.0)
    assert case.coils[0].section == RectSection(width=0.004, height=0.006)


def test_racetrack_fixture_values() -> None:
    (coil,) = read_case(DATA / "racetrack").coils
    path = coil.path
    assert isinstance(path, RacetrackPath) and coil.turns == 120.0
    assert path.straight == 0.4 and close(path.radius, 0.075)
    assert vec(path.center, [0, 0, -0.03]) and vec(path.normal, [0, 1, 0]) and vec(path.direction, [0, 0, 1])


def test_saddle_fixture_values_and_defaults() -> None:
    left, right = read_case(DATA / "saddle").coils
    for coil in (left, right):
        path = coil.path
        assert isinstance(path, SaddlePath)
        assert close(path.radius, 0.045) and close(path.length, 0.16)
        assert close(path.opening, 2 * math.pi / 3)  # 120 deg
        assert vec(path.center, [0, 0, 0]) and vec(path.axis, [0, 0, 1])
    assert vec(left.path.direction, [0, 1, 0])
    assert vec(right.path.direction, [1, 0, 0])  # the documented default


def test_helix_fixture_values() -> None:
    (coil,) = read_case(DATA / "helix").coils
    path = coil.path
    assert isinstance(path, HelixPath)
    assert close(path.radius, 0.011) and close(path.pitch, 0.0011) and path.turns == 36.5
    assert vec(path.center, [0, 0, -0.02]) and vec(path.axis, [0, 0, 1]) and vec(path.start, [0, -1, 0])
    assert close(read_case(DATA / "helix").circuits[0].current, 1.75)


def test_curve_fixture_scales_expressions_by_the_unit() -> None:
    wavy, ellipse = read_case(DATA / "curve").coils
    assert isinstance(wavy.path, CurvePath)
    assert (wavy.path.x, wavy.path.y, wavy.path.z) == ("(30*cos(t))*0.001", "(30*sin(t))*0.001", "(4*sin(3*t))*0.001")
    assert (wavy.path.t0, wavy.path.t1) == (0.0, 2 * math.pi)
    assert isinstance(ellipse.path, CurvePath)
    assert (ellipse.path.x, ellipse.path.z, ellipse.path.t0) == ("0.05*cos(t)", "0", -math.pi)


def test_circle_defaults(tmp_path: Path) -> None:
    (tmp_path / "c.toml").write_text(
        'title = "defaults"\n[[circuit]]\nname = "a"\ncurrent = 1\n[[coil]]\nname = "k"\ncircuit = "a"\n'
        'section = { shape = "round", radius = 0.001 }\npath = { kind = "circle", radius = 0.1 }\n'
    )
    case = read_case(tmp_path / "c.toml")
    coil = case.coils[0]
    assert vec(coil.path.center, [0, 0, 0]) and vec(coil.path.normal, [0, 0, 1]) and coil.path.start is None
    assert coil.turns == 1.0 and coil.repeat is None and coil.transforms == ()
    assert case.discretisation.max_angle == math.radians(10.0) and case.discretisation.sagitta is None
    assert case.folder == str(tmp_path)


def test_circuit_without_coils_warns(tmp_path: Path) -> None:
    text = (DATA / "racetrack" / "case.toml").read_text() + '\n[[circuit]]\nname = "spare"\ncurrent = "1 A"\n'
    (tmp_path / "case.toml").write_text(text)
    with pytest.warns(FieldEnergyWarning, match=r"case\.toml, circuit 'spare': no coil is in this circuit"):
        case = read_case(tmp_path)
    assert [c.name for c in case.circuits] == ["field", "spare"]


def assert_same(a: object, b: object, where: str = "case") -> None:
    """Compare model records field by field; arrays with array_equal (exact)."""
    assert type(a) is type(b), where
    if dataclasses.is_dataclass(a):
        for f in dataclasses.fields(a):
            assert_same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}")
    elif isinstance(a, np.ndarray):
        assert np.array_equal(a, b), where
    elif isinstance(a, tuple):
        assert len(a) == len(b), where
        for k, (x, y) in enumerate(zip(a, b, strict=True)):
            assert_same(x, y, f"{where}[{k}]")
    else:
        assert a == b, where


@pytest.mark.parametrize("kind", KINDS)
def test_round_trip_gives_an_equal_case(kind: str, tmp_path: Path) -> None:
    source = tmp_path / "in"
    shutil.copytree(DATA / kind, source)
    before = {p.name: p.read_bytes() for p in source.iterdir()}
    first = read_case(source)
    written = write_case(first, tmp_path / "out")
    assert written == tmp_path / "out" / "case.toml"
    second = read_case(written)
    assert {p.name: p.read_bytes() for p in source.iterdir()} == before  # input untouched
    if kind == "file":  # the points are written inline, so the file name is gone
        assert first.coils[0].path.source == "winding.csv" and second.coils[0].path.source is None
        first = dataclasses.replace(
            first, coils=(dataclasses.replace(first.coils[0], path=PolygonPath(first.coils[0].path.points)),)
        )
    assert_same(
        dataclasses.replace(first, source=None, folder=None), dataclasses.replace(second, source=None, folder=None)
    )
    assert second.source == str(written) and second.folder == str(tmp_path / "out")
    # writing the re-read case gives the same text: the format is stable
    again = write_case(second, tmp_path / "again")
    assert again.read_text() == written.read_text()
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["case.toml"]  # no temporary left


def test_write_replaces_an_existing_case_file(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text("old content")
    write_case(read_case(DATA / "helix"), tmp_path)
    assert read_case(tmp_path).title == "Single-layer helical solenoid"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["case.toml"]


def test_write_into_a_file_instead_of_a_folder_is_a_case_error(tmp_path: Path) -> None:
    blocker = tmp_path / "blocker"
    blocker.write_text("not a folder")
    with pytest.raises(CaseError, match=r"blocker/case\.toml: cannot write the case file"):
        write_case(read_case(DATA / "helix"), blocker)


def test_write_refuses_a_foreign_path_type(tmp_path: Path) -> None:
    case = read_case(DATA / "helix")
    odd = dataclasses.replace(case, coils=(dataclasses.replace(case.coils[0], path="a circle"),))
    with pytest.raises(TypeError, match="cannot write a path of type str"):
        write_case(odd, tmp_path)


@pytest.mark.parametrize("module", [reader_module, writer_module, units_module])
def test_docstring_examples_run(module: object) -> None:
    result = doctest.testmod(module, raise_on_error=False, verbose=False)
    assert result.attempted >= 1 and result.failed == 0
