"""Field at points from a case (extrapolated over levels) against published closed forms."""

from __future__ import annotations

import numpy as np
import pytest

from fieldenergy.fieldmap import field_with_error
from fieldenergy.model import Case, CirclePath, Circuit, Coil, RoundSection
from tests import analytic

#: Default preset: levels 1 and 2 (188 and 376 chords) extrapolated; far from the wire the
#: remaining O(N^-4) chord error is below 1e-8 relative.
FIELD_RTOL = 1e-7


def _helmholtz(radius: float, turns: float, current: float) -> Case:
    coils = tuple(
        Coil(name, "c", RoundSection(1e-3), CirclePath(radius, [0, 0, z], [0, 0, 1]), turns=turns)
        for name, z in (("upper", radius / 2), ("lower", -radius / 2))
    )
    return Case("Helmholtz pair", (Circuit("c", current),), coils)


def test_helmholtz_centre_field() -> None:
    """B = (4/5)^(3/2) mu0 N I / R at the centre of a Helmholtz pair (Helmholtz; from memory)."""
    radius, turns, current = 0.18, 25, 3.0
    b, a, err = field_with_error(_helmholtz(radius, turns, current), [[0.0, 0.0, 0.0]])
    ref = analytic.helmholtz_centre_field(radius, turns, current)
    assert b[0, 2] == pytest.approx(ref, rel=FIELD_RTOL)
    assert abs(b[0, 0]) < FIELD_RTOL * ref and abs(b[0, 1]) < FIELD_RTOL * ref
    assert np.linalg.norm(a[0]) < FIELD_RTOL * ref * radius, "A vanishes on the axis by symmetry"
    assert 0 <= err[0] < 1e-4 * ref


def test_on_axis_field_of_the_pair_matches_the_sum_of_loops() -> None:
    """Superposition of the on-axis loop field (Biot-Savart; from memory) at several heights."""
    radius, turns, current = 0.18, 25, 3.0
    z = np.linspace(-0.3, 0.3, 7)
    pts = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    b, _, err = field_with_error(_helmholtz(radius, turns, current), pts)
    ref = [
        turns * (analytic.loop_axial_field(radius, current, zz - radius / 2) + analytic.loop_axial_field(radius, current, zz + radius / 2))
        for zz in z
    ]
    np.testing.assert_allclose(b[:, 2], ref, rtol=FIELD_RTOL)
    assert np.all(err <= 1e-4 * np.abs(ref))
