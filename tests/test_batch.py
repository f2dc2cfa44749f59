"""Batch runs: discovery, results against closed forms, resumption, kills, time limits, Dask."""

from __future__ import annotations

import contextlib
import doctest
import io
import json
import math
import os
import shutil
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest

from fieldenergy.batch import BatchError, ClusterAddress, _work, discovery, find_cases, input_sha256, plan, run_batch
from fieldenergy.batch.plan import plan_case
from fieldenergy.cli import main
from fieldenergy.constants import MU0
from fieldenergy.model.options import SolveOptions

LOOP_CASE = """
title = "Bench loop {radius}"
[[circuit]]
name = "c"
current = "3 A"
[[coil]]
name = "loop"
circuit = "c"
section = {{ shape = "round", radius = "{wire_mm} mm" }}
path = {{ kind = "circle", radius = {radius}, center = [0.01, 0, 0], normal = [0, 0, 1] }}
"""

#: A 60-turn helix: about five seconds on one core with the default preset, so time limits bite.
SLOW_CASE = """
title = "Slow helix"
[[circuit]]
name = "h"
current = "1 A"
[[coil]]
name = "helix"
circuit = "h"
section = { shape = "round", radius = "1 mm" }
path = { kind = "helix", radius = 0.05, pitch = "3 mm", turns = 60 }
"""

#: The fast preset's accuracy on a single loop (two coarse levels, Richardson).
FAST_RTOL = 1e-3

#: Two runs of the same solve differ only by the order of floating-point sums across threads.
SAME_RTOL = 1e-12

#: W = I^2 L / 2 from the stored matrix: a few float products, so only rounding.
ROUNDING_RTOL = 1e-14

#: The fast preset without the field-route cross-check: these tests check the batch and the
#: A.J route; the field route's cost and accuracy belong to its own tests.
FAST = replace(SolveOptions.from_preset("fast"), field_route=False)

#: Loops of the test tree: folder -> (loop radius m, wire radius mm).
LOOPS = {"coils/wide": (0.21, 1.5), "coils/narrow": (0.075, 0.8)}


def loop_inductance(radius: float, wire: float) -> float:
    """Thin round-wire loop, L = mu0 R (ln(8R/a) - 7/4) (Rosa & Grover 1912)."""
    return MU0 * radius * (math.log(8.0 * radius / wire) - 1.75)


def write_case(folder: Path, text: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "case.toml").write_text(text)
    return folder


def make_tree(root: Path) -> Path:
    for name, (radius, wire_mm) in LOOPS.items():
        write_case(root / name, LOOP_CASE.format(radius=radius, wire_mm=wire_mm))
    write_case(root / "broken", LOOP_CASE.format(radius=0.1, wire_mm=1).replace('"3 A"', '"3 V"'))
    return root


@pytest.fixture(scope="module")
def solved(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, int, str]:
    """A tree of two good loops and one broken case, after one CLI batch run."""
    root = make_tree(tmp_path_factory.mktemp("tree"))
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        status = main(["batch", str(root), "--preset", "fast", "--no-field-route", "--jobs", "2"])
    return root, status, out.getvalue()


def summary_rows(folder: Path) -> dict[str, dict]:
    return {row["case"]: row for row in json.loads((folder / "summary.json").read_text())["cases"]}


def test_good_cases_match_the_loop_formula_and_the_broken_one_is_reported(solved: tuple[Path, int, str]) -> None:
    root, status, printed = solved
    assert status == 1  # one case failed
    rows = summary_rows(root)
    assert set(rows) == {"broken", *LOOPS}
    for name, (radius, wire_mm) in LOOPS.items():
        saved = json.loads((root / name / "result" / "result.json").read_text())
        l_ref = loop_inductance(radius, wire_mm * 1e-3)  # Rosa & Grover 1912, thin round-wire loop
        assert saved["inductance"]["matrix_H"][0][0] == pytest.approx(l_ref, rel=FAST_RTOL)
        assert rows[name]["status"] == "ok"
        assert rows[name]["energy_J"] == pytest.approx(0.5 * 9.0 * saved["inductance"]["matrix_H"][0][0], rel=ROUNDING_RTOL)
        assert rows[name]["route_gap"] is None  # the field route was switched off
        assert saved["provenance"]["input_sha256"] == input_sha256(root / name)
        assert saved["provenance"]["settings"]["preset"] == "fast"
        assert saved["provenance"]["settings"]["field_route"] is False
    assert rows["broken"]["status"] == "failed"
    assert "current" in rows["broken"]["message"] and "'3 V'" in rows["broken"]["message"]
    assert not (root / "broken" / "result").exists()
    assert "Failed (1):" in printed and "broken [failed]" in printed
    assert (root / "summary.csv").read_text().splitlines()[0].startswith("case,circuits,energy_J")


def test_second_run_skips_unchanged_cases_and_reruns_a_changed_one(
    solved: tuple[Path, int, str], tmp_path: Path
) -> None:
    root = shutil.copytree(solved[0], tmp_path / "tree")
    again = run_batch(root, FAST, jobs=1)
    status = {r.case: r.status for r in again.rows}
    assert status == {"broken": "failed", "coils/narrow": "skipped", "coils/wide": "skipped"}
    write_case(root / "coils/narrow", LOOP_CASE.format(radius=0.09, wire_mm=0.8))
    third = run_batch(root, FAST, jobs=1)
    status = {r.case: r.status for r in third.rows}
    assert status == {"broken": "failed", "coils/narrow": "ok", "coils/wide": "skipped"}
    saved = json.loads((root / "coils/narrow/result/result.json").read_text())
    l_ref = loop_inductance(0.09, 0.8e-3)  # Rosa & Grover 1912, thin round-wire loop
    assert saved["inductance"]["matrix_H"][0][0] == pytest.approx(l_ref, rel=FAST_RTOL)


def test_changed_settings_or_force_mean_a_rerun(solved: tuple[Path, int, str]) -> None:
    root = solved[0]
    folder = root / "coils/wide"
    assert plan_case(root, folder, FAST).entries[0].stored is not None
    assert plan_case(root, folder, replace(FAST, n_levels=3)).entries[0].stored is None
    assert plan_case(root, folder, replace(FAST, field_route=True)).entries[0].stored is None
    assert plan_case(root, folder, FAST, force=True).entries[0].stored is None


def test_killed_batch_leaves_no_partial_result(tmp_path: Path) -> None:
    root = tmp_path / "tree"
    write_case(root / "a-loop", LOOP_CASE.format(radius=0.12, wire_mm=1))
    write_case(root / "b-slow", SLOW_CASE)
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    command = [sys.executable, "-m", "fieldenergy", "batch", str(root), "--jobs", "1", "--no-field-route"]
    proc = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    first = root / "a-loop" / "result" / "result.json"
    deadline = time.monotonic() + 60.0
    while not first.exists() and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    assert first.exists(), "the batch wrote no result within a minute"
    time.sleep(0.3)  # the slow case is running now
    proc.terminate()
    assert proc.wait(timeout=30) != 0
    json.loads(first.read_text())  # the finished result is whole
    assert not (root / "b-slow" / "result").exists()
    leftovers = [p for p in root.rglob("*") if p.name.startswith(".")]
    assert leftovers == []


def test_time_limit_stops_a_runaway_case_and_the_batch_goes_on(tmp_path: Path) -> None:
    write_case(tmp_path / "a-loop", LOOP_CASE.format(radius=0.12, wire_mm=1))
    write_case(tmp_path / "b-slow", SLOW_CASE)
    default = replace(SolveOptions.from_preset("default"), field_route=False)
    summary = run_batch(tmp_path, default, jobs=2, timeout=0.5)
    rows = {r.case: r for r in summary.rows}
    assert rows["b-slow"].status == "timeout" and "0.5 s" in rows["b-slow"].message
    assert rows["b-slow"].run_time_s == 0.5  # the limit, not the case's own run time
    assert rows["a-loop"].status == "ok"
    assert [r.case for r in summary.failures] == ["b-slow"]
    assert not (tmp_path / "b-slow" / "result").exists()


def test_dask_cluster_gives_the_local_numbers(solved: tuple[Path, int, str], tmp_path: Path) -> None:
    distributed = pytest.importorskip("distributed")
    root = shutil.copytree(solved[0], tmp_path / "tree")
    local = {case: row for case, row in summary_rows(solved[0]).items() if row["status"] == "ok"}
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, host="127.0.0.1",
                                  protocol="tcp://", dashboard_address=None) as cluster:
        summary = run_batch(root, FAST, force=True, cluster=ClusterAddress(cluster.scheduler_address))
    remote = {r.case: r for r in summary.rows}
    assert remote["broken"].status == "failed"
    for case, row in local.items():
        assert remote[case].status == "ok"
        assert remote[case].energy_J == pytest.approx(row["energy_J"], rel=SAME_RTOL)
        saved = json.loads((root / case / "result" / "result.json").read_text())
        assert saved["inductance"]["matrix_H"][0][0] == pytest.approx(row["inductance_H"][0][0], rel=SAME_RTOL)


def test_missing_folder_or_folder_without_cases_is_a_user_error(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["batch", str(tmp_path / "nowhere")]) == 2
    assert "no such folder" in capsys.readouterr().err
    with pytest.raises(BatchError, match="no case folders"):
        run_batch(tmp_path)


def test_discovery_skips_result_and_hidden_folders_and_the_hash_follows_inputs(tmp_path: Path) -> None:
    for name in ("x", "x/result/nested", "y/deeper", ".hidden"):
        write_case(tmp_path / name, "")
    assert [p.relative_to(tmp_path).as_posix() for p in find_cases(tmp_path)] == ["x", "y/deeper"]
    case = tmp_path / "x"
    (case / "points").mkdir()
    (case / "points" / "corners.csv").write_text("0,0,0\n1,0,0\n0,1,0\n")
    before = input_sha256(case)
    (case / "result" / "result.json").write_text("{}")
    (case / ".result-tmp").mkdir()
    assert input_sha256(case) == before  # outputs and temporaries are not inputs
    (case / "points" / "corners.csv").write_text("0,0,0\n2,0,0\n0,1,0\n")
    assert input_sha256(case) != before  # a referenced points file is an input


@pytest.mark.parametrize("module", [discovery, plan, _work], ids=lambda m: m.__name__)
def test_docstring_examples_run(module: object) -> None:
    assert doctest.testmod(module).failed == 0  # type: ignore[arg-type]


DECLARED_CASE = """
title = "Loop with a dump resistor and a field line"
[[circuit]]
name = "c"
current = "40 A"
resistance = "0.2 ohm"
[[coil]]
name = "loop"
circuit = "c"
section = { shape = "round", radius = "1 mm" }
path = { kind = "circle", radius = 0.1, center = [0, 0, 0], normal = [0, 0, 1] }
[[map]]
name = "axis"
kind = "line"
start = [0, 0, -0.1]
end = [0, 0, 0.1]
count = 5
quantities = ["B"]
"""


def test_batch_runs_the_discharge_and_maps_a_case_declares(tmp_path: Path) -> None:
    """Discharge of one RL circuit: tau = L/R, and all stored energy ends in R (circuit theory,
    common practice); the map's centre value is mu0 I / (2 R) (Biot-Savart; from memory)."""
    write_case(tmp_path / "declared", DECLARED_CASE)
    summary = run_batch(tmp_path, FAST, jobs=1)
    assert [row.status for row in summary.rows] == ["ok"]
    data = json.loads((tmp_path / "declared" / "result" / "result.json").read_text())
    inductance = data["inductance"]["matrix_H"][0][0]
    assert data["discharge"]["time_constants_s"][0] == pytest.approx(inductance / 0.2, rel=1e-9)
    assert sum(data["discharge"]["energy_deposited_J"]) == pytest.approx(data["energy"]["total_J"], rel=1e-9)
    assert data["coils"][0]["name"] == "loop"
    table = (tmp_path / "declared" / "result" / "maps" / "axis.csv").read_text().splitlines()
    assert len(table) == 6
    centre = dict(zip(table[0].split(","), map(float, table[3].split(","))))
    bz = next(v for k, v in centre.items() if k.lower().startswith("bz"))
    assert bz == pytest.approx(MU0 * 40 / (2 * 0.1), rel=1e-6)


def test_batch_options_carry_the_field_budget() -> None:
    import argparse

    from fieldenergy.cli import _batch

    parser = argparse.ArgumentParser()
    _batch.add_args(parser)
    options = _batch._options(parser.parse_args(["cases", "--preset", "fast", "--field-budget", "2e11"]))
    assert options.field_budget == 2e11 and options.field_route
    assert _batch._options(parser.parse_args(["cases"])).field_budget == SolveOptions().field_budget
    with pytest.raises(SystemExit):
        parser.parse_args(["cases", "--field-budget", "-1"])
