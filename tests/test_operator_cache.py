"""The lattice operators' cache folder: written whole, read back equal, rebuilt when unreadable."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fieldenergy import operator_cache
from fieldenergy.kernels._lattice import m2l_operators


@pytest.fixture()
def folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setenv("FIELDENERGY_CACHE", str(tmp_path / "cache"))
    monkeypatch.setattr(operator_cache, "_MEMORY", {})
    return tmp_path / "cache"


def test_operators_are_written_once_and_read_back_equal(folder: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    built = operator_cache.lattice_operators(4, 1e-6)
    files = list(folder.iterdir())
    assert len(files) == 1 and files[0].suffix == ".npz"  # no temporary file left behind
    np.testing.assert_array_equal(built[1], m2l_operators(4, 1e-6)[1])  # seeded: the same operators
    monkeypatch.setattr(operator_cache, "_MEMORY", {})
    monkeypatch.setattr(operator_cache, "m2l_operators", _never)
    read = operator_cache.lattice_operators(4, 1e-6)
    np.testing.assert_array_equal(read[0], built[0])
    np.testing.assert_array_equal(read[1], built[1])


def test_an_unreadable_file_is_rebuilt(folder: Path) -> None:
    operator_cache.lattice_operators(4, 1e-6)
    path = next(folder.iterdir())
    path.write_bytes(b"not an archive")
    operator_cache._MEMORY.clear()
    u, table = operator_cache.lattice_operators(4, 1e-6)
    assert u.shape[0] == 125 and table.shape[1:] == (u.shape[1], u.shape[1])
    assert np.load(path)["u"].shape == u.shape  # and written again


def test_an_unwritable_folder_only_costs_a_rebuild(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")
    monkeypatch.setenv("FIELDENERGY_CACHE", str(blocker / "cache"))  # a folder inside a file
    monkeypatch.setattr(operator_cache, "_MEMORY", {})
    u, _ = operator_cache.lattice_operators(4, 1e-6)
    assert u.shape[0] == 125


def _never(order: int, tol: float) -> None:
    raise AssertionError("the operators were built again instead of read")
