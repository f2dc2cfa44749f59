"""``[[map]]`` tables survive a read -> write -> read round trip, points files included."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fieldenergy.caseio import read_case, write_case

CASE = """
title = "Pair with maps"
[[circuit]]
name = "c"
current = "2 A"
[[coil]]
name = "loop"
circuit = "c"
section = { shape = "round", radius = "1 mm" }
path = { kind = "circle", radius = "100 mm" }
[[map]]
name = "volume"
kind = "box"
lower = ["-20 mm", "-20 mm", "-10 mm"]
upper = ["20 mm", "20 mm", "10 mm"]
resolution = [5, 5, 3]
quantities = ["|B|", "u"]
[[map]]
name = "midplane"
kind = "plane"
center = [0, 0, 0]
u = [1, 0, 0]
v = [0, 1, 0]
size = ["60 mm", "40 mm"]
resolution = [7, 5]
quantities = ["B", "homogeneity"]
reference = [0, 0, "1 mm"]
[[map]]
name = "axis"
kind = "line"
start = [0, 0, -0.05]
end = [0, 0, 0.05]
count = 11
[[map]]
name = "probe set"
kind = "points"
file = "probes.csv"
quantities = ["B", "A"]
"""


def test_maps_round_trip(tmp_path: Path) -> None:
    src = tmp_path / "src"
    src.mkdir()
    (src / "case.toml").write_text(CASE)
    (src / "probes.csv").write_text("x,y,z\n0.01,0,0\n0,0.02,0.003\n")
    first = read_case(src)
    out = tmp_path / "out"
    write_case(first, out)
    second = read_case(out)
    assert len(second.maps) == len(first.maps) == 4
    for a, b in zip(first.maps, second.maps):
        assert type(a) is type(b) and a.name == b.name and a.quantities == b.quantities
        for field in ("lower", "upper", "center", "u", "v", "start", "end", "points", "reference"):
            va, vb = getattr(a, field, None), getattr(b, field, None)
            assert (va is None) == (vb is None), f"{a.name}: {field}"
            if va is not None:
                np.testing.assert_array_equal(va, vb)
        for field in ("resolution", "size", "count"):
            assert getattr(a, field, None) == getattr(b, field, None), f"{a.name}: {field}"
    assert (out / "probe_set-points.csv").exists()
