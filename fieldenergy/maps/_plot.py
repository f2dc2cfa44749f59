"""PNG plots of maps with matplotlib's Agg backend (no display needed); SI units on every axis.

A plane gets one colour map per scalar quantity (|B|, u, homogeneity; |B| if none was
asked for), with contour lines and the conductors projected onto the plane; a line gets its
field components and magnitude against the distance along it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from fieldenergy.errors import ExportError
from fieldenergy.maps.evaluate import MapResult
from fieldenergy.maps.grids import grid_axes
from fieldenergy.maps.quantities import QUANTITY_NAMES, QUANTITY_UNITS
from fieldenergy.model import Filaments
from fieldenergy.model.maps import LineMap, PlaneMap
from fieldenergy.output.atomic import atomic_path

#: Plot resolution (dots per inch) and size (inches).
DPI: int = 120
FIGURE_SIZE: tuple[float, float] = (6.4, 5.2)

#: Homogeneity plots use a symmetric-log colour scale, linear within this many ppm of zero.
PPM_LINEAR: float = 1.0

_LABELS = {"|B|": "|B|", "u": "energy density u", "homogeneity": "homogeneity (|B| - |B_ref|)/|B_ref|"}


def _figure() -> tuple[Any, Any]:
    from matplotlib.figure import (
        Figure,  # not pyplot: no global backend state, Agg on save
    )

    fig = Figure(figsize=FIGURE_SIZE, dpi=DPI, layout="constrained")  # labels never clipped
    return fig, fig.add_subplot(1, 1, 1)


def _save(fig: Any, path: Path) -> Path:
    try:
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format="png")
    except OSError as exc:
        raise ExportError(f"{path}: cannot write plot ({exc})") from None
    return path


def plot_plane(base: Path, result: MapResult, filaments: Filaments | None) -> list[Path]:
    """One PNG per scalar quantity of a plane map: ``<base>_<quantity>.png``."""
    scalars = [q for q in ("|B|", "u", "homogeneity") if q in result.values]
    values = dict(result.values)
    if not scalars:
        scalars = ["|B|"]
        values["|B|"] = np.linalg.norm(result.b, axis=1)
    return [_plane_plot(base.with_name(f"{base.name}_{QUANTITY_NAMES[q]}.png"), result, q, values[q], filaments)
            for q in scalars]


def _plane_plot(path: Path, result: MapResult, q: str, value: NDArray[np.float64], filaments: Filaments | None) -> Path:
    from matplotlib.colors import SymLogNorm

    spec = result.spec
    assert isinstance(spec, PlaneMap)  # only plane maps are plotted here
    u, v = grid_axes(spec)
    z = value.reshape(len(v), len(u))
    fig, ax = _figure()
    finite = z[np.isfinite(z)]
    norm = None
    if q == "homogeneity" and finite.size:
        top = max(float(np.percentile(np.abs(finite), 95)), 10 * PPM_LINEAR)
        norm = SymLogNorm(PPM_LINEAR, vmin=-top, vmax=top, base=10)
    mesh = ax.pcolormesh(u, v, z, shading="auto", cmap="RdBu_r" if norm else "viridis", norm=norm)
    if finite.size and np.ptp(finite) > 0:
        levels = _ppm_levels(norm) if norm is not None else 10
        ax.contour(u, v, z, levels=levels, colors="k", linewidths=0.5)
    if filaments is not None:
        _draw_conductors(ax, spec, filaments, u, v)
    unit = QUANTITY_UNITS[q]
    fig.colorbar(mesh, ax=ax, label=f"{_LABELS[q]} ({unit})")
    ax.set_xlabel(f"u along {np.round(spec.u, 3).tolist()} (m)")
    ax.set_ylabel(f"v along {np.round(spec.v, 3).tolist()} (m)")
    ax.set_title(f"map '{spec.name}': {_LABELS[q]}")
    ax.set_aspect("equal")
    return _save(fig, path)


def _ppm_levels(norm: Any) -> list[float]:
    """Contour levels at +-1, 10, 100 ... ppm within the colour range."""
    top = float(norm.vmax)
    steps = [10.0**k for k in range(int(np.ceil(np.log10(top))) + 1) if 10.0**k <= top]
    return sorted([-s for s in steps] + steps)


def _draw_conductors(ax: Any, spec: PlaneMap, filaments: Filaments, u: NDArray, v: NDArray) -> None:
    """Conductors projected onto the plane (faint) and where they cross it (marks)."""
    from matplotlib.collections import LineCollection

    ends = np.stack([filaments.starts, filaments.ends], axis=1) - spec.center
    uv = np.stack([ends @ spec.u, ends @ spec.v], axis=2)
    ax.add_collection(LineCollection(list(uv), colors="0.2", linewidths=0.6, alpha=0.3))
    height = ends @ np.cross(spec.u, spec.v)
    cross = (height[:, 0] <= 0.0) != (height[:, 1] <= 0.0)
    f = height[cross, 0] / (height[cross, 0] - height[cross, 1])
    at = uv[cross, 0] + f[:, None] * (uv[cross, 1] - uv[cross, 0])
    ax.plot(at[:, 0], at[:, 1], "k.", markersize=3)
    ax.set_xlim(u[0], u[-1])
    ax.set_ylim(v[0], v[-1])


def plot_line(path: Path, result: MapResult) -> Path:
    """Bx, By, Bz and |B| (T) against the distance along the line (m)."""
    spec = result.spec
    assert isinstance(spec, LineMap)  # only line maps are plotted here
    s = grid_axes(spec)[0]
    fig, ax = _figure()
    for k, c in enumerate("xyz"):
        ax.plot(s, result.b[:, k], label=f"B{c}")
    ax.plot(s, np.linalg.norm(result.b, axis=1), "k--", label="|B|")  # dashed: Bz shows beneath
    ax.set_xlabel(f"distance from start {np.round(spec.start, 4).tolist()} m (m)")
    ax.set_ylabel("B (T)")
    ax.set_title(f"map '{result.spec.name}'")
    ax.grid(True, alpha=0.3)
    ax.legend()
    return _save(fig, path)
