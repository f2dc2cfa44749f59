"""The fast A.J route (treecode plus exact near pairs) against the direct double sum."""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from fieldenergy.caseio import read_case
from fieldenergy.discretise import discretise
from fieldenergy.energy.fast_inductance import fast_grouped_inductance, progress_steps
from fieldenergy.energy.from_potential import grouped_inductance
from fieldenergy.errors import GeometryError
from fieldenergy.model import Case, CirclePath, Circuit, Coil, RectSection, RoundSection
from fieldenergy.model.filaments import Filaments
from fieldenergy.model.options import SolveOptions
from fieldenergy.output.result_json import result_to_dict
from fieldenergy.run import solve
from tests.analytic import round_wire_loop_self_inductance

#: Fast against direct, relative to the largest diagonal entry: the treecode's calibrated error
#: (1e-8 to 1e-7 measured) with margin.
FAST_RTOL = 1.0e-6


def helix_pair(turns: int, per_turn: int) -> Filaments:
    """Invented: two coaxial close-wound helices (radii 50 and 60 mm, wire 0.6 mm, pitch 1.5 mm),
    one chain and one circuit each."""
    wire = 0.6e-3
    t = np.linspace(0.0, 2 * np.pi * turns, per_turn * turns + 1)
    h = np.column_stack([0.05 * np.cos(t), 0.05 * np.sin(t), 2.5 * wire * t / (2 * np.pi)])
    s, e = h[:-1], h[1:]
    ids = np.repeat([0, 1], len(s))
    return Filaments.from_segments(
        np.vstack([s, s * [1.2, 1.2, 1.0] + [0, 0, 0.01]]), np.vstack([e, e * [1.2, 1.2, 1.0] + [0, 0, 0.01]]),
        radii=wire, filament=ids, circuit=ids,
    )


def relative(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.abs(a - b).max() / np.abs(np.diag(b)).max())


@pytest.mark.parametrize("turns, per_turn", [(20, 100), (4, 500)], ids=["chords-6x-gmd", "chords-1.3x-gmd"])
def test_fast_sum_matches_the_direct_sum_on_close_wound_helices(turns: int, per_turn: int) -> None:
    """4000 segments, turns 2.5 radii apart: near pairs, softened stretches (with chords short
    against the GMD every Gauss order of the softening rule is used), tree proxies."""
    fil = helix_pair(turns, per_turn)
    direct = grouped_inductance(fil, fil.circuit, 2)
    fast = fast_grouped_inductance(fil, fil.circuit, 2)
    assert relative(fast.matrix, direct) <= FAST_RTOL
    assert fast.asymmetry <= FAST_RTOL
    assert np.array_equal(fast.matrix, fast.matrix.T)
    assert fast.settings["order"] == 6


def test_segment_order_does_not_matter() -> None:
    """Segments scrambled across chains and groups: the chains are rebuilt, the sum is the same."""
    fil = helix_pair(6, 60)
    perm = np.random.default_rng(5).permutation(fil.n_segments)
    scrambled = Filaments.from_segments(
        fil.starts[perm], fil.ends[perm], radii=fil.radii[perm], filament=fil.filament[perm], circuit=fil.circuit[perm]
    )
    # A scrambled chain has no connected pieces: compare with the direct sum of the same input.
    direct = grouped_inductance(scrambled, scrambled.circuit, 2)
    fast = fast_grouped_inductance(scrambled, scrambled.circuit, 2)
    assert relative(fast.matrix, direct) <= FAST_RTOL
    ordered = fast_grouped_inductance(fil, fil.circuit, 2).matrix
    assert relative(ordered, grouped_inductance(fil, fil.circuit, 2)) <= FAST_RTOL


@pytest.mark.parametrize("n", [7, 8, 64])
def test_closed_chains_count_every_softened_pair_once(n: int) -> None:
    """A loop whose softened reach (500 GMD) exceeds its length: every pair of the chain is
    walked, in both directions round the loop, and must be counted exactly once (odd and even
    segment counts); the result then equals the direct sum to the treecode's error."""
    t = 2 * np.pi * np.arange(n) / n
    ring = np.column_stack([0.05 * np.cos(t), 0.05 * np.sin(t), np.zeros(n)])
    loop = Filaments.from_segments(ring, np.roll(ring, -1, axis=0), radii=2e-3)
    direct = grouped_inductance(loop, np.zeros(n, dtype=np.int64), 1)
    fast = fast_grouped_inductance(loop, np.zeros(n, dtype=np.int64), 1)
    assert abs(fast.matrix[0, 0] / direct[0, 0] - 1.0) <= 1e-9


def test_fast_loop_against_the_round_wire_formula() -> None:
    """Circular loop of round wire, 512 chords: mu0 R (ln(8R/a) - 7/4) (Maxwell; Rosa & Grover
    1912, from memory), up to the chords' error (about (pi/512)^2 ln) and O((a/R)^2)."""
    n, radius, wire = 512, 0.1, 0.5e-3
    t = 2 * np.pi * np.arange(n) / n
    ring = np.column_stack([radius * np.cos(t), radius * np.sin(t), np.zeros(n)])
    loop = Filaments.from_segments(ring, np.roll(ring, -1, axis=0), radii=wire)
    fast = fast_grouped_inductance(loop, np.zeros(n, dtype=np.int64), 1).matrix[0, 0]
    assert fast == pytest.approx(round_wire_loop_self_inductance(radius, wire), rel=1e-4)


def test_solve_with_the_fast_sum_gives_the_direct_result_and_records_it() -> None:
    loops = (
        Coil("a", "c", RoundSection(0.002), CirclePath(0.1, [0, 0, 0], [0, 0, 1])),
        Coil("b", "c", RectSection(0.01, 0.006), CirclePath(0.08, [0, 0, 0.05], [0, 0, 1]), turns=30),
    )
    case = Case("a loop and a winding pack", (Circuit("c", 2.0),), loops)
    base = SolveOptions.from_preset("fast")
    direct = solve(case, replace(base, field_route=False, aj_method="direct"))
    fast = solve(case, replace(base, field_route=False, aj_method="fast"))
    assert abs(fast.inductance[0, 0] / direct.inductance[0, 0] - 1.0) <= FAST_RTOL
    assert np.abs(fast.coil_inductance - direct.coil_inductance).max() <= FAST_RTOL * fast.coil_inductance.max()
    doc = json.loads(json.dumps(result_to_dict(fast)))
    assert doc["settings"]["aj_method"] == "fast"
    assert doc["error_estimate"]["discretisation"] >= 1e-6


def test_unknown_aj_method_is_refused() -> None:
    with pytest.raises(ValueError, match="aj_method must be one of auto, direct, fast"):
        SolveOptions(aj_method="quick")


def test_fast_sum_refuses_what_the_direct_sum_refuses() -> None:
    wire = Filaments.from_segments([[0, 0, 0]], [[1, 0, 0]], radii=0.0)
    with pytest.raises(GeometryError, match="gmd must be > 0"):
        fast_grouped_inductance(wire, np.zeros(1, dtype=np.int64), 1)


def test_fast_sum_matches_the_direct_sum_on_a_bundled_coil_set() -> None:
    """The bundled toroidal set at its coarsest level: nine coils (one source tree each),
    rectangular packs, a helix; 4373 segments. Coarser treecode settings erred by 1.2e-5 here."""
    model = discretise(read_case(Path(__file__).resolve().parents[1] / "cases" / "toroidal-set"))
    fil = model.filaments
    n = len(model.coil_names)
    direct = grouped_inductance(fil, fil.coil, n)
    fast = fast_grouped_inductance(fil, fil.coil, n).matrix
    scale = np.sqrt(np.outer(np.diag(direct), np.diag(direct)))
    assert np.abs((fast - direct) / scale).max() <= FAST_RTOL


def test_progress_counts_every_step_and_the_blocks_change_nothing() -> None:
    fil = helix_pair(6, 60)
    seen: list[int] = []
    with_progress = fast_grouped_inductance(fil, fil.circuit, 2, progress=seen.append).matrix
    assert seen == list(range(1, progress_steps(fil.n_segments, 2) + 1))
    assert relative(with_progress, grouped_inductance(fil, fil.circuit, 2)) <= FAST_RTOL
