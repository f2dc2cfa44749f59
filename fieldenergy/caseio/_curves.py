"""The ``curve`` path kind: x(t), y(t), z(t) expressions, checked when read and tested for closure."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from fieldenergy.caseio._tables import Table, show
from fieldenergy.errors import CaseError
from fieldenergy.expressions import compile_expression
from fieldenergy.model.paths import CurvePath

#: Largest gap |p(t1) - p(t0)| allowed, relative to the curve's size (bounding-box diagonal).
CLOSURE_RTOL: float = 1.0e-9

#: Points at which a curve is evaluated to measure its size and check that it is finite.
N_SIZE_SAMPLES: int = 257


def read_curve(table: Table) -> CurvePath:
    """Read a ``curve`` path table.

    Parameters
    ----------
    table
        The path table, with ``x``, ``y``, ``z`` expressions in ``t`` and ``t = [t0, t1]``.
        With a ``unit`` key the expressions are stored scaled to metres, as ``"(expr)*factor"``.

    Returns
    -------
    The curve record.

    Raises
    ------
    CaseError
        If an expression is not allowed, ``t`` is not an increasing pair, the curve is not finite
        on ``[t0, t1]``, or it does not return to its start.
    """
    table.check_keys({"kind", "unit", "x", "y", "z", "t"})
    texts = [_expression(table, key) for key in ("x", "y", "z")]
    t0, t1 = _parameter_range(table)
    samples = np.linspace(t0, t1, N_SIZE_SAMPLES)
    points = np.stack(
        [compile_expression(text, table.where(key) or key)(samples) for text, key in zip(texts, "xyz", strict=True)],
        axis=1,
    )
    _check_closed(table, points, samples)
    return CurvePath(x=texts[0], y=texts[1], z=texts[2], t0=t0, t1=t1)


def _expression(table: Table, key: str) -> str:
    """The expression at ``key``, checked, and scaled to metres when the table has a unit."""
    text = table.text(key)
    try:
        compile_expression(text, table.where(key) or key)
        if table.unit != 1.0:
            text = f"({text})*{table.unit!r}"
            compile_expression(text, table.where(key) or key)
    except CaseError as exc:
        raise CaseError(exc.message, path=table.file, where=exc.where) from None
    return text


def _parameter_range(table: Table) -> tuple[float, float]:
    value = table.raw("t", "[t0, t1], two plain numbers with t1 > t0")
    if not isinstance(value, list) or len(value) != 2:
        raise table.error(f"expected [t0, t1], two plain numbers with t1 > t0, got {show(value)}", "t")
    t0, t1 = _plain(table, value[0], "t[0]"), _plain(table, value[1], "t[1]")
    if not (t1 > t0 and np.isfinite(t1 - t0)):
        raise table.error(f"expected t1 > t0 (with a finite difference), got [{t0!r}, {t1!r}]", "t")
    return t0, t1


def _plain(table: Table, value: object, key: str) -> float:
    """A finite plain number that is an item of a list, with errors at ``key`` (``"t[0]"``)."""
    return Table(data={key: value}, file=table.file, owner=table.owner, prefix=table.prefix).number(key)


def _check_closed(table: Table, points: NDArray[np.float64], samples: NDArray[np.float64]) -> None:
    bad = np.flatnonzero(~np.isfinite(points).all(axis=1))
    if bad.size:
        raise table.error(f"the curve is not finite at t = {float(samples[bad[0]])!r}; check the expressions and t")
    scale = float(np.max(np.abs(points)))
    if scale == 0.0:
        raise table.error("the curve stays at the origin; it has no size")
    unit = points / scale  # in units of the largest coordinate: no overflow below
    size = float(np.linalg.norm(unit.max(axis=0) - unit.min(axis=0)))
    gap = float(np.linalg.norm(unit[-1] - unit[0]))
    if size == 0.0:
        raise table.error(f"the curve stays at the point {points[0].tolist()}; it has no size")
    if gap > CLOSURE_RTOL * size:
        raise table.error(
            f"the curve does not close: |p(t1) - p(t0)| = {gap * scale:.6g} m, at most {CLOSURE_RTOL:g} x its "
            f"size {size * scale:.6g} m allowed; check t = [t0, t1] and the expressions"
        )
