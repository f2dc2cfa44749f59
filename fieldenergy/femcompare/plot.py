"""A picture of the field error against the distance from the nearest conductor (PNG, matplotlib)."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from fieldenergy.errors import ExportError
from fieldenergy.femcompare.compare import Comparison
from fieldenergy.output.atomic import atomic_path

#: Floor of the plotted values on the log axes (a perfectly matching point would vanish).
PLOT_FLOOR_T: float = 1.0e-30


def write_error_plot(path: str | os.PathLike[str], comparison: Comparison) -> None:
    """Write a PNG: |B_fem - B_ref| and the reference's own error estimate against distance (log-log).

    Raises
    ------
    ExportError
        If the file is not a ``.png`` or cannot be written.
    """
    path = Path(path)
    if path.suffix.lower() != ".png":
        raise ExportError(f"{path}: the error plot is written as PNG; got suffix {path.suffix!r}, expected '.png'")
    try:
        import matplotlib  # heavy import, only where used
    except ImportError:
        raise ExportError(f"{path}: drawing the error plot needs matplotlib; install it, or skip the plot") from None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    c = comparison
    dist = np.maximum(c.distance, c.band_unit_m * 1e-3)
    fig, ax = plt.subplots(figsize=(7.0, 4.5), dpi=120)
    try:
        ax.loglog(dist, np.maximum(np.linalg.norm(c.error, axis=1), PLOT_FLOOR_T), ".", ms=2, alpha=0.5,
                  label="|B_fem - B_ref| (finite-element error)")
        ax.loglog(dist, np.maximum(c.reference_error, PLOT_FLOOR_T), ".", ms=1, alpha=0.3, color="0.5",
                  label="reference error estimate (Richardson)")
        ax.loglog(dist, np.maximum(np.linalg.norm(c.b_reference, axis=1), PLOT_FLOOR_T), ".", ms=1, color="C2",
                  alpha=0.6, label="|B_ref|")
        for k, edge in enumerate(c.band_edges):
            ax.axvline(edge * c.band_unit_m, color="0.8", lw=0.8, zorder=0, label="band edges" if k == 0 else None)
        ax.set_xlabel("distance from nearest conductor centre line (m)")
        ax.set_ylabel("magnetic flux density (T)")
        ax.set_title(f"{Path(c.fem.source).name}: relative L2 error {c.whole.relative_l2:.3g}")
        ax.legend(loc="best", fontsize=8)
        fig.tight_layout()
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format="png")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write ({exc})") from None
    finally:
        plt.close(fig)
