"""Discharge of coupled circuits: L dI/dt + R I = 0 from the solved inductance matrix, exactly.

At t = 0 every energised circuit is switched onto its resistances (its series resistance plus
its dump resistor, if any); passive circuits (shorted rings, support cylinders) start at zero
current and are driven only through their mutual inductances. With L symmetric positive
definite and R diagonal and positive, the generalised symmetric eigenproblem R v = lambda L v
(scipy.linalg.eigh) gives V with V^T L V = 1 and V^T R V = diag(lambda), so::

    I(t) = V exp(-lambda t) c,   c = V^T L I(0),   time constants 1 / lambda

and each circuit's resistive energy is exact in closed form::

    E_k = R_k int_0^inf I_k^2 dt = R_k sum_ij V_ki V_kj c_i c_j / (lambda_i + lambda_j)

Summed over the circuits this is c^T c / 2 = I(0)^T L I(0) / 2, the stored energy.

A circuit at zero current that is not passive is taken to be open during the discharge (its
supply disconnected) and left out. A circuit taking part with zero total resistance cannot
discharge (its current would persist); :func:`discharge` then raises
:class:`~fieldenergy.errors.DischargeError` and :func:`discharge_or_note` returns a note.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import partial

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq, minimize_scalar

from fieldenergy.errors import CaseError
from fieldenergy.model.case import Circuit

#: Fraction of a circuit's starting (or, for a passive circuit, peak) current that counts as
#: discharged (common practice: the "1 % time" of a protection study).
DISCHARGED_FRACTION: float = 0.01

#: Samples of the current curves per decade of time when searching for peaks and crossings.
SAMPLES_PER_DECADE: int = 200

#: Number of rows of the current-against-time table.
N_TABLE_ROWS: int = 501

Array = NDArray[np.float64]


class DischargeError(CaseError):
    """The circuits cannot discharge (a circuit taking part has no resistance)."""


@dataclass(frozen=True, slots=True, eq=False)
class Discharge:
    """The discharge of the circuits that take part (energised or passive).

    Attributes
    ----------
    circuits
        Names of the circuits taking part, in case order.
    resistance
        Total resistance of each (series plus dump), shape (n,), ohm.
    dump_fraction
        Share of each circuit's resistance that is its dump resistor, shape (n,).
    initial_current
        Currents at t = 0, shape (n,), A.
    initial_energy
        I(0)^T L I(0) / 2 of the circuits taking part, J.
    rates, modes, amplitudes
        lambda (1/s, shape (n,)), V (shape (n, n)) and c (A H^(1/2), shape (n,)): I(t) = V exp(-lambda t) c.
    energy_deposited
        Energy each circuit's resistances absorb, shape (n,), J.
    peak_current, peak_time
        Largest |I_k(t)| (A) and when it occurs (s), shape (n,).
    time_to_1pct
        Time after which |I_k| stays below DISCHARGED_FRACTION of its starting current (of its
        peak for a passive circuit), shape (n,), s.
    passive
        Which circuits are passive, shape (n,).
    """

    circuits: tuple[str, ...]
    resistance: Array
    dump_fraction: Array
    initial_current: Array
    initial_energy: float
    rates: Array
    modes: Array
    amplitudes: Array
    energy_deposited: Array
    peak_current: Array
    peak_time: Array
    time_to_1pct: Array
    passive: NDArray[np.bool_]

    @property
    def time_constants(self) -> Array:
        """Time constants 1/lambda of the modes, longest first, s."""
        return np.sort(1.0 / self.rates)[::-1]

    @property
    def peak_voltage(self) -> Array:
        """Largest voltage across each circuit's resistances, R_k max |I_k|, V."""
        return self.resistance * self.peak_current

    def currents(self, t: ArrayLike) -> Array:
        """Currents at times ``t`` (s), shape (len(t), n), A."""
        t = np.asarray(t, dtype=np.float64)
        return (np.exp(-np.outer(t, self.rates)) * self.amplitudes) @ self.modes.T

    def times(self, n: int = N_TABLE_ROWS) -> Array:
        """``n`` equally spaced times from 0 to 1.2 times the longest 1 % time, s."""
        end = 1.2 * float(np.max(self.time_to_1pct)) if len(self.rates) else 0.0
        return np.linspace(0.0, end, n)


def participating(circuits: tuple[Circuit, ...]) -> list[int]:
    """Indices of the circuits that take part in a discharge: energised or passive."""
    return [k for k, c in enumerate(circuits) if c.current != 0.0 or c.passive]


def discharge(circuits: tuple[Circuit, ...], inductance: Array) -> Discharge:
    """Solve the discharge of the circuits from their terminal inductance matrix.

    Parameters
    ----------
    circuits
        The case's circuits (their currents, resistances, dump resistors and passive flags).
    inductance
        Terminal inductance matrix of the circuits, shape (n_circuits, n_circuits), H.

    Returns
    -------
    Discharge

    Raises
    ------
    DischargeError
        If no circuit carries current, one taking part has zero total resistance, or the
        inductance matrix has the wrong shape or is not positive definite.

    Examples
    --------
    >>> d = discharge((Circuit("coil", 10.0, resistance=2.0),), np.array([[0.5]]))
    >>> round(float(d.time_constants[0]), 12), round(float(d.energy_deposited[0]), 12)   # L/R, L I^2/2
    (0.25, 25.0)
    """
    idx = participating(circuits)
    if not any(circuits[k].current != 0.0 for k in idx):
        raise DischargeError("no circuit carries current: there is nothing to discharge", where="circuits")
    part = [circuits[k] for k in idx]
    dump = np.array([c.dump_resistance or 0.0 for c in part])
    r = np.array([c.resistance for c in part]) + dump
    if not np.all(r > 0.0):
        bad = [c.name for c, rk in zip(part, r) if not rk > 0.0]
        raise DischargeError(
            f"circuit(s) {', '.join(repr(b) for b in bad)} have zero total resistance, so their current "
            "would never decay; give 'resistance' or 'dump_resistance' (> 0 ohm) to discharge",
            where="circuits",
        )
    l_all = np.asarray(inductance, dtype=np.float64)
    if l_all.shape != (len(circuits), len(circuits)) or not np.isfinite(l_all).all():
        raise DischargeError(
            f"expected a finite {len(circuits)} x {len(circuits)} inductance matrix (one row per circuit), "
            f"got shape {l_all.shape}",
            where="inductance",
        )
    l_sub = l_all[np.ix_(idx, idx)]
    try:
        rates, modes = scipy.linalg.eigh(np.diag(r), l_sub)
    except np.linalg.LinAlgError:
        raise DischargeError(
            "the inductance matrix of the discharging circuits is not positive definite", where="inductance"
        ) from None
    i0 = np.array([c.current for c in part])
    amplitudes = modes.T @ l_sub @ i0
    pair = np.outer(amplitudes, amplitudes) / (rates[:, None] + rates[None, :])
    energy = r * np.einsum("ki,kj,ij->k", modes, modes, pair)
    passive = np.array([c.passive for c in part], dtype=bool)
    d = Discharge(
        circuits=tuple(c.name for c in part),
        resistance=r,
        dump_fraction=dump / r,
        initial_current=i0,
        initial_energy=0.5 * float(i0 @ l_sub @ i0),
        rates=rates,
        modes=modes,
        amplitudes=amplitudes,
        energy_deposited=energy,
        peak_current=np.zeros(len(part)),
        peak_time=np.zeros(len(part)),
        time_to_1pct=np.zeros(len(part)),
        passive=passive,
    )
    peak_current, peak_time, time_to_1pct = _peaks(d)
    return replace(d, peak_current=peak_current, peak_time=peak_time, time_to_1pct=time_to_1pct)


def discharge_or_note(circuits: tuple[Circuit, ...], inductance: Array) -> tuple[Discharge | None, str | None]:
    """:func:`discharge`, or ``(None, note)`` when the circuits cannot discharge."""
    try:
        return discharge(circuits, inductance), None
    except DischargeError as exc:
        return None, f"discharge not computed: {exc.message}"


def _peaks(d: Discharge) -> tuple[Array, Array, Array]:
    """Peak |I_k|, its time and the 1 % time of each circuit, each shape (n,).

    The currents are sampled on a logarithmic time grid from 1e-4 of the shortest to 50 of
    the longest time constant (every mode has decayed by e^-50 at its end); the peak is then
    polished by a bounded scalar search and the 1 % crossing by Brent's method.
    """
    t_lo, t_hi = 1e-4 / float(np.max(d.rates)), 50.0 / float(np.min(d.rates))
    n = int(SAMPLES_PER_DECADE * np.log10(t_hi / t_lo)) + 1
    t = np.concatenate([[0.0], np.geomspace(t_lo, t_hi, n)])
    current = np.abs(d.currents(t))
    peak_current, peak_time, time_to_1pct = (np.zeros(len(d.circuits)) for _ in range(3))
    for k in range(len(d.circuits)):
        peak_time[k], peak_current[k] = _peak(d, k, t, current[:, k])
        level = DISCHARGED_FRACTION * (peak_current[k] if d.passive[k] else abs(d.initial_current[k]))
        above = np.flatnonzero(current[:, k] >= level)
        last = int(above[-1]) if len(above) else 0
        time_to_1pct[k] = _crossing(d, k, level, t, last) if last < len(t) - 1 else t[-1]
    return peak_current, peak_time, time_to_1pct


def _abs_current(d: Discharge, k: int, x: float) -> float:
    return float(abs(d.currents([x])[0, k]))


def _peak(d: Discharge, k: int, t: Array, sampled: Array) -> tuple[float, float]:
    """(time, value) of the largest |I_k|, from the samples polished by a bounded search."""
    j = int(np.argmax(sampled))
    best_t, best_i = float(t[j]), float(sampled[j])
    if 0 < j < len(t) - 1:
        res = minimize_scalar(
            partial(_neg_abs_current, d, k),
            bounds=(t[j - 1], t[j + 1]),
            method="bounded",
            options={"xatol": 1e-12 * t[j + 1]},
        )
        if -res.fun > best_i:
            best_t, best_i = float(res.x), float(-res.fun)
    return best_t, best_i


def _neg_abs_current(d: Discharge, k: int, x: float) -> float:
    return -_abs_current(d, k, x)


def _excess(d: Discharge, k: int, level: float, x: float) -> float:
    return _abs_current(d, k, x) - level


def _crossing(d: Discharge, k: int, level: float, t: Array, last: int) -> float:
    """Where |I_k| falls through ``level`` for the last time, between t[last] and t[last + 1]."""
    if _abs_current(d, k, t[last]) <= level:
        return float(t[last])
    return float(brentq(partial(_excess, d, k, level), t[last], t[last + 1], xtol=1e-14 * t[last + 1]))
