"""Parameter sweeps: expansion of [[sweep]] tables, their errors, and a swept batch against Maxwell."""

from __future__ import annotations

import copy
import doctest
import json
import math
import tomllib
import warnings
from dataclasses import replace
from pathlib import Path

import pytest
from scipy.special import ellipe, ellipk

from fieldenergy.batch import run_batch
from fieldenergy.batch.plan import plan_case
from fieldenergy.caseio import read_case, read_case_document
from fieldenergy.constants import MU0
from fieldenergy.errors import CaseError, FieldEnergyWarning
from fieldenergy.model.options import SolveOptions
from fieldenergy.sweep import _address, declaration, expand, read_sweeps, variants

#: Two coaxial round-wire loops in two circuits; the upper one's height is swept.
PAIR_CASE = """
title = "Coaxial pair"
[[circuit]]
name = "drive"
current = "2 A"
[[circuit]]
name = "pick"
current = "0.25 A"
[[coil]]
name = "lower"
circuit = "drive"
section = { shape = "round", radius = "0.9 mm" }
path = { kind = "circle", radius = 0.11, center = [0, 0, 0], normal = [0, 0, 1] }
[[coil]]
name = "upper"
circuit = "pick"
section = { shape = "round", radius = "0.6 mm" }
path = { kind = "circle", radius = 0.065, center = [0, 0, 0.03], normal = [0, 0, 1] }
"""

GAP_SWEEP = """
[[sweep]]
name = "gap"
key = "coil.upper.path.center.2"
{spec}
"""

#: The gaps of the swept batch, as written, and in metres.
GAPS = ("15 mm", "3.5 cm", "70 mm", "0.12 m")
GAPS_M = (0.015, 0.035, 0.07, 0.12)
GAP_VALUES = GAP_SWEEP.format(spec="values = [" + ", ".join(f'"{g}"' for g in GAPS) + "]")

#: The fast preset's accuracy on round-wire loops (two coarse levels, Richardson).
FAST_RTOL = 1e-3


def maxwell_mutual(r1: float, r2: float, z: float) -> float:
    """Coaxial circles: M = mu0 sqrt(R1 R2) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4 R1 R2 / ((R1+R2)^2 + z^2).

    Maxwell 1873 (Treatise, vol. 2, art. 701); scipy's ellipk/ellipe take m = k^2.
    """
    m = 4.0 * r1 * r2 / ((r1 + r2) ** 2 + z**2)
    k = math.sqrt(m)
    return MU0 * math.sqrt(r1 * r2) * ((2.0 / k - k) * ellipk(m) - (2.0 / k) * ellipe(m))


def document(extra: str = "") -> dict:
    return tomllib.loads(PAIR_CASE + extra)


def test_two_sweeps_expand_to_their_outer_product_in_order() -> None:
    doc = document(GAP_SWEEP.format(spec='values = ["20 mm", "40 mm"]') + """
[[sweep]]
name = "amps"
key = "circuit.pick.current"
start = 1
stop = 3
count = 3
""")
    before = copy.deepcopy(doc)
    variants = expand(doc, "pair/case.toml")
    assert doc == before  # the document is left as it was
    assert [v.label for v in variants] == [f"gap={g}, amps={a}" for g in ("20 mm", "40 mm") for a in (1, 2, 3)]
    assert [v.slug for v in variants][:2] == ["gap=20mm_amps=1", "gap=20mm_amps=2"]
    last = variants[-1].document
    assert last["coil"][1]["path"]["center"] == [0, 0, "40 mm"]
    assert last["circuit"][1]["current"] == 3
    assert "sweep" not in last and last["title"] == "Coaxial pair [gap=40 mm, amps=3]"
    assert [v.values[0].si for v in variants[::3]] == [0.02, 0.04]


def test_range_with_units_is_evenly_spaced_in_the_start_unit() -> None:
    doc = document(GAP_SWEEP.format(spec='start = "1 cm"\nstop = "4 cm"\ncount = 4'))
    (sweep,) = read_sweeps(doc, "case.toml")
    assert [v.raw for v in sweep.values] == ["1 cm", "2 cm", "3 cm", "4 cm"]
    assert sweep.values[-1].si == pytest.approx(0.04, rel=1e-15)  # unit conversion only
    assert sweep.axis_label == "gap (m)"


BAD_SWEEPS = [
    ('name = "gap"\nkey = "coil.middle.path.radius"\nvalues = [0.1]', "sweep 'gap', key 'key'", "named 'middle'"),
    ('name = "gap"\nkey = "coil.upper.path.center.5"\nvalues = [0.1]', "sweep 'gap', key 'key'", "expected an index"),
    ('name = "gap"\nkey = "coil.upper.path"\nvalues = [0.1]', "sweep 'gap', key 'key'", "addresses a table"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nvalues = [0.1]\ncount = 2', "sweep 'gap'", "either 'values'"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nstart = 0.1\nstop = 0.2', "sweep 'gap', key 'count'", "missing"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nvalues = ["1 cm", 0.2]', "sweep 'gap', key 'values'", "mix units"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nvalues = ["1 cm", "10 mm"]', "sweep 'gap', key 'values'", "twice"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nvalues = ["1 parsec/s"]', "key 'values[0]'", "quantity"),
    ('name = "gap"\nkey = "coil.upper.path.radius"\nvalue = [0.1]', "sweep #1, key 'value'", "unknown key"),
    ('name = "2 gap"\nkey = "coil.upper.path.radius"\nvalues = [0.1]', "sweep #1, key 'name'", "letters"),
]


@pytest.mark.parametrize(("table", "where", "what"), BAD_SWEEPS)
def test_bad_sweep_names_the_file_and_the_key(table: str, where: str, what: str) -> None:
    with pytest.raises(CaseError) as caught:
        expand(document("\n[[sweep]]\n" + table + "\n"), "pair/case.toml")
    text = str(caught.value)
    assert text.startswith("pair/case.toml, ") and where in text and what in text


def test_batch_plan_records_a_bad_sweep_as_that_case_failure(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(PAIR_CASE + GAP_SWEEP.format(spec="values = []"))
    (entry,) = plan_case(tmp_path, tmp_path, SolveOptions.from_preset("fast")).entries
    assert entry.case is None
    assert entry.error is not None and "case.toml, sweep 'gap', key 'values'" in entry.error


def test_read_case_accepts_sweeps_and_warns_that_it_solves_the_base_values(tmp_path: Path) -> None:
    (tmp_path / "case.toml").write_text(PAIR_CASE + GAP_VALUES)
    with pytest.warns(FieldEnergyWarning, match="fieldenergy batch"):
        case = read_case(tmp_path)
    assert case.coils[1].path.center[2] == 0.03  # the base value, as written
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a variant document carries no sweep, so reads silently
        variant = read_case_document(expand(document(GAP_VALUES), "x")[0].document, tmp_path / "case.toml", tmp_path)
    assert variant.coils[1].path.center[2] == pytest.approx(0.015, rel=1e-15)  # "15 mm"


def test_swept_batch_follows_maxwell_and_writes_variants_and_plot(tmp_path: Path) -> None:
    case = tmp_path / "pair"
    case.mkdir()
    (case / "case.toml").write_text(PAIR_CASE + GAP_VALUES)
    fast = replace(SolveOptions.from_preset("fast"), field_route=False)  # the A.J route is checked here
    summary = run_batch(tmp_path, fast, jobs=2)
    rows = summary.rows
    assert [r.case for r in rows] == [f"pair[gap={g}]" for g in GAPS]
    assert all(r.status == "ok" for r in rows)
    mutuals = []
    for row, gap, raw in zip(rows, GAPS_M, GAPS):
        saved = json.loads((tmp_path / row.result_folder / "result.json").read_text())
        m = saved["inductance"]["matrix_H"][0][1]
        assert m == pytest.approx(maxwell_mutual(0.11, 0.065, gap), rel=FAST_RTOL)  # Maxwell 1873, coaxial circles
        assert saved["provenance"]["sweep"] == {"gap": raw}
        mutuals.append(m)
    assert mutuals == sorted(mutuals, reverse=True)  # coupling falls as the loops part
    plot = case / "result" / "sweep.png"
    assert summary.plots == (plot,) and plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize("module", [declaration, variants, _address], ids=lambda m: m.__name__)
def test_docstring_examples_run(module: object) -> None:
    assert doctest.testmod(module).failed == 0  # type: ignore[arg-type]
