"""Field maps at scale: fast summation (lattice FMM, and fmm3dpy if installed) against direct.

Run from the repository root::

    python benchmarks/bench_maps.py [--targets 1000000] [--loops 100] [--chords 1000] [--engine tree]

For the largest goal (1e7 targets from 1e6 elements)::

    python benchmarks/bench_maps.py --skip-crossover --targets 10000000 --loops 1000

The conductors are a stack of ``--loops`` circular loops (radius 0.1 m, round 0.5 mm wire,
invented), each cut into about ``--chords`` curved elements, so the model has loops x chords
elements. Prints:

1. the crossover: direct, fast (the default fast sum, the lattice FMM) and (if installed)
   fmm3dpy times for growing square problems (targets = elements) and the first size where
   the fast sum wins;
2. the large map: ``--targets`` random points in a box around the stack (some next to the
   wires), evaluated by the ``--engine`` as ``fieldenergy map`` does (with its error estimate);
   its time, the peak resident memory, and the largest relative error against direct
   summation on a random sample of targets, split into those farther than 5 mm from every
   wire and those closer in.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from fieldenergy.discretise import discretise
from fieldenergy.fastfield import fast_field, has_fmm
from fieldenergy.maps.evaluate import evaluate_map
from fieldenergy.maps.exact_path import exact_elements, exact_field
from fieldenergy.model import (
    Case,
    CirclePath,
    Circuit,
    Coil,
    Discretisation,
    RoundSection,
)
from fieldenergy.model.maps import PointsMap

RADIUS = 0.1
PITCH = 0.004
WIRE = 0.5e-3
SAMPLE = 2000
NEAR = 5e-3


def stack_case(n_loops: int, n_chords: int) -> Case:
    coils = tuple(Coil(f"l{k}", "c", RoundSection(WIRE), CirclePath(RADIUS, [0, 0, k * PITCH], [0, 0, 1]))
                  for k in range(n_loops))
    sagitta = RADIUS * (1.0 - np.cos(np.pi / n_chords))
    return Case("stack", (Circuit("c", 10.0),), coils, Discretisation(sagitta=float(sagitta), max_angle=1.0))


def targets(n: int, n_loops: int, rng: np.random.Generator) -> np.ndarray:
    """Random points in a box around the stack; a tenth of them within 5 mm of a wire."""
    height = n_loops * PITCH
    pts = rng.uniform([-0.15, -0.15, -0.05], [0.15, 0.15, height + 0.05], (n, 3))
    k = n // 10
    angle, phase = rng.uniform(0, 2 * np.pi, (2, k))
    gap = rng.uniform(WIRE, NEAR, k)
    loop = rng.integers(0, n_loops, k)
    rho = RADIUS + gap * np.cos(phase)
    pts[:k] = np.column_stack([rho * np.cos(angle), rho * np.sin(angle), loop * PITCH + gap * np.sin(phase)])
    return pts


def wire_distance(pts: np.ndarray, n_loops: int) -> np.ndarray:
    rho = np.hypot(pts[:, 0], pts[:, 1])
    z = np.clip(np.round(pts[:, 2] / PITCH), 0, n_loops - 1) * PITCH
    return np.hypot(rho - RADIUS, pts[:, 2] - z)


def _zone(value: float | None) -> str:
    return "(no sampled point)" if value is None else f"{value:.1e}"


def timed(run, *args, **kwargs):  # type: ignore[no-untyped-def]
    t0 = time.perf_counter()
    out = run(*args, **kwargs)
    return time.perf_counter() - t0, out


def crossover(rng: np.random.Generator) -> None:
    fmm = has_fmm()
    print("size (targets = elements)   direct s   fast s   fast/direct" + ("   fmm s   fmm/direct" if fmm else ""))
    found = None
    for n_loops, n_chords in ((4, 250), (8, 500), (16, 1000), (32, 1000)):
        case = stack_case(n_loops, n_chords)
        el = exact_elements(case, discretise(case))
        pts = targets(len(el.nodes), n_loops, rng)
        t_direct, _ = timed(exact_field, pts, el)
        t_tree, _ = timed(fast_field, pts, el, engine="tree")
        line = f"{len(el.nodes):>24d} {t_direct:10.3f} {t_tree:8.3f} {t_tree / t_direct:12.3f}"
        if fmm:
            t_fmm, _ = timed(fast_field, pts, el, engine="fmm")
            line += f" {t_fmm:7.3f} {t_fmm / t_direct:11.3f}"
        print(line)
        if found is None and t_tree < t_direct:
            found = len(el.nodes)
    print(f"crossover: the fast sum beats direct from about {found} targets x {found} elements "
          f"({float(found) ** 2:.1e} pairs)" if found else "crossover: the fast sum did not beat direct in this range")


def large_map(n_targets: int, n_loops: int, n_chords: int, engine: str, rng: np.random.Generator) -> None:
    case = stack_case(n_loops, n_chords)
    model = discretise(case)
    t_el, el = timed(lambda: exact_elements(case, model))
    pts = targets(n_targets, n_loops, rng)
    method = {"tree": "fast", "fmm": "fmm"}[engine]
    # The map as `fieldenergy map` evaluates it: the field, its error estimate on a sample and,
    # where that estimate asks for it, a second treecode pass.
    t_fast, res = timed(lambda: evaluate_map(case, PointsMap("bench", pts, ("B",)), model=model, method=method))
    b = res.b
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    sample = rng.choice(n_targets, SAMPLE, replace=False)
    t_direct, (b_ref, _) = timed(lambda: exact_field(pts[sample], el))
    err = np.linalg.norm(b[sample] - b_ref, axis=1) / np.linalg.norm(b_ref, axis=1)
    far = wire_distance(pts[sample], n_loops) > NEAR
    how = "" if res.tree is None else f", {res.tree.describe()}"
    print(f"\n{n_targets} targets from {len(el.nodes)} elements ({engine}{how}): elements built in {t_el:.1f} s, "
          f"map with its error estimate in {t_fast:.1f} s, peak memory {peak:.2f} GiB; "
          f"the map's estimated relative error {_zone(res.relative_error_far)} farther than "
          f"{res.near_distance * 1e3:.1f} mm from the wires, {_zone(res.relative_error_near)} closer in")
    print(f"direct on {SAMPLE} sampled targets: {t_direct:.1f} s, so the whole map directly would take about "
          f"{t_direct * n_targets / SAMPLE:.0f} s ({t_direct * n_targets / SAMPLE / t_fast:.0f} x the fast time)")
    print(f"largest relative error of B, fast vs direct: {err[far].max():.2e} farther than 5 mm from the wires "
          f"({far.sum()} targets), {err[~far].max():.2e} closer in ({(~far).sum()} targets)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--targets", type=int, default=1_000_000)
    parser.add_argument("--loops", type=int, default=100)
    parser.add_argument("--chords", type=int, default=1000)
    parser.add_argument("--skip-crossover", action="store_true")
    parser.add_argument("--engine", choices=("tree", "fmm"), default="tree")
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    warm = stack_case(1, 100)  # compile the kernels before timing anything
    fast_field(targets(100, 1, rng), exact_elements(warm, discretise(warm)))
    if has_fmm():
        fast_field(targets(100, 1, rng), exact_elements(warm, discretise(warm)), engine="fmm")
    if not args.skip_crossover:
        crossover(rng)
    large_map(args.targets, args.loops, args.chords, args.engine, rng)


if __name__ == "__main__":
    main()
