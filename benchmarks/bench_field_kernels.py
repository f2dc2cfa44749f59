"""Throughput of the Biot-Savart kernels, in target-segment pairs per second.

Run from the repository root::

    python benchmarks/bench_field_kernels.py

Prints one table: the numba kernels (B alone, B and A, on all threads and on one), the
plain vectorised NumPy twin of the same formula (tests/reference.py), and their ratios.
The sources are a chain of joined segments (as discretised filaments are), for which the
kernels need one square root and one division per pair, and the same segments cut loose
(two square roots). It also times the square root and the division on their own: they
share one unit that is not pipelined like multiply-add, which bounds the B kernel, and
the bounds that follow are printed. The kernels are compiled before anything is timed;
each figure is the best of several runs.
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable
from pathlib import Path

import numba
import numpy as np
from numba import njit

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from fieldenergy.kernels._biot_savart import b_and_a_from_segments, b_from_segments
from tests.reference import b_numpy

N_POINTS = 32768
N_SEGMENTS = 2048
N_POINTS_NUMPY = 512
REPEATS = 5


def best_time(run: Callable[[], object], repeats: int = REPEATS) -> float:
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - t0)
    return best


@njit(error_model="numpy")
def _sqrt_sweep(x, out, reps):
    for r in range(reps):
        for i in range(x.shape[0]):
            out[i] += np.sqrt(x[i] + r)


@njit(error_model="numpy")
def _div_sweep(x, out, reps):
    for r in range(reps):
        for i in range(x.shape[0]):
            out[i] += 1.0 / (x[i] + r)


def unit_costs() -> tuple[float, float]:
    """Seconds per float64 square root and per division on one thread (vectorised loops)."""
    x, out = np.linspace(1.0, 2.0, 1024), np.zeros(1024)
    reps = 20000
    _sqrt_sweep(x, out, 1)
    _div_sweep(x, out, 1)
    t_sqrt = best_time(lambda: _sqrt_sweep(x, out, reps), 3) / (reps * len(x))
    t_div = best_time(lambda: _div_sweep(x, out, reps), 3) / (reps * len(x))
    return t_sqrt, t_div


def problem(rng: np.random.Generator) -> tuple[np.ndarray, ...]:
    """Points in a 1 m cube around a random polygonal coil with 5 mm cores (a few % inside)."""
    nodes = np.cumsum(rng.normal(scale=0.02, size=(N_SEGMENTS + 1, 3)), axis=0)
    nodes -= nodes.mean(axis=0)
    starts, ends = np.ascontiguousarray(nodes[:-1]), np.ascontiguousarray(nodes[1:])
    currents = rng.uniform(0.5, 2.0, N_SEGMENTS)
    radii = np.full(N_SEGMENTS, 0.005)
    points = rng.uniform(-0.5, 0.5, size=(N_POINTS, 3))
    return points, starts, ends, currents, radii


def main() -> None:
    rng = np.random.default_rng(0)
    points, starts, ends, currents, radii = problem(rng)
    b, b2, a2 = (np.empty((N_POINTS, 3)) for _ in range(3))
    small = points[:64]
    b_from_segments(small, starts, ends, currents, radii, b[:64])  # compile (or load the cache)
    b_and_a_from_segments(small, starts, ends, currents, radii, b2[:64], a2[:64])

    n_threads = numba.get_num_threads()
    pairs = N_POINTS * N_SEGMENTS
    rows = []
    t = best_time(lambda: b_from_segments(points, starts, ends, currents, radii, b))
    rows.append((f"numba B, chain, {n_threads} threads", pairs / t))
    t = best_time(lambda: b_and_a_from_segments(points, starts, ends, currents, radii, b2, a2))
    rows.append((f"numba B and A, chain, {n_threads} threads", pairs / t))
    loose = starts[::2], ends[::2], currents[::2], radii[::2]  # no segment joins the previous
    t = best_time(lambda: b_from_segments(points, *loose, b))
    rows.append((f"numba B, loose segments, {n_threads} threads", pairs / 2 / t))
    # Points along the conductor, half of them inside some core: every block takes the core pass.
    along = 0.5 * (starts + ends)[rng.integers(0, N_SEGMENTS, N_POINTS)]
    along = np.ascontiguousarray(along + rng.normal(scale=0.004, size=(N_POINTS, 3)))
    t = best_time(lambda: b_from_segments(along, starts, ends, currents, radii, b))
    rows.append((f"numba B, chain, points at cores, {n_threads} thr.", pairs / t))
    numba.set_num_threads(1)
    part = points[: N_POINTS // 4]
    t = best_time(lambda: b_from_segments(part, starts, ends, currents, radii, b[: len(part)]), 3)
    rows.append(("numba B, chain, 1 thread", len(part) * N_SEGMENTS / t))
    t = best_time(
        lambda: b_and_a_from_segments(part, starts, ends, currents, radii, b2[: len(part)], a2[: len(part)]),
        3,
    )
    rows.append(("numba B and A, chain, 1 thread", len(part) * N_SEGMENTS / t))
    numba.set_num_threads(n_threads)
    b_from_segments(points, starts, ends, currents, radii, b)
    sub = points[:N_POINTS_NUMPY]
    t = best_time(lambda: b_numpy(sub, starts, ends, currents, radii), 3)
    numpy_rate = N_POINTS_NUMPY * N_SEGMENTS / t
    rows.append(("NumPy B (vectorised, chunked)", numpy_rate))

    b_ref = b_numpy(sub, starts, ends, currents, radii)
    agree = np.max(np.abs(b[:N_POINTS_NUMPY] - b_ref)) / np.max(np.abs(b_ref))
    t_sqrt, t_div = unit_costs()
    bound_chain = n_threads / (t_sqrt + t_div)
    bound_loose = n_threads / (2 * t_sqrt + t_div)

    print(f"threads: numba.config.NUMBA_NUM_THREADS = {numba.config.NUMBA_NUM_THREADS}, in use {n_threads}")
    print(f"load average at the end: {os.getloadavg()[0]:.2f} (other jobs on the machine slow the figures)")
    print(f"problem: {N_POINTS} points x {N_SEGMENTS} segments (NumPy: {N_POINTS_NUMPY} points), float64")
    print(f"{'kernel':42s} {'pairs/s':>10s} {'x NumPy':>9s}")
    for name, rate in rows:
        print(f"{name:42s} {rate:10.3e} {rate / numpy_rate:9.1f}")
    print(f"one thread: sqrt {t_sqrt * 1e9:.2f} ns, division {t_div * 1e9:.2f} ns per float64")
    print(
        f"bound for B on {n_threads} threads, chain (1 sqrt + 1 division per pair): {bound_chain:.3e} pairs/s"
    )
    print(
        f"bound for B on {n_threads} threads, loose (2 sqrt + 1 division per pair): {bound_loose:.3e} pairs/s"
    )
    print(f"numba B vs NumPy B, largest relative difference: {agree:.1e}")


if __name__ == "__main__":
    main()
