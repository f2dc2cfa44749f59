"""Property tests: whatever a case file holds, read_case returns a Case or raises CaseError, quickly.

Inputs are random bytes, random TOML documents built from the case format's keys, mutations
of the good fixtures, random expressions, random quantity strings and random points files.
Every run is deterministic (derandomised) and each read is bounded in time.
"""

from __future__ import annotations

import contextlib
import shutil
import signal
import time
import tomllib
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import tomli_w
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fieldenergy.caseio import read_case
from fieldenergy.caseio._units import LENGTH, parse_quantity
from fieldenergy.errors import CaseError, FieldEnergyWarning
from fieldenergy.model import Case

DATA = Path(__file__).parent / "data" / "caseio"
KINDS = ["circle", "polygon", "file", "racetrack", "saddle", "helix", "curve"]

#: A read of a small case takes milliseconds; a second means something went badly wrong.
READ_TIME_LIMIT = 1.0
#: Wall-clock guard that turns a hang into a test failure instead of a stuck run.
HANG_LIMIT = 10.0

FUZZ = settings(
    derandomize=True,
    max_examples=200,
    deadline=None,  # timing is asserted per read below, so the first (registry-loading) call may be slow
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)


class ReadHungError(Exception):
    """read_case ran longer than HANG_LIMIT."""


@contextlib.contextmanager
def hang_guard(seconds: float) -> Iterator[None]:
    def alarm(signum: int, frame: object) -> None:
        raise ReadHungError(f"read_case ran longer than {seconds} s")

    if not hasattr(signal, "setitimer"):  # no interval timers on this platform: run unguarded
        yield
        return
    previous = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, previous)


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    parse_quantity("1 mm", LENGTH)  # load the unit registry once, outside the timed reads
    path = tmp_path_factory.mktemp("fuzz")
    shutil.copy(DATA / "file" / "winding.csv", path / "winding.csv")
    return path


def read_outcome(folder: Path) -> str:
    """Read ``folder``; return "case" or "error". Anything but CaseError, or a slow read, fails."""
    start = time.perf_counter()
    with hang_guard(HANG_LIMIT), warnings.catch_warnings():
        warnings.simplefilter("error")  # no stray numeric or parser warnings either
        warnings.simplefilter("ignore", FieldEnergyWarning)
        try:
            case = read_case(folder)
        except CaseError as exc:
            assert exc.path is not None and exc.path.startswith(str(folder)), str(exc)
            outcome = "error"
        else:
            assert isinstance(case, Case) and len(case.coils) >= 1 and len(case.circuits) >= 1
            outcome = "case"
    elapsed = time.perf_counter() - start
    assert elapsed < READ_TIME_LIMIT, f"read took {elapsed:.3f} s"
    return outcome


def write_doc(folder: Path, doc: dict[str, Any]) -> None:
    (folder / "case.toml").write_text(tomli_w.dumps(doc), encoding="utf-8")


UNIT_TOKENS = (
    "1 -2.5 1e3 0 .5 1e999 nan inf mm m kA A deg rad ohm mOhm Ohm s degC in µm furlong ** ^ 2 / * - ( ) % "
    "e _ 9**9**9 Ω °"
).split() + [" "]
UNIT_NAMES = ("mm m cm km kA A mA deg rad turn ohm mOhm milliohm s degC in").split()
NUMBERS = st.one_of(
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=1e-3, max_value=1e3),
)
QUANTITY_TEXT = st.one_of(
    st.builds(lambda x, u: f"{x!r} {u}", NUMBERS, st.sampled_from(UNIT_NAMES)),
    st.lists(st.sampled_from(UNIT_TOKENS), min_size=1, max_size=8).map("".join),
)
SCALARS = st.one_of(st.booleans(), NUMBERS, st.text(max_size=12), QUANTITY_TEXT, st.dates())
KEYS = st.sampled_from(
    (
        "title name circuit coil current resistance dump_resistance turns section path shape radius width "
        "height kind center normal points file unit x y z t transform translate rotate mirror axis angle "
        "origin repeat count step sagitta section_grid reverse frame_reference straight direction opening "
        "pitch start length"
    ).split()
) | st.text(max_size=6)
VALUES = st.recursive(
    SCALARS,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(KEYS, inner, max_size=4),
    max_leaves=12,
)
#: Values shaped like the format's own (quantities, 3-vectors, point lists), to get past the first checks.
LIKELY = st.one_of(
    NUMBERS,
    QUANTITY_TEXT,
    st.lists(st.one_of(NUMBERS, QUANTITY_TEXT), min_size=3, max_size=3),
    st.lists(st.lists(st.floats(-1.0, 1.0), min_size=3, max_size=3), min_size=2, max_size=5),
    VALUES,
)
GOOD_LENGTH = st.one_of(st.floats(1e-3, 10.0), st.floats(1.0, 1e3).map(lambda x: f"{x} mm"))
GOOD_VECTOR = st.lists(st.floats(-1.0, 1.0), min_size=3, max_size=3)
#: Per key, a value of the right form (often enough to pass) or anything at all.
PATH_VALUES = {
    "unit": st.sampled_from(UNIT_NAMES),
    "radius": GOOD_LENGTH,
    "straight": GOOD_LENGTH,
    "length": GOOD_LENGTH,
    "pitch": GOOD_LENGTH,
    "center": GOOD_VECTOR,
    "normal": GOOD_VECTOR,
    "axis": GOOD_VECTOR,
    "direction": GOOD_VECTOR,
    "start": GOOD_VECTOR,
    "points": st.lists(GOOD_VECTOR, min_size=3, max_size=6),
    "file": st.sampled_from(["winding.csv", "absent.csv", "..", ""]),
    "turns": st.floats(0.5, 20.0),
    "opening": st.floats(0.1, 6.0),
    "x": st.sampled_from(["cos(t)", "sin(2*t)", "0.1"]),
    "y": st.sampled_from(["sin(t)", "cos(3*t)", "t"]),
    "z": st.sampled_from(["0", "sin(t)**2", "t*(t-2*pi)"]),
    "t": st.sampled_from([[0.0, 6.283185307179586], [0.0, 1.0], [1.0, 0.0]]),
}
PATHS = st.fixed_dictionaries(
    {"kind": st.sampled_from(["circle", "polygon", "file", "racetrack", "saddle", "helix", "curve", "spiral"])},
    optional={key: st.one_of(good, good, LIKELY) for key, good in PATH_VALUES.items()},
)
SECTIONS = st.fixed_dictionaries(
    {"shape": st.sampled_from(["round", "rect", "hex"])},
    optional={key: st.one_of(GOOD_LENGTH, LIKELY) for key in ("radius", "width", "height")},
)
GOOD_CURRENT = st.one_of(st.floats(-1e3, 1e3), st.sampled_from(["3 A", "2.5 kA", "-40 mA"]))
CIRCUITS = st.fixed_dictionaries(
    {"name": st.sampled_from(["a", "b"]), "current": st.one_of(GOOD_CURRENT, LIKELY)},
    optional={"resistance": st.one_of(st.just("2 mOhm"), LIKELY), "dump_resistance": st.one_of(st.just(0.5), LIKELY)},
)
COIL_VALUES = {
    "turns": st.floats(0.5, 100.0),
    "reverse": st.booleans(),
    "frame_reference": GOOD_VECTOR,
    "transform": st.lists(
        st.one_of(
            st.builds(lambda v: {"translate": v}, GOOD_VECTOR),
            st.builds(lambda v, a: {"rotate": {"axis": v, "angle": a}}, GOOD_VECTOR, st.floats(-7.0, 7.0)),
            st.builds(lambda v, o: {"mirror": {"normal": v, "origin": o}}, GOOD_VECTOR, GOOD_VECTOR),
        ),
        max_size=3,
    ),
    "repeat": st.one_of(
        st.builds(lambda n, v: {"count": n, "axis": v}, st.integers(0, 6), GOOD_VECTOR),
        st.builds(lambda n, v: {"count": n, "step": v}, st.integers(0, 6), GOOD_VECTOR),
    ),
}
COILS = st.fixed_dictionaries(
    {
        "name": st.text(min_size=1, max_size=4),
        "circuit": st.sampled_from(["a", "b", "c"]),
        "section": SECTIONS,
        "path": PATHS,
    },
    optional={key: st.one_of(good, good, LIKELY) for key, good in COIL_VALUES.items()},
)
DOCUMENTS = st.fixed_dictionaries(
    {
        "title": st.just("fuzz case"),
        "circuit": st.lists(CIRCUITS, min_size=1, max_size=2),
        "coil": st.lists(COILS, min_size=1, max_size=2),
    },
    optional={
        "discretisation": st.dictionaries(
            st.sampled_from(["sagitta", "sagitta_fraction", "max_angle", "section_grid"]), LIKELY, max_size=3
        )
    },
)


@FUZZ
@given(st.binary(max_size=300))
def test_random_bytes(folder: Path, content: bytes) -> None:
    (folder / "case.toml").write_bytes(content)
    assert read_outcome(folder) == "error"


@settings(FUZZ, max_examples=100)  # each document is large to generate
@given(DOCUMENTS)
def test_random_toml_documents(folder: Path, doc: dict[str, Any]) -> None:
    write_doc(folder, doc)
    assert read_outcome(folder) in {"case", "error"}


def locations(node: Any) -> list[tuple[Any, Any]]:
    """Every (container, key-or-index) inside a parsed TOML document."""
    found = []
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for key, value in items:
        found.append((node, key))
        if isinstance(value, (dict, list)):
            found.extend(locations(value))
    return found


def load_fixture(kind: str) -> dict[str, Any]:
    return tomllib.loads((DATA / kind / "case.toml").read_text(encoding="utf-8"))


@FUZZ
@given(st.sampled_from(KINDS), st.data())
def test_mutated_good_cases(folder: Path, kind: str, data: st.DataObject) -> None:
    doc = load_fixture(kind)
    for _ in range(data.draw(st.integers(1, 3), label="n_mutations")):
        places = locations(doc)
        container, key = data.draw(st.sampled_from(places), label="place")
        action = data.draw(st.sampled_from(["drop", "replace", "add"]), label="action")
        if action == "drop":
            del container[key]
        elif action == "replace":
            container[key] = data.draw(VALUES, label="value")
        elif isinstance(container, dict):
            container[data.draw(KEYS, label="new key")] = data.draw(VALUES, label="new value")
        else:
            container.append(data.draw(VALUES, label="new item"))
    write_doc(folder, doc)
    assert read_outcome(folder) in {"case", "error"}


EXPRESSION_TOKENS = (
    "t pi e 1 2.5 1e308 9999999999999999999999999999999999999999 + - * / ** ( ) , sin( cos( atan2( sqrt( "
    "log( abs( exp( x [ ] ' lambda : . __import__( 0"
).split() + [" "]
ATOMS = st.sampled_from(["t", "pi", "e", "1", "0.05", "2.5", "1e308", "-3", "x", "True", "t[0]", "'a'"])
GRAMMATICAL = st.recursive(
    ATOMS,
    lambda inner: st.one_of(
        st.builds(lambda a, op, b: f"({a}{op}{b})", inner, st.sampled_from(["+", "-", "*", "/", "**", "%"]), inner),
        st.builds(lambda f, a: f"{f}({a})", st.sampled_from(["sin", "cos", "sqrt", "log", "exp", "tan", "sum"]), inner),
        st.builds(lambda a, b: f"atan2({a}, {b})", inner, inner),
    ),
    max_leaves=8,
)
EXPRESSIONS = st.one_of(GRAMMATICAL, st.lists(st.sampled_from(EXPRESSION_TOKENS), max_size=30).map("".join))


@FUZZ
@given(EXPRESSIONS, EXPRESSIONS, st.one_of(st.none(), st.lists(st.floats(allow_nan=True), min_size=2, max_size=2)))
def test_random_curve_expressions(folder: Path, x: str, y: str, t: list[float] | None) -> None:
    doc = load_fixture("curve")
    path = doc["coil"][0]["path"]
    path.update(x=f"cos(t)*{x}", y=y)  # x keeps a factor that closes when the rest is constant
    if t is not None:
        path["t"] = t
    write_doc(folder, doc)
    assert read_outcome(folder) in {"case", "error"}


QUANTITY_PLACES = ["current", "resistance", "radius", "angle", "unit"]


@FUZZ
@given(st.sampled_from(QUANTITY_PLACES), QUANTITY_TEXT)
def test_random_quantity_strings(folder: Path, place: str, text: str) -> None:
    doc = load_fixture("circle")
    coil = doc["coil"][0]
    if place in ("current", "resistance"):
        doc["circuit"][0][place] = text
    elif place == "angle":
        coil["transform"][1]["rotate"]["angle"] = text
    else:
        coil["path"][place] = text
    write_doc(folder, doc)
    assert read_outcome(folder) in {"case", "error"}


GOOD_ROW = st.tuples(*[st.floats(-1e3, 1e3)] * 3).map(lambda p: ",".join(map(repr, p)))
ODD_ROW = st.one_of(
    st.lists(
        st.one_of(
            st.floats(allow_nan=True, allow_infinity=True).map(repr),
            st.text(alphabet="0123456789.-+e xyzn", max_size=6),
        ),
        min_size=2,
        max_size=4,
    ).map(",".join),
    st.sampled_from(["", "x,y,z", "1e308,0,0", "1,2", "1,,2"]),
)
#: Mostly good rows with at most one odd row put in somewhere.
CSV_TEXT = st.builds(
    lambda rows, odd, k: "\n".join(rows[:k] + odd + rows[k:]),
    st.lists(GOOD_ROW, min_size=2, max_size=8),
    st.lists(ODD_ROW, max_size=1),
    st.integers(0, 8),
)


@FUZZ
@given(
    st.one_of(CSV_TEXT, st.text(alphabet="0123456789.,-+e xyzn\n\r\tX", max_size=200)),
    st.sampled_from(["mm", "km", "m"]),
)
def test_random_points_files(folder: Path, content: str, unit: str) -> None:
    doc = load_fixture("file")
    doc["coil"][0]["path"]["unit"] = unit
    write_doc(folder, doc)
    (folder / "winding.csv").write_text(content, encoding="utf-8")
    try:
        assert read_outcome(folder) in {"case", "error"}
    finally:
        shutil.copy(DATA / "file" / "winding.csv", folder / "winding.csv")
