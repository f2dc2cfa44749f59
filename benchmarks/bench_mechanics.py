"""Time of the forces, force distribution and peak conductor field for every bundled case.

Each case is discretised at the finest level of the default preset (what ``fieldenergy
solve`` evaluates them on); the goal is at most 10 s per case on 2 cores. Run::

    python benchmarks/bench_mechanics.py [CASES_DIR]

The first run includes the kernels' compilation (cached afterwards); each case is timed on
its second evaluation.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

from fieldenergy.caseio import read_case
from fieldenergy.fields import segment_field
from fieldenergy.forces import coil_forces
from fieldenergy.mechanics import instance_references
from fieldenergy.model.options import SolveOptions
from fieldenergy.peak_field import peak_field
from fieldenergy.run import single_level
from fieldenergy.winding_forces import force_distribution

#: Time allowed per case (s), the goal on 2 cores.
GOAL_S: float = 10.0


def _timed(fn, *args):  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - start


def pair_rate() -> float:
    """Kernel throughput of this machine now (field-point x segment pairs per second): the
    ratio that tells whether the timings were taken on a busy machine."""
    rng = np.random.default_rng(0)
    starts = rng.random((4000, 3))
    ends = starts + 0.01 * rng.random((4000, 3))
    points = rng.random((20000, 3)) + 2.0
    segment_field(points[:10], starts, ends, 1.0, want_a=False)
    _, seconds = _timed(lambda: segment_field(points, starts, ends, 1.0, want_a=False))
    return 4000 * 20000 / seconds


def main(cases_dir: str = "cases") -> int:
    print(f"kernel pair rate now: {pair_rate() / 1e6:.0f} Mpairs/s")
    folders = sorted(p for p in Path(cases_dir).iterdir() if (p / "case.toml").exists())
    header = f"{'case':<20}{'segments':>10}{'forces s':>10}{'distrib s':>11}{'peak B s':>10}{'total s':>9}  {'max |F| N':>11}{'max B T':>10}"
    print(header)
    print("-" * len(header))
    worst = 0.0
    for folder in folders:
        case = read_case(folder)
        model = single_level(case, SolveOptions())
        refs = instance_references(case)
        coil_forces(model, case.currents)  # warm-up: compilation and caches
        forces, t_f = _timed(coil_forces, model, case.currents)
        _, t_d = _timed(force_distribution, model, case.currents)
        peak, t_p = _timed(peak_field, model, case.currents, refs)
        total = t_f + t_d + t_p
        worst = max(worst, total)
        f_max = float(np.max(np.linalg.norm(forces.force, axis=1)))
        print(
            f"{folder.name:<20}{model.filaments.n_segments:>10}{t_f:>10.2f}{t_d:>11.2f}{t_p:>10.2f}{total:>9.2f}"
            f"  {f_max:>11.4g}{float(np.max(peak.value)):>10.4g}"
        )
    print(f"\nslowest case: {worst:.2f} s (goal <= {GOAL_S:.0f} s per case)")
    return 0


if __name__ == "__main__":
    sys.exit(main(*sys.argv[1:2]))
