"""Assembly time of the circuit inductance matrix as the segment count grows.

Two coaxial multi-turn coils in two circuits, each a winding pack of two filament chains
(helices offset radially by 2 mm, wire radius 1 mm). For each size the script prints the wall
time of :func:`fieldenergy.energy.inductance_matrix`, the pair rate (n (n + 1) / 2 pairs per
second), the CPU time of all threads, and peak memory: Python-side allocations (tracemalloc)
and the process's peak resident set (getrusage, which also sees the kernel's buffers).

Then the fast A.J sum (:mod:`fieldenergy.energy.fast_inductance`: treecode plus exact near
pairs) on the same windings up to 2e5 segments: its wall time, the direct time where the
direct sum runs (up to 2e4 segments, or --direct-up-to), their ratio, the largest relative
difference of the matrices, and the process's peak resident set.

Run:  python benchmarks/bench_inductance.py   (about 1.5 min on 2 cores, first run +60 s compile)
"""

from __future__ import annotations

import resource
import sys
import time
import tracemalloc
from pathlib import Path

import argparse

import numba
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from fieldenergy.energy import inductance_matrix
from fieldenergy.energy.fast_inductance import fast_grouped_inductance
from fieldenergy.model.filaments import Filaments

SIZES = (1250, 2500, 5000, 10000, 20000)
FAST_SIZES = (5000, 20000, 50000, 200000)
TURNS = 10
RADIUS = 0.1
PITCH = 0.005
WIRE_RADIUS = 1e-3


def _helix(n_chords: int, radius: float, z0: float) -> tuple[np.ndarray, np.ndarray]:
    t = np.linspace(0.0, 2.0 * np.pi * TURNS, n_chords + 1)
    p = np.stack([radius * np.cos(t), radius * np.sin(t), z0 + PITCH * t / (2.0 * np.pi)], axis=1)
    return p[:-1], p[1:]


def winding(n_segments: int) -> Filaments:
    """Two coils x two filament chains, ``n_segments`` straight segments in all."""
    per_chain = n_segments // 4
    starts, ends, chain, circuit = [], [], [], []
    for coil, z0 in enumerate((0.0, 0.08)):
        for k, radius in enumerate((RADIUS, RADIUS + 2e-3)):
            s, e = _helix(per_chain, radius, z0)
            starts.append(s)
            ends.append(e)
            chain.append(np.full(per_chain, 2 * coil + k))
            circuit.append(np.full(per_chain, coil))
    return Filaments.from_segments(
        np.vstack(starts), np.vstack(ends), weights=0.5, radii=WIRE_RADIUS,
        filament=np.concatenate(chain), coil=np.concatenate(circuit), circuit=np.concatenate(circuit),
    )  # fmt: skip


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--direct-up-to", type=int, default=20000, help="largest size also summed directly")
    args = parser.parse_args()
    inductance_matrix(winding(40))  # compile (or load from the cache) before timing
    print(f"numba threads: {numba.get_num_threads()}")
    print(
        f"{'segments':>9} {'wall s':>8} {'cpu s':>8} {'Mpairs/s':>9} {'py peak MB':>11} {'rss peak MB':>12}  L11 (uH)"
    )
    for n in SIZES:
        model = winding(n)
        tracemalloc.start()
        cpu0, wall0 = time.process_time(), time.perf_counter()
        mat = inductance_matrix(model)
        wall, cpu = time.perf_counter() - wall0, time.process_time() - cpu0
        _, py_peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
        pairs = model.n_segments * (model.n_segments + 1) / 2
        print(
            f"{model.n_segments:>9} {wall:>8.3f} {cpu:>8.3f} {pairs / wall / 1e6:>9.1f} "
            f"{py_peak / 2**20:>11.2f} {rss:>12.1f}  {mat[0, 0] * 1e6:.6f}"
        )
    fast_table(args.direct_up_to)


def fast_table(direct_up_to: int) -> None:
    """Fast against direct A.J sums, growing sizes."""
    small = winding(400)
    fast_grouped_inductance(small, small.circuit, small.n_circuits)  # compile before timing
    print()
    print("fast A.J sum (treecode + exact near pairs) against the direct sum")
    print(f"{'segments':>9} {'fast s':>8} {'direct s':>9} {'direct/fast':>12} {'rel diff':>9} {'rss peak MB':>12}")
    for n in FAST_SIZES:
        model = winding(n)
        wall0 = time.perf_counter()
        fast = fast_grouped_inductance(model, model.circuit, model.n_circuits)
        t_fast = time.perf_counter() - wall0
        t_direct, diff = float("nan"), float("nan")
        if n <= direct_up_to:
            wall0 = time.perf_counter()
            direct = inductance_matrix(model)
            t_direct = time.perf_counter() - wall0
            diff = float(np.abs(fast.matrix - direct).max() / np.abs(np.diag(direct)).max())
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
        print(f"{model.n_segments:>9} {t_fast:>8.2f} {t_direct:>9.2f} {t_direct / t_fast:>12.2f} {diff:>9.1e} {rss:>12.1f}")


if __name__ == "__main__":
    main()
