"""The lattice fast multipole method against plain summation of point current elements."""

from __future__ import annotations

import numpy as np
import pytest

from fieldenergy.kernels._lattice import (
    DIRECT,
    GRID_TO_GRID,
    GRID_TO_POINTS,
    OFFSET_REACH,
    POINTS_TO_GRID,
    LatticeSources,
    build_lattice_tree,
    lattice_field,
    m2l_operators,
    offset_index,
    offset_matrix,
    traverse_lattice,
    unit_grid,
)
from fieldenergy.kernels._treecode import _basis_deriv, chebyshev_nodes
from tests.reference import point_elements_numpy

ORDER_TOL = {6: 1e-7, 8: 1e-9}


@pytest.fixture(scope="module")
def operators() -> dict[int, tuple[np.ndarray, np.ndarray]]:
    return {order: m2l_operators(order, tol) for order, tol in ORDER_TOL.items()}


def _problem(n: int, m: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Invented sources on a wavy helix (current elements along it); targets in a box around
    it, on a flat patch, in a dense cluster, and a few far away (in level-0 cells of their own)."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0.0, 12.0 * np.pi, n))
    pos = np.column_stack([np.cos(t) * (1 + 0.1 * np.sin(5 * t)), np.sin(t), t / (12 * np.pi)])
    chg = np.column_stack([-np.sin(t), np.cos(t), np.full(n, 0.1)]) * rng.uniform(0.5, 2.0, (n, 1))
    box = rng.uniform(-1.4, 1.4, (m, 3))
    flat = np.column_stack([rng.uniform(-1, 1, (m // 4, 2)), np.full(m // 4, 0.5)])
    far = rng.normal(size=(40, 3)) * 6.0
    cluster = rng.normal(size=(m // 3, 3)) * 0.05 + [0.0, 0.0, 2.0]  # dense cells beside sparse sources
    return pos, chg, np.vstack([box, flat, far, cluster])


def _relative_error(value: np.ndarray, ref: np.ndarray) -> tuple[float, float]:
    """Largest errors of B and of A per target, relative to the target's |B| or |A|."""
    eb = np.linalg.norm(value[:3] - ref[:3], axis=0) / np.linalg.norm(ref[:3], axis=0)
    ea = np.linalg.norm(value[3:] - ref[3:], axis=0) / np.linalg.norm(ref[3:], axis=0)
    return float(eb.max()), float(ea.max())


def test_lattice_cells_are_octants_holding_every_point_once() -> None:
    pts = np.random.default_rng(1).normal(size=(4000, 3)) * [1.0, 0.3, 0.0]  # flat: z extent 0
    pts[:10] += 50.0  # far points: roots of their own
    lo, width = np.array([-1.0, -1.0, -1.0]), 2.0
    perm, start, end, first, nch, parent, level, ijk, box = build_lattice_tree(pts, lo, width, 40, 30)
    assert sorted(perm) == list(range(len(pts)))
    assert np.count_nonzero(parent < 0) > 1
    for c in range(len(start)):
        h = width / 2.0 ** level[c]
        np.testing.assert_allclose(box[c, :3], lo + (ijk[c] + 0.5) * h, rtol=0, atol=1e-12)
        p = pts[perm[start[c]:end[c]]]
        assert np.all(np.abs(p - box[c, :3]) <= 0.5 * h * (1 + 1e-12))
        if nch[c]:
            kids = range(first[c], first[c] + nch[c])
            assert sum(end[k] - start[k] for k in kids) == end[c] - start[c]
            assert all(parent[k] == c and level[k] == level[c] + 1 and np.all(ijk[k] // 2 == ijk[c]) for k in kids)
        else:
            assert end[c] - start[c] <= 40


def test_operators_are_the_compressed_offset_matrices(operators: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
    """U has orthonormal columns; C_-d = C_d^T (K_-d = K_d^T); U C_d U^T reproduces K_d on
    grid charges to the tolerance (relative to the largest offset matrix's norm); neighbours'
    entries are zero."""
    u, table = operators[6]
    np.testing.assert_allclose(u.T @ u, np.eye(u.shape[1]), atol=1e-12)
    nodes, _ = chebyshev_nodes(6)
    grid = unit_grid(nodes)
    rng = np.random.default_rng(3)
    top = np.linalg.norm(offset_matrix(grid, 2, 0, 0), 2)
    for d in ((2, 0, 0), (-3, 1, 2), (0, -2, -2), (3, 3, 3)):
        c, c_mirror = table[offset_index(*d)], table[offset_index(-d[0], -d[1], -d[2])]
        np.testing.assert_array_equal(c_mirror, c.T)
        k = offset_matrix(grid, *d)
        q = rng.standard_normal(len(grid))
        err = np.linalg.norm(u @ (c @ (u.T @ q)) - k @ q) / (top * np.linalg.norm(q))
        assert err < 1e-6, f"offset {d}: {err:.1e}"
    assert not table[offset_index(1, 1, 0)].any()
    assert table.shape[0] == (2 * OFFSET_REACH + 1) ** 3


@pytest.mark.parametrize("order", [7, 10])
def test_basis_derivatives_are_exact_for_polynomials(order: int) -> None:
    """The interpolant of a polynomial of degree <= order is the polynomial, so its derivative
    is exact: on the nodes, between them, and within rounding distance of one (0.0 against
    the node cos(pi / 2) = 6e-17 of order 10, where a map's regular grid of targets puts
    points: the barycentric derivative formula lost every digit there)."""
    nodes, weights = chebyshev_nodes(order)
    coef = np.random.default_rng(2).normal(size=order + 1)
    f, df = np.polynomial.Polynomial(coef), np.polynomial.Polynomial(coef).deriv()
    val, der = np.empty(order + 1), np.empty(order + 1)
    scale = np.abs(coef).sum() * order**2
    for t in [*nodes, -0.93, 0.0, 0.1, 0.77, nodes[2] + 1e-13, nodes[order // 2] - 3e-16, -1.0 + 1e-15]:
        _basis_deriv(t, nodes, weights, val, der)
        assert abs(val @ f(nodes) - f(t)) < 1e-13 * scale
        assert abs(der @ f(nodes) - df(t)) < 1e-13 * scale, t


def test_lattice_sum_converges_with_grid_order(operators: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
    """B and A against plain summation, targets near, on a plane and far away; every kind of
    interaction occurs. Measured largest errors of B: order 6 6.8e-5, order 8 1.9e-6 (A about
    ten times smaller); the error falls by more than 10 from order 6 to 8."""
    pos, chg, targets = _problem(8000, 6000, 0)
    ref = point_elements_numpy(targets, pos, chg)
    errors = {}
    for order in (6, 8):
        src = LatticeSources(pos, chg, order, operators[order], 40, 24)
        k = operators[order][0].shape[1]
        out = lattice_field(targets, src, 40, 24, 3 * k * k / 15)
        errors[order] = _relative_error(out, ref)
    assert errors[6][0] < 2e-4 and errors[6][1] < 2e-4, errors
    assert errors[8][0] < 5e-6 and errors[8][1] < 5e-6, errors
    assert errors[8][0] < errors[6][0] / 10, errors


def test_all_interaction_kinds_occur(operators: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
    pos, chg, targets = _problem(8000, 6000, 0)
    src = LatticeSources(pos, chg, 6, operators[6], 40, 24)
    seen: set[int] = set()
    for leaf, min_grid, cost in ((40, 24, 3 * 60**2 / 15), (400, 8, 1e12)):
        _perm, start, end, first, nch, parent, level, ijk, box = build_lattice_tree(
            targets, src.lo, src.width, leaf, src.max_level)
        count = end - start
        kinds = traverse_lattice(np.flatnonzero(parent < 0), box, level, ijk, count, first, nch, count >= min_grid,
                                 src.roots, src.box, src.level, src.ijk, src.count, src.first, src.nch,
                                 src.grid_id >= 0, float(src.n_grid), cost)[2]
        seen |= {int(k) for k in np.unique(kinds)}
    assert seen == {DIRECT, GRID_TO_POINTS, POINTS_TO_GRID, GRID_TO_GRID}


def test_upward_by_blocks_equals_one_pass(operators: dict[int, tuple[np.ndarray, np.ndarray]],
                                          monkeypatch: pytest.MonkeyPatch) -> None:
    """Summing the grid charges up by subtrees of at most 300 sources, then the cells above
    them, gives the compressed charges of a single pass (to rounding)."""
    from fieldenergy.kernels import _lattice

    pos, chg, _ = _problem(8000, 10, 1)
    whole = LatticeSources(pos, chg, 6, operators[6], 40, 24)
    monkeypatch.setattr(_lattice, "UPWARD_BLOCK", 300)
    blocked = LatticeSources(pos, chg, 6, operators[6], 40, 24)
    assert np.count_nonzero(blocked.count > 300) > 5
    np.testing.assert_allclose(blocked.compressed, whole.compressed, rtol=0, atol=1e-12 * np.abs(whole.compressed).max())


def test_b_alone_equals_the_rows_of_the_full_sum(operators: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
    pos, chg, targets = _problem(6000, 3000, 5)
    src = LatticeSources(pos, chg, 6, operators[6], 40, 24)
    both = lattice_field(targets, src, 40, 24, 3 * 60**2 / 15)
    b_only = lattice_field(targets, src, 40, 24, 3 * 60**2 / 15, "B")
    np.testing.assert_allclose(b_only[:3], both[:3], rtol=0, atol=1e-13 * np.abs(both[:3]).max())
    assert not b_only[3:].any()


def test_a_regular_plane_of_targets_through_cell_centres(operators: dict[int, tuple[np.ndarray, np.ndarray]]) -> None:
    """A map's regular grid puts targets on the lattice's cell centres and faces, where the
    interpolant's derivative must still be right (it once lost every digit of B there)."""
    pos, chg, _ = _problem(8000, 10, 3)
    src = LatticeSources(pos, chg, 8, operators[8], 40, 24)
    centre = src.lo + 0.5 * src.width
    u = centre[0] + np.linspace(-0.5, 0.5, 41) * src.width
    x, y = np.meshgrid(u, u - centre[0] + centre[1])
    targets = np.column_stack([x.ravel(), y.ravel(), np.full(x.size, centre[2])])
    ref = point_elements_numpy(targets, pos, chg)
    k = operators[8][0].shape[1]
    err_b, err_a = _relative_error(lattice_field(targets, src, 40, 24, 3 * k * k / 15), ref)
    assert err_b < 5e-6 and err_a < 5e-6, (err_b, err_a)
