"""Every user error in a case file is a CaseError naming the file, the coil or key, and what was expected.

The fixtures are made from one good case text (``TEMPLATE``) with one part changed each; the
changes, and what each error must say, are listed in ``data/caseio/errors.toml``.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from string import Template

import pytest

from fieldenergy.caseio import read_case
from fieldenergy.errors import CaseError

TEMPLATE = Template(
    """\
$title
$extra_top
$discretisation
[[circuit]]
name = "drive"
current = $current
$circuit

[[circuit]]
name = "trim"
current = 1

[[coil]]
name = "upper"
circuit = $coil_circuit
section = $section
path = $path
$coil

[[coil]]
name = $second_name
circuit = "trim"
section = { shape = "round", radius = "1 mm" }
path = { kind = "circle", radius = 0.2 }
"""
)

DEFAULTS = {
    "title": 'title = "Error fixture"',
    "extra_top": "",
    "discretisation": "",
    "current": '"12.5 A"',
    "circuit": "",
    "coil_circuit": '"drive"',
    "section": '{ shape = "rect", width = "18 mm", height = "12 mm" }',
    "path": '{ kind = "circle", radius = "0.31 m" }',
    "coil": "",
    "second_name": '"lower"',
}

DATA = Path(__file__).parent / "data" / "caseio"


def load_errors() -> dict[str, tuple[dict[str, str], str, str]]:
    """The error fixtures: id -> (changes to the template, where the error is, text the message must contain)."""
    entries = tomllib.loads((DATA / "errors.toml").read_text(encoding="utf-8"))["error"]
    return {
        e["id"]: ({k: v for k, v in e.items() if k not in ("id", "where", "hint")}, e["where"], e["hint"])
        for e in entries
    }


ERRORS = load_errors()


def write_case_text(folder: Path, **changes: str) -> Path:
    file = folder / "case.toml"
    file.write_text(TEMPLATE.substitute({**DEFAULTS, **changes}))
    return file


def test_template_is_a_good_case(tmp_path: Path) -> None:
    case = read_case(write_case_text(tmp_path))
    assert [c.name for c in case.coils] == ["upper", "lower"]
    assert case.coils[0].path.radius == 0.31


@pytest.mark.parametrize("changes, where, hint", list(ERRORS.values()), ids=list(ERRORS))
def test_error_names_file_place_and_expectation(tmp_path: Path, changes: dict[str, str], where: str, hint: str) -> None:
    file = write_case_text(tmp_path, **changes)
    with pytest.raises(CaseError) as info:
        read_case(tmp_path)
    error = info.value
    assert error.path == str(file)
    assert error.where == where
    assert str(error).startswith(f"{file}, {where}: ")
    assert hint in error.message


ONE_COIL = """\
title = "one coil"
[[circuit]]
name = "a"
current = 1
[[coil]]
name = "k"
circuit = "a"
section = { shape = "round", radius = 0.001 }
path = { kind = "circle", radius = 0.1 }
"""


@pytest.mark.parametrize(
    "text, where, hint",
    [
        (ONE_COIL.replace('name = "k"', 'nmae = "k"'), "coil #1, key 'nmae'", "unknown key; did you mean 'name'?"),
        (ONE_COIL.replace('name = "k"\n', ""), "coil #1, key 'name'", "missing required key: expected a string"),
        (ONE_COIL.split("[[coil]]")[0], "key 'coil'", "missing [[coil]] tables: a case needs at least one coil"),
        (
            'title = "x"\ncircuit = []\ncoil = []\n',
            "key 'circuit'",
            "expected at least one [[circuit]] table, got an empty list",
        ),
        (
            'title = "x"\n[circuit]\nname = "a"\n',
            "key 'circuit'",
            "expected a list of tables [ { ... }, ... ], got a table",
        ),
        ('title = "x"\ncircuit = [1]\n', "key 'circuit[0]'", "expected a table { ... }, got 1"),
        ('title = "x"\n', "key 'circuit'", "missing [[circuit]] tables: a case needs at least one circuit"),
    ],
)
def test_structure_errors(tmp_path: Path, text: str, where: str, hint: str) -> None:
    (tmp_path / "case.toml").write_text(text)
    with pytest.raises(CaseError) as info:
        read_case(tmp_path / "case.toml")
    assert info.value.path == str(tmp_path / "case.toml")
    assert info.value.where == where
    assert hint in info.value.message


def test_toml_syntax_error_gives_line_and_column(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text('title = "x"\n\n[[circuit]]\nname = "a\ncurrent = 1\n')
    with pytest.raises(CaseError, match=r"case\.toml: invalid TOML: .*\(at line 4, column 10\)"):
        read_case(tmp_path)


def test_non_utf8_case_file_gives_the_line(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_bytes(b'title = "x"\n# caf\xe9\n')
    with pytest.raises(CaseError, match=r"case\.toml: not UTF-8 text: byte 0xe9 at line 2"):
        read_case(tmp_path)


def test_missing_path(tmp_path: Path) -> None:
    with pytest.raises(CaseError, match=r"nowhere: no such case folder or file"):
        read_case(tmp_path / "nowhere")


def test_folder_without_case_file(tmp_path: Path) -> None:
    with pytest.raises(CaseError, match=r": no case\.toml in this folder"):
        read_case(tmp_path)


def test_file_that_is_not_toml(tmp_path: Path) -> None:
    (tmp_path / "case.txt").write_text(ONE_COIL)
    with pytest.raises(CaseError, match=r"case\.txt: expected a case folder or a \.toml file, got a \.txt file"):
        read_case(tmp_path / "case.txt")


def test_path_of_wrong_type() -> None:
    with pytest.raises(CaseError, match=r"expected the path of a case folder or \.toml file, got 42"):
        read_case(42)  # type: ignore[arg-type]


FILE_CASE = ONE_COIL.replace('{ kind = "circle", radius = 0.1 }', '{ kind = "file", file = "pts.csv" }')


@pytest.mark.parametrize(
    "content, where, hint",
    [
        (
            "x,y,z\n0,0,0\n1,0,0\n1,1\n",
            "coil 'k', points file, line 4",
            "expected three numbers x,y,z separated by commas (a first row 'x,y,z' is allowed), got '1,1'",
        ),
        ("0,0,0\n1,0,zero\n0,1,0\n", "coil 'k', points file, line 2", "got '1,0,zero'"),
        ("0,0,0\n1,0,nan\n0,1,0\n", "coil 'k', points file, line 2", "expected finite numbers, got '1,0,nan'"),
        ("0,0,0\n\n1,0,0\n", "coil 'k', points file", "expected at least 3 points, got 2"),
        (
            "0,0,0\n1,0,0\n\n1,0,0\n0,1,0\n",
            "coil 'k', points file",
            "line 2 and line 4 are the same point [1.0, 0.0, 0.0]; remove one",
        ),
        ("0,0,0\n1,1,1\n2,2,2\n", "coil 'k', points file", "all 3 points lie on one line"),
        ("x,y,z\nx,y,z\n", "coil 'k', points file, line 2", "got 'x,y,z'"),
    ],
)
def test_points_file_errors_name_the_file_and_line(tmp_path: Path, content: str, where: str, hint: str) -> None:
    (tmp_path / "case.toml").write_text(FILE_CASE)
    (tmp_path / "pts.csv").write_text(content)
    with pytest.raises(CaseError) as info:
        read_case(tmp_path)
    assert info.value.path == str(tmp_path / "pts.csv")
    assert info.value.where == where
    assert hint in info.value.message


def test_points_file_missing(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(FILE_CASE)
    with pytest.raises(CaseError) as info:
        read_case(tmp_path)
    assert str(info.value) == (
        f"{tmp_path / 'case.toml'}, coil 'k', key 'path.file': points file 'pts.csv' not found in the case folder "
        f"{str(tmp_path)!r}"
    )


def test_points_file_not_utf8(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(FILE_CASE)
    (tmp_path / "pts.csv").write_bytes(b"0,0,0\n1,0,0\n0,1,\xff\n")
    with pytest.raises(
        CaseError, match=r"pts\.csv, coil 'k', points file: the points file is not UTF-8 text \(byte 16\)"
    ):
        read_case(tmp_path)


def test_points_file_that_is_a_folder(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(FILE_CASE)
    (tmp_path / "pts.csv").mkdir()
    with pytest.raises(CaseError, match=r"key 'path\.file': points file 'pts\.csv' not found"):
        read_case(tmp_path)


def test_points_file_too_large_for_its_unit(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(FILE_CASE.replace('file = "pts.csv"', 'file = "pts.csv", unit = "km"'))
    (tmp_path / "pts.csv").write_text("1e308,0,0\n0,1,0\n1,0,0\n")
    with pytest.raises(CaseError) as info:
        read_case(tmp_path)
    assert info.value.path == str(tmp_path / "pts.csv") and info.value.where == "coil 'k', points file"
    assert info.value.message == "coordinates in 'km' out of range: too large to hold in metres"
