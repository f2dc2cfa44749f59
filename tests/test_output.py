"""Writers at the edge: atomic files and folders, point CSV files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fieldenergy.errors import CaseError, ExportError
from fieldenergy.output.atomic import write_folder, write_text
from fieldenergy.output.points_csv import FIELD_COLUMNS, read_points, write_field_table


def test_write_text_replaces_whole_file_and_leaves_no_temporary(tmp_path: Path) -> None:
    target = tmp_path / "a.txt"
    write_text(target, "first")
    write_text(target, "second")
    assert target.read_text() == "second"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]


def test_failed_folder_build_keeps_the_old_folder(tmp_path: Path) -> None:
    target = tmp_path / "result"
    write_folder(target, lambda d: (d / "x.json").write_text("old"))

    def broken(d: Path) -> None:
        (d / "x.json").write_text("half")
        raise RuntimeError("killed")

    with pytest.raises(RuntimeError):
        write_folder(target, broken)
    assert (target / "x.json").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result"]


def test_points_round_trip_at_full_precision(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    pts, b, a = rng.normal(size=(3, 7, 3))
    out = tmp_path / "f.csv"
    write_field_table(out, pts, b, a)
    lines = out.read_text().splitlines()
    assert lines[0] == ",".join(FIELD_COLUMNS)
    table = np.loadtxt(out, delimiter=",", skiprows=1)
    np.testing.assert_array_equal(table, np.hstack([pts, b, a]))
    np.testing.assert_array_equal(read_points(out), pts)


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("", "empty"),
        ("a,b,c\n1,2,3\n", "lacks column(s) x, y, z"),
        ("x,y,z\n1,2\n", "line 2: expected a number in column z"),
        ("x,y,z\n1,nan,3\n", "not finite"),
        ("x,y,z\n", "no points"),
    ],
)
def test_bad_points_files_name_file_and_problem(tmp_path: Path, text: str, fragment: str) -> None:
    path = tmp_path / "p.csv"
    path.write_text(text)
    with pytest.raises(CaseError) as info:
        read_points(path)
    assert fragment in str(info.value) and "p.csv" in str(info.value)


def test_missing_points_file(tmp_path: Path) -> None:
    with pytest.raises(CaseError, match="cannot read points file"):
        read_points(tmp_path / "none.csv")


def test_unwritable_target_is_an_export_error(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(ExportError):
        write_text(blocker / "sub" / "x.txt", "x")
