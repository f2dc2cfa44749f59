"""Richardson extrapolation and its error estimate (L. F. Richardson, Phil. Trans. R. Soc. A 210, 1911).

The sequences are built with known error terms, so the expected limits are exact.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fieldenergy.energy.extrapolate import observed_order, richardson

#: Extrapolating an exact h^2 + h^4 sequence leaves only rounding and the h^4 term.
EXACT_TOL = 1e-12


def test_pure_second_order_sequence_is_extrapolated_exactly() -> None:
    seq = [np.array([3.0 + 0.2 * 4.0**-k, -1.0 - 0.05 * 4.0**-k]) for k in range(3)]
    r = richardson(seq)
    np.testing.assert_allclose(r.value, [3.0, -1.0], rtol=0, atol=EXACT_TOL)
    assert r.observed_order == pytest.approx(2.0, abs=1e-9)


def test_error_estimate_bounds_the_true_error_with_a_fourth_order_remainder() -> None:
    exact = 1.0
    seq = [np.array(exact + 0.3 * 4.0**-k + 0.2 * 16.0**-k) for k in range(4)]
    r = richardson(seq)
    true_error = abs(float(r.value) - exact)
    assert true_error <= float(r.error), f"estimate {float(r.error):.3e} below true error {true_error:.3e}"
    assert float(r.error) < 0.01, "estimate should be small once the h^2 term is removed"


def test_two_levels_give_the_correction_as_error() -> None:
    seq = [np.array(2.0 + 0.4), np.array(2.0 + 0.1)]
    r = richardson(seq)
    assert float(r.value) == pytest.approx(2.0, abs=EXACT_TOL)
    assert float(r.error) == pytest.approx(0.1, rel=1e-12)
    assert math.isnan(r.observed_order)


def test_single_level_has_no_estimate() -> None:
    r = richardson([np.array(5.0)])
    assert float(r.value) == 5.0 and math.isnan(float(r.error))


def test_observed_order_of_a_first_order_sequence() -> None:
    seq = [np.array(1.0 + 2.0**-k) for k in range(3)]
    assert observed_order(seq) == pytest.approx(1.0, abs=1e-12)


def test_constant_sequence_has_no_observed_order() -> None:
    assert math.isnan(observed_order([np.array(1.0)] * 3))
