"""The command line, run in-process: exit codes, printed tables, written files."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from fieldenergy.cli import main
from fieldenergy.constants import MU0

LOOP_CASE = """
title = "Single test loop"
[[circuit]]
name = "c"
current = "2 A"
[[coil]]
name = "loop"
circuit = "c"
section = {{ shape = "round", radius = "1 mm" }}
path = {{ kind = "circle", radius = {radius}, center = [0, 0, 0], normal = [0, 0, 1] }}
"""

#: The fast preset's accuracy on a single loop (two levels, coarse chords).
FAST_RTOL = 1e-3


@pytest.fixture()
def loop_case(tmp_path: Path) -> Path:
    folder = tmp_path / "loop"
    folder.mkdir()
    (folder / "case.toml").write_text(LOOP_CASE.format(radius=0.2))
    return folder


def test_solve_writes_result_folder_and_json(loop_case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out_json = tmp_path / "r.json"
    assert main(["solve", str(loop_case), "--preset", "fast", "--json", str(out_json)]) == 0
    text = capsys.readouterr().out
    assert "Inductance matrix (H)" in text and "CAUTION" in text and "licensed" in text
    data = json.loads(out_json.read_text())
    assert data["inductance"]["circuits"] == ["c"]
    l_ref = MU0 * 0.2 * (math.log(8 * 0.2 / 1e-3) - 1.75)  # Rosa & Grover 1912, thin round-wire loop
    assert data["inductance"]["matrix_H"][0][0] == pytest.approx(l_ref, rel=FAST_RTOL)
    assert data["energy"]["total_J"] == pytest.approx(0.5 * 4.0 * data["inductance"]["matrix_H"][0][0], rel=1e-12)
    assert data["energy"]["aj_J"] == data["energy"]["total_J"]
    assert 0 < data["error_estimate"]["relative"] < 1e-2
    assert data["settings"]["preset"] == "fast"
    saved = json.loads((loop_case / "result" / "result.json").read_text())
    assert saved["inductance"]["matrix_H"] == data["inductance"]["matrix_H"]
    assert (loop_case / "result" / "inductance.csv").read_text().startswith("name_H,c")


def test_check_prints_summary_and_writes_vtk(loop_case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import meshio

    vtk = tmp_path / "g.vtu"
    assert main(["check", str(loop_case), "--vtk", str(vtk)]) == 0
    text = capsys.readouterr().out
    assert "loop" in text and "ampere-turns" in text
    mesh = meshio.read(vtk)
    cells = mesh.cells_dict["line"]
    current = mesh.cell_data_dict["current_A"]["line"]
    assert len(cells) == len(current) > 30
    np.testing.assert_allclose(current, 2.0, rtol=1e-12)
    pts = mesh.points[cells]
    length = np.linalg.norm(pts[:, 1] - pts[:, 0], axis=1).sum()
    assert length == pytest.approx(2 * math.pi * 0.2, rel=1e-3)  # chords of a circle: elementary geometry


def test_map_writes_field_table(loop_case: Path, tmp_path: Path) -> None:
    pts = tmp_path / "p.csv"
    pts.write_text("x,y,z\n0,0,0\n0,0,0.1\n")
    out = tmp_path / "f.csv"
    assert main(["map", str(loop_case), "--points", str(pts), "--out", str(out), "--preset", "fast"]) == 0
    table = np.loadtxt(out, delimiter=",", skiprows=1)
    r, i = 0.2, 2.0
    for z, row in zip((0.0, 0.1), table):
        bz = MU0 * i * r**2 / (2 * (r**2 + z**2) ** 1.5)  # on-axis loop field (Biot-Savart; from memory)
        # fast preset: 42 and 84 chords, extrapolated; the O(N^-4) remainder is about 1e-6
        assert row[5] == pytest.approx(bz, rel=1e-5)
        assert abs(row[3]) < 1e-9 * bz and abs(row[4]) < 1e-9 * bz


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("title = 'x'\n[[circuit]]\nname='c'\ncurrent='2 A'\n", "coil"),
        (LOOP_CASE.format(radius=-0.2), "radius"),
        (LOOP_CASE.format(radius="'3 A'"), "radius"),
        ("title = \n", "case.toml"),
    ],
)
def test_bad_case_exits_2_with_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, fragment: str) -> None:
    folder = tmp_path / "bad"
    folder.mkdir()
    (folder / "case.toml").write_text(text)
    assert main(["solve", str(folder), "--preset", "fast"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("fieldenergy: error:")
    assert "case.toml" in err[0] and fragment in err[0]
    assert not (folder / "result").exists()


def test_missing_case_folder_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(tmp_path / "nowhere")]) == 2
    assert "nowhere" in capsys.readouterr().err


def test_bad_points_file_exits_2(loop_case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    bad = tmp_path / "p.csv"
    bad.write_text("u,v\n1,2\n")
    assert main(["map", str(loop_case), "--points", str(bad), "--out", str(tmp_path / "o.csv")]) == 2
    assert "p.csv" in capsys.readouterr().err
    assert not (tmp_path / "o.csv").exists()


def test_bad_levels_option_is_a_usage_error(loop_case: Path) -> None:
    with pytest.raises(SystemExit) as info:
        main(["solve", str(loop_case), "--levels", "0"])
    assert info.value.code == 2
