"""Field route (1/(2 mu0) integral of |B|^2): time and accuracy per bundled case, cost growth.

For each case in ``cases/`` the model that ``solve`` gives the field route (chords five times
coarser in sagitta than the default preset's coarsest level) is integrated by the field
route, within solve's point budget, and compared with the A.J route's raw matrix of the same
model (both without the section correction, which is common to both; the field route less
its pack cores' overlap, see fieldenergy.section_model). A second table shows how the time grows
with the number of segments (a loop cut into more chords, the wire radius fixed).

The gap is the field route's true error, up to the two routes' model difference at bends
(a few 1e-5 to 1e-4 on these cases). With --sweep each case runs at three tolerances.

Run:  python benchmarks/bench_field_route.py [CASE ...] [--sweep] [--cases-only | --growth-only]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

from fieldenergy import load_case
from fieldenergy.energy.from_field import field_inductance
from fieldenergy.energy.from_potential import grouped_inductance
from fieldenergy.model.filaments import Filaments
from fieldenergy.run import circuit_matrix, field_route_model, field_route_points
from fieldenergy.section_model import core_overlap_correction

ROOT = Path(__file__).resolve().parents[1]


def case_rows(folder: Path, tolerances: tuple[float, ...]) -> list[list[str]]:
    """One row per tolerance: time, points, estimate, and the gap to the A.J route of the same model."""
    model = field_route_model(load_case(folder))
    fil = model.filaments
    t0 = time.perf_counter()
    aj = grouped_inductance(fil, fil.circuit, fil.n_circuits)
    t_aj = time.perf_counter() - t0
    overlap = circuit_matrix(np.diag(core_overlap_correction(model)), model.coil_circuit, fil.n_circuits)
    d = np.sqrt(np.diag(aj))
    return [_row(folder.name, fil, field_inductance(fil, rel_tol=tol, max_points=field_route_points(model)),
                 aj, overlap, d, t_aj, tol) for tol in tolerances]


def _row(name: str, fil: Filaments, field, aj, overlap, d, t_aj: float, tol: float) -> list[str]:  # type: ignore[no-untyped-def]
    gap = float(np.max(np.abs(field.matrix - overlap - aj) / np.outer(d, d)))
    tail = float(np.max(np.diag(field.tail) / np.diag(field.matrix)))
    return [
        name,
        f"{tol:.0e}",
        str(fil.n_segments),
        f"{field.seconds:.1f}",
        f"{t_aj:.2f}",
        f"{field.n_points / 1e6:.1f}",
        f"{field.relative_error:.1e}",
        f"{gap:.1e}",
        f"{tail:.1e}",
        "yes" if field.converged else "NO",
    ]


def growth_rows() -> list[list[str]]:
    rows = []
    for n in (48, 96, 192, 384):
        t = 2 * np.pi * np.arange(n) / n
        pts = np.column_stack([0.1 * np.cos(t), 0.1 * np.sin(t), np.zeros(n)])
        fil = Filaments.from_segments(pts, np.roll(pts, -1, axis=0), radii=2e-3)
        r = field_inductance(fil)
        rows.append([str(n), f"{r.seconds:.2f}", f"{r.n_points / 1e6:.2f}", f"{r.n_points * n / r.seconds / 1e6:.0f}"])
    return rows


def show(header: list[str], rows: list[list[str]]) -> None:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
    print("  ".join(h.rjust(w) for h, w in zip(header, widths)))
    for r in rows:
        print("  ".join(c.rjust(w) for c, w in zip(r, widths)))


def main() -> None:
    field_inductance(Filaments.from_segments([[0, 0, 0], [1, 0, 0]], [[1, 0, 0], [0, 0, 0]], radii=0.05))  # compile
    if "--growth-only" not in sys.argv:
        # time against accuracy: the default tolerance (1e-3), and looser and tighter with --sweep
        tolerances = (3e-3, 1e-3, 3e-4) if "--sweep" in sys.argv else (1e-3,)
        header = ["case", "tol", "segments", "field s", "A.J s", "Mpoints", "est. rel", "gap", "tail", "converged"]
        print("  ".join(header), flush=True)
        names = [a for a in sys.argv[1:] if not a.startswith("--")]
        for folder in sorted((ROOT / "cases").iterdir()):
            if (folder / "case.toml").exists() and (not names or folder.name in names):
                for row in case_rows(folder, tolerances):
                    print("  ".join(row), flush=True)
        print()
    if "--cases-only" not in sys.argv:
        rows = growth_rows()
        show(["segments", "field s", "Mpoints", "Mpairs/s"], rows)
        n = np.array([float(r[0]) for r in rows])
        secs = np.array([float(r[1]) for r in rows])
        print(f"time ~ segments^{np.polyfit(np.log(n), np.log(secs), 1)[0]:.2f} (points fixed by the geometry)")


if __name__ == "__main__":
    main()
