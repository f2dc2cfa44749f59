"""The plot of a swept case: energy and inductances against the first sweep's value."""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

from fieldenergy.batch.summary import BatchRow
from fieldenergy.output.atomic import atomic_path
from fieldenergy.sweep import Sweep


def write_sweep_plot(path: str | os.PathLike[str], sweeps: Sequence[Sweep], rows: Sequence[BatchRow]) -> Path | None:
    """Plot the stored energy, the self-inductances and (with two or more circuits) the mutual
    inductances of a swept case's variants against the first sweep's value, in SI units.

    Variants that differ in the other sweeps' values are drawn as separate lines. Rows without
    a result (failed, timeout) leave gaps. The PNG is written atomically.

    Returns
    -------
    The path written, or ``None`` when no variant has a result.
    """
    rows = [r for r in rows if r.inductance_H is not None and r.energy_J is not None and r.sweep_si]
    if not rows:
        return None
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    names = rows[0].circuits
    pairs = [(i, j) for i in range(len(names)) for j in range(i + 1, len(names))]
    figure = Figure(figsize=(6.4, 3.2 * (3 if pairs else 2)), layout="constrained")
    FigureCanvasAgg(figure)
    axes = figure.subplots(3 if pairs else 2, 1, sharex=True)
    for group, members in _groups(sweeps, rows).items():
        members.sort(key=lambda r: r.sweep_si[0])
        x = [r.sweep_si[0] for r in members]
        suffix = f" ({group})" if group else ""
        axes[0].plot(x, [r.energy_J for r in members], "o-", label=f"W{suffix}")
        matrices = [r.inductance_H or () for r in members]
        for i, name in enumerate(names):
            axes[1].plot(x, [m[i][i] for m in matrices], "o-", label=f"L {name}{suffix}")
        for i, j in pairs:
            axes[2].plot(x, [m[i][j] for m in matrices], "o-", label=f"M {names[i]}-{names[j]}{suffix}")
    labels = ["stored energy (J)", "self-inductance (H)", "mutual inductance (H)"]
    for ax, label in zip(axes, labels):
        ax.set_ylabel(label)
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize="small")
    axes[-1].set_xlabel(sweeps[0].axis_label)
    with atomic_path(path) as tmp:
        figure.savefig(tmp, format="png", dpi=120)
    return Path(path)


def _groups(sweeps: Sequence[Sweep], rows: list[BatchRow]) -> dict[str, list[BatchRow]]:
    """Rows grouped by the values of every sweep but the first."""
    groups: dict[str, list[BatchRow]] = {}
    for row in rows:
        key = ", ".join(f"{s.name}={(row.sweep or {}).get(s.name, '')}" for s in sweeps[1:])
        groups.setdefault(key, []).append(row)
    return groups
