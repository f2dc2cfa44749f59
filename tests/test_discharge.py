"""Discharge of coupled circuits: closed forms, the matrix exponential, energy balance, passive circuits."""

from __future__ import annotations

import json
import math
from pathlib import Path

import meshio
import numpy as np
import pytest
import scipy.linalg

from fieldenergy.caseio import read_case, write_case
from fieldenergy.cli import main
from fieldenergy.discharge import DischargeError, discharge, discharge_or_note
from fieldenergy.errors import CaseError
from fieldenergy.mechanics import mechanics
from fieldenergy.model import Circuit
from fieldenergy.output.mechanics_out import (
    DISCHARGE_CSV,
    DISCHARGE_PNG,
    FORCES_VTK,
    discharge_csv,
    write_mechanics_files,
)

#: Closed forms and eigen-decomposition agree to round-off (a few ulps times the condition).
EXACT_RTOL = 1.0e-10

#: The energy balance of the contract: deposited energies sum to the stored energy.
ENERGY_RTOL = 1.0e-9


def _coupled() -> tuple[tuple[Circuit, ...], np.ndarray]:
    """A driven circuit with a dump resistor, coupled (k = 0.6) to a passive shorted ring."""
    circuits = (
        Circuit("drive", 120.0, resistance=0.05, dump_resistance=1.5),
        Circuit("ring", 0.0, resistance=2e-3, passive=True),
    )
    l1, l2 = 0.8, 2e-3
    m = 0.6 * math.sqrt(l1 * l2)
    return circuits, np.array([[l1, m], [m, l2]])


def test_single_circuit_is_an_rl_decay() -> None:
    """I = I0 exp(-t R/L): tau = L/R, E = L I0^2/2, V_peak = R I0, t_1% = tau ln 100 (common practice)."""
    d = discharge((Circuit("c", 40.0, resistance=0.5, dump_resistance=2.0),), np.array([[0.3]]))
    tau = 0.3 / 2.5
    assert d.time_constants[0] == pytest.approx(tau, rel=EXACT_RTOL)
    assert d.energy_deposited[0] == pytest.approx(0.5 * 0.3 * 40.0**2, rel=EXACT_RTOL)
    assert d.peak_voltage[0] == pytest.approx(2.5 * 40.0, rel=EXACT_RTOL)
    assert d.time_to_1pct[0] == pytest.approx(tau * math.log(100.0), rel=1e-9)
    assert d.currents([tau])[0, 0] == pytest.approx(40.0 / math.e, rel=EXACT_RTOL)
    assert d.dump_fraction[0] == pytest.approx(0.8)


def test_coupled_currents_match_the_matrix_exponential() -> None:
    """I(t) = expm(-L^-1 R t) I(0) (linear ODE; common practice), an independent route."""
    circuits, l_matrix = _coupled()
    d = discharge(circuits, l_matrix)
    a = -np.linalg.solve(l_matrix, np.diag(d.resistance))
    i0 = np.array([120.0, 0.0])
    for t in (1e-4, 3e-3, 0.05, 0.4):
        expected = scipy.linalg.expm(a * t) @ i0
        assert np.allclose(d.currents([t])[0], expected, rtol=1e-9, atol=1e-9 * 120.0)


def test_passive_peak_current_and_energy_balance() -> None:
    """The passive ring's peak induced current matches a dense expm sampling (1e-6 for the
    sampling), and the deposited energies sum to 1/2 I^T L I (energy balance)."""
    circuits, l_matrix = _coupled()
    d = discharge(circuits, l_matrix)
    a = -np.linalg.solve(l_matrix, np.diag(d.resistance))
    t = np.linspace(0.5, 1.5, 201) * d.peak_time[1]
    ring = np.array([(scipy.linalg.expm(a * ti) @ [120.0, 0.0])[1] for ti in t])
    assert d.peak_current[1] == pytest.approx(np.max(np.abs(ring)), rel=1e-5)
    assert d.peak_current[1] >= np.max(np.abs(ring)) * (1 - 1e-12)
    assert d.energy_deposited.sum() == pytest.approx(d.initial_energy, rel=ENERGY_RTOL)
    assert d.initial_energy == pytest.approx(0.5 * 0.8 * 120.0**2, rel=EXACT_RTOL)
    assert d.passive.tolist() == [False, True]


def test_energy_balance_of_many_coupled_circuits() -> None:
    """Sum of R_k int I_k^2 dt = 1/2 I0^T L I0 for a random SPD L and four circuits (energy balance)."""
    rng = np.random.default_rng(0)
    x = rng.normal(size=(4, 4))
    l_matrix = 1e-3 * (x @ x.T + 0.5 * np.eye(4))
    circuits = tuple(
        Circuit(f"c{k}", float(i), resistance=float(r), dump_resistance=float(dr) if dr else None)
        for k, (i, r, dr) in enumerate(zip(rng.normal(size=4) * 50, rng.uniform(0.01, 1.0, 4), [0.5, 0, 2.0, 0]))
    )
    d = discharge(circuits, l_matrix)
    assert d.energy_deposited.sum() == pytest.approx(d.initial_energy, rel=ENERGY_RTOL)
    assert np.all(d.energy_deposited > 0)
    assert np.all(np.diff(d.time_constants) <= 0)


def test_zero_resistance_cannot_discharge() -> None:
    """A circuit with no resistance keeps its current: an error on request, otherwise a note."""
    circuits = (Circuit("c", 10.0),)
    with pytest.raises(DischargeError, match="'c' have zero total resistance"):
        discharge(circuits, np.array([[1e-3]]))
    result, note = discharge_or_note(circuits, np.array([[1e-3]]))
    assert result is None and "zero total resistance" in note


@pytest.mark.parametrize(
    ("matrix", "text"),
    [([[1e-3, 0.0]], "2 x 2 inductance matrix"), ([[1e-3, 2e-3], [2e-3, 1e-3]], "not positive definite")],
)
def test_bad_inductance_matrix_is_an_error(matrix: list[list[float]], text: str) -> None:
    """A matrix of the wrong shape, or not positive definite, cannot be discharged."""
    circuits = (Circuit("a", 1.0, resistance=1.0), Circuit("b", 1.0, resistance=1.0))
    with pytest.raises(DischargeError, match=text):
        discharge(circuits, np.array(matrix))


def test_unenergised_circuit_that_is_not_passive_is_left_open() -> None:
    """A circuit at 0 A that is not passive is open during the discharge: it takes no part."""
    circuits, l_matrix = _coupled()
    circuits = (circuits[0], Circuit("spare", 0.0))
    d = discharge(circuits, l_matrix)
    assert d.circuits == ("drive",)
    assert d.time_constants[0] == pytest.approx(0.8 / 1.55, rel=EXACT_RTOL)


CASE_TEXT = """\
title = "Drive coil and a shorted ring"

[[circuit]]
name = "drive"
current = "20 A"
resistance = "0.2 ohm"
dump_resistance = "3 ohm"

[[circuit]]
name = "ring"
passive = true
resistance = "1 mOhm"
{extra}
[[coil]]
name = "drive"
circuit = "drive"
turns = 50
section = {{ shape = "rect", width = "10 mm", height = "10 mm" }}
path = {{ kind = "circle", radius = "100 mm", center = [0, 0, 0], normal = [0, 0, 1] }}

[[coil]]
name = "ring"
circuit = "ring"
section = {{ shape = "round", radius = "3 mm" }}
path = {{ kind = "circle", radius = "90 mm", center = [0, 0, "40 mm"], normal = [0, 0, 1] }}
"""


def _write(folder: Path, extra: str = "", round_drive: bool = False) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    text = CASE_TEXT.format(extra=extra)
    if round_drive:  # no section grid to check: a quicker solve
        text = text.replace(
            '{ shape = "rect", width = "10 mm", height = "10 mm" }', '{ shape = "round", radius = "5 mm" }'
        )
    (folder / "case.toml").write_text(text, encoding="utf-8")
    return folder


def test_passive_circuit_is_read_and_written_back(tmp_path: Path) -> None:
    """The passive flag and its zero current survive a read -> write -> read round trip."""
    case = read_case(_write(tmp_path / "a"))
    ring = case.circuits[1]
    assert ring.passive and ring.current == 0.0 and ring.resistance == pytest.approx(1e-3)
    again = read_case(write_case(case, tmp_path / "b"))
    assert again.circuits == case.circuits


@pytest.mark.parametrize(
    ("extra", "key", "text"),
    [
        ('current = "2 A"', "key 'current'", "a passive circuit carries no supply current"),
        ('dump_resistance = "1 ohm"\npassive = "yes"', "key 'passive'", "expected true or false"),
    ],
)
def test_passive_circuit_errors(tmp_path: Path, extra: str, key: str, text: str) -> None:
    """A passive circuit with a current, or a non-boolean flag, is a CaseError naming file, circuit and key."""
    text_case = CASE_TEXT.format(extra="").replace("passive = true\n", "passive = true\n" + extra + "\n", 1)
    if "yes" in extra:
        text_case = text_case.replace("passive = true\n", "", 1)
    (tmp_path / "case.toml").write_text(text_case, encoding="utf-8")
    with pytest.raises(CaseError) as err:
        read_case(tmp_path)
    message = str(err.value)
    assert "case.toml" in message and "circuit 'ring'" in message and key in message and text in message


def test_passive_circuit_without_resistance_is_an_error(tmp_path: Path) -> None:
    """A passive circuit must dissipate: zero resistance is a CaseError at its 'resistance'."""
    (tmp_path / "case.toml").write_text(
        CASE_TEXT.format(extra="").replace('resistance = "1 mOhm"\n', ""), encoding="utf-8"
    )
    with pytest.raises(CaseError, match=r"circuit 'ring', key 'resistance'.*needs a resistance > 0"):
        read_case(tmp_path)


def test_mechanics_of_a_case_with_a_passive_ring(tmp_path: Path) -> None:
    """From a solved matrix: the ring is driven by the coupling alone, and the files are written."""
    case = read_case(_write(tmp_path / "case"))
    l_matrix = np.array([[2.0e-3, 3.0e-6], [3.0e-6, 3.1e-7]])
    mech = mechanics(case, l_matrix)
    d = mech.discharge
    assert d is not None and d.peak_current[1] > 0 and d.initial_current[1] == 0.0
    assert d.energy_deposited.sum() == pytest.approx(d.initial_energy, rel=ENERGY_RTOL)
    assert np.allclose(mech.forces.force, 0.0)  # the ring carries no current before the discharge
    write_mechanics_files(tmp_path / "out", mech)
    for name in (FORCES_VTK, DISCHARGE_CSV, DISCHARGE_PNG):
        assert (tmp_path / "out" / name).stat().st_size > 0
    mesh = meshio.read(tmp_path / "out" / FORCES_VTK)
    written = mesh.cell_data["winding_force_per_length_N_per_m"][0]
    assert np.allclose(written, mech.distribution.winding_per_length, rtol=1e-12, atol=0.0)  # binary float64
    rows = discharge_csv(d).splitlines()
    assert rows[0] == "t_s,I_drive_A,I_ring_A"
    assert np.allclose([float(v) for v in rows[1].split(",")], [0.0, 20.0, 0.0], rtol=0, atol=1e-12 * 20.0)


def test_solve_command_writes_forces_and_discharge(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """`fieldenergy solve` reports coils and discharge, writes them to the JSON, and skips them on request."""
    folder = _write(tmp_path / "case", round_drive=True).as_posix()
    assert main(["solve", folder, "--preset", "fast", "--no-field-route", "--out", str(tmp_path / "r")]) == 0
    out = capsys.readouterr().out
    assert "peak |B| on conductor" in out and "Discharge from" in out
    doc = json.loads((tmp_path / "r" / "result.json").read_text())
    assert [c["name"] for c in doc["coils"]] == ["drive", "ring"]
    assert {"force_N", "torque_Nm", "peak_field_T"} <= set(doc["coils"][0])
    assert {"time_constants_s", "peak_voltage_V", "energy_deposited_J"} <= set(doc["discharge"])
    assert doc["discharge"]["circuits"] == ["drive", "ring"]
    total = sum(doc["discharge"]["energy_deposited_J"])
    assert total == pytest.approx(doc["discharge"]["initial_energy_J"], rel=ENERGY_RTOL)
    assert doc["discharge"]["initial_energy_J"] == pytest.approx(doc["energy"]["total_J"], rel=ENERGY_RTOL)
    assert (
        main(
            [
                "solve",
                folder,
                "--preset",
                "fast",
                "--no-field-route",
                "--no-mechanics",
                "--json",
                str(tmp_path / "plain.json"),
                "--no-out",
            ]
        )
        == 0
    )
    assert "coils" not in json.loads((tmp_path / "plain.json").read_text())


def test_solve_command_with_discharge_required_fails_without_resistance(tmp_path: Path) -> None:
    """`--discharge` turns "cannot discharge" into a user error: exit status 2."""
    folder = tmp_path / "case"
    folder.mkdir()
    (folder / "case.toml").write_text(
        'title = "No resistance"\n[[circuit]]\nname = "c"\ncurrent = 5\n[[coil]]\nname = "loop"\ncircuit = "c"\n'
        'section = { shape = "round", radius = "1 mm" }\npath = { kind = "circle", radius = 0.1 }\n',
        encoding="utf-8",
    )
    args = ["solve", str(folder), "--preset", "fast", "--levels", "1", "--no-field-route", "--no-out"]
    assert main(args) == 0
    assert main([*args, "--discharge"]) == 2
