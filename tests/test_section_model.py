"""The section-grid GMD correction and its error estimate."""

from __future__ import annotations

import math

import numpy as np
import pytest

from fieldenergy.constants import MU0
from fieldenergy.discretise import discretise, rect_gmd
from fieldenergy.model import Case, CirclePath, Circuit, Coil, Discretisation, RectSection, RoundSection
from fieldenergy.model.options import SolveOptions
from fieldenergy.run import solve
from fieldenergy.section_model import gmd_correction, grid_log_gmd

#: These tests check the A.J route; the field route is checked in tests/test_field_route.py.
FAST = SolveOptions.from_preset("fast").with_changes(field_route=False)
DEFAULT = SolveOptions.from_preset("default").with_changes(field_route=False)


def _ring(section: object, grid: tuple[int, int] | None = None) -> Case:
    coil = Coil("ring", "c", section, CirclePath(0.3, [0, 0, 0], [0, 0, 1]), turns=20)  # type: ignore[arg-type]
    return Case("ring", (Circuit("c", 1.0),), (coil,), Discretisation(section_grid=grid))


def test_grid_log_gmd_tends_to_the_rectangle_gmd() -> None:
    """sum_fg s_f s_g ln d_fg over a fine grid -> ln GMD of the rectangle (Maxwell 1873)."""
    w, h = 0.02, 0.008
    errors = []
    for n in (4, 8, 16):
        u = w / n * (np.arange(n) - (n - 1) / 2)
        v = h / n * (np.arange(n) - (n - 1) / 2)
        offsets = np.array([(a, b) for a in u for b in v])
        shares = np.full(n * n, 1 / n**2)
        errors.append(abs(grid_log_gmd(offsets, shares, np.full(n * n, rect_gmd(w / n, h / n))) - math.log(rect_gmd(w, h))))
    slope = np.polyfit(np.log([4, 8, 16]), np.log(errors), 1)[0]
    assert slope < -1.8, f"grid ln GMD converges at order {-slope:.2f}; expected about 2"


def test_round_sections_need_no_correction() -> None:
    model = discretise(_ring(RoundSection(0.002)))
    assert np.all(gmd_correction(model) == 0.0)


def test_correction_makes_a_coarse_grid_agree_with_a_fine_one() -> None:
    """Rect pack on a ring: grid 2x2 corrected vs 6x6 corrected, far closer than uncorrected."""
    section = RectSection(0.024, 0.016)
    coarse, fine = discretise(_ring(section, (2, 2))), discretise(_ring(section, (6, 6)))
    from fieldenergy.energy import grouped_inductance

    def self_l(model: object) -> float:
        fil = model.filaments  # type: ignore[attr-defined]
        return float(grouped_inductance(fil, fil.coil, 1)[0, 0])

    raw_coarse, raw_fine = self_l(coarse), self_l(fine)
    cor_coarse = raw_coarse + gmd_correction(coarse)[0]
    cor_fine = raw_fine + gmd_correction(fine)[0]
    raw_gap = abs(raw_coarse / raw_fine - 1)
    corrected_gap = abs(cor_coarse / cor_fine - 1)
    assert corrected_gap < raw_gap / 20, f"corrected {corrected_gap:.2e} vs raw {raw_gap:.2e}"


def test_small_section_ring_against_maxwell_gmd_formula() -> None:
    """L = mu0 N^2 R (ln(8R/g) - 2), g the section's GMD: a ring of small section (Maxwell 1873;
    Rosa & Grover 1912). Its neglected terms are O((c/R)^2 ln(8R/c)) ~ 3e-4 for c/R = 1/75."""
    section = RectSection(0.004, 0.003)
    r = solve(_ring(section), FAST)
    ref = MU0 * 20**2 * 0.3 * (math.log(8 * 0.3 / rect_gmd(0.004, 0.003)) - 2)
    assert r.inductance[0, 0] == pytest.approx(ref, rel=5e-4)
    assert 0 < r.section_error < 1e-4
