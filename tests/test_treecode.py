"""The dual-tree treecode against plain summation of point current elements."""

from __future__ import annotations

import numpy as np
import pytest

from fieldenergy.kernels._treecode import SourceTree, build_tree, traverse, tree_field
from tests.reference import point_elements_numpy


def _problem(n: int, m: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Invented sources on a wavy helix (current elements along it) and targets in a box."""
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0.0, 12.0 * np.pi, n))
    pos = np.column_stack([np.cos(t) * (1 + 0.1 * np.sin(5 * t)), np.sin(t), t / (12 * np.pi)])
    chg = np.column_stack([-np.sin(t), np.cos(t), np.full(n, 0.1)]) * rng.uniform(0.5, 2.0, (n, 1))
    targets = rng.uniform(-1.4, 1.4, (m, 3))
    return pos, chg, targets


def _relative_error(value: np.ndarray, ref: np.ndarray) -> float:
    """Largest error of B and of A per target, relative to the target's |B| or |A|."""
    eb = np.linalg.norm(value[:3] - ref[:3], axis=0) / np.linalg.norm(ref[:3], axis=0)
    ea = np.linalg.norm(value[3:] - ref[3:], axis=0) / np.linalg.norm(ref[3:], axis=0)
    return float(max(eb.max(), ea.max()))


def test_tree_cells_hold_every_point_once_inside_their_box() -> None:
    pts = np.random.default_rng(1).normal(size=(5000, 3)) * [1.0, 0.3, 0.0]  # flat: z extent 0
    perm, start, end, first, nch, parent, level, box = build_tree(pts, 40)
    assert sorted(perm) == list(range(len(pts)))
    for c in range(len(start)):
        p = pts[perm[start[c] : end[c]]]
        assert np.all(np.abs(p - box[c, :3]) <= box[c, 3:] * (1 + 1e-12))
        assert box[c, 5] > 0.0  # a flat cell still gets a grid of distinct points
        if nch[c]:
            kids = range(first[c], first[c] + nch[c])
            assert sum(end[k] - start[k] for k in kids) == end[c] - start[c]
            assert all(parent[k] == c and level[k] == level[c] + 1 for k in kids)
        else:
            assert end[c] - start[c] <= 40


def test_all_four_interaction_kinds_occur_and_agree_with_plain_sums() -> None:
    pos, chg, targets = _problem(6000, 6000, 0)
    order, leaf = 3, 30  # 64 proxies per cell
    tree = SourceTree(pos, chg, order, leaf)
    ref = point_elements_numpy(targets, pos, chg)
    seen: set[int] = set()
    for target_leaf in (30, 400):  # small target leaves use proxy sources, large ones proxy targets
        _, start, end, first, nch, _, _, box = build_tree(targets, target_leaf)
        kinds = traverse(box, end - start, first, nch, tree.box, tree.count, tree.first, tree.nch, 0.5, tree.n_proxy)[2]
        seen |= {int(k) for k in np.unique(kinds)}
        # an order-3 grid at theta = 0.5: measured 2e-3 and 4e-5; the bound says only that it works
        assert _relative_error(tree_field(targets, tree, 0.5, target_leaf), ref) < 1e-2
    assert seen == {0, 1, 2, 3}


def test_b_alone_and_a_alone_equal_the_rows_of_the_full_sum() -> None:
    pos, chg, targets = _problem(6000, 3000, 5)
    tree = SourceTree(pos, chg, 3, 30)
    both = tree_field(targets, tree, 0.5, 30)
    b_only, a_only = tree_field(targets, tree, 0.5, 30, "B"), tree_field(targets, tree, 0.5, 30, "A")
    # the same pairs (each sum's order left to the compiler): equal to rounding of the largest term
    np.testing.assert_allclose(b_only[:3], both[:3], rtol=0, atol=1e-13 * np.abs(both[:3]).max())
    np.testing.assert_allclose(a_only[3:], both[3:], rtol=0, atol=1e-13 * np.abs(both[3:]).max())
    assert not b_only[3:].any() and not a_only[:3].any()


def test_error_falls_geometrically_with_grid_order() -> None:
    """Chebyshev interpolation of a function analytic beyond the cell converges geometrically
    in the order (Trefethen, Approximation Theory and Approximation Practice, 2013, ch. 8)."""
    pos, chg, targets = _problem(8000, 1500, 2)
    ref = point_elements_numpy(targets, pos, chg)
    errors = []
    for order in (3, 5, 7):  # cells of more than 64, 216 and 512 points carry proxies
        tree = SourceTree(pos, chg, order, 50)
        errors.append(_relative_error(tree_field(targets, tree, 0.5, 50), ref))
    # measured 3.9e-5, 7.1e-7, 6.0e-9: a factor of about 50 to 100 per two orders
    assert errors[2] < 1e-7, errors
    assert errors[1] < 0.1 * errors[0] and errors[2] < 0.1 * errors[1], errors


def test_a_target_on_a_source_leaves_that_source_out() -> None:
    pos, chg, _ = _problem(3000, 1, 3)
    targets = pos[::7].copy()
    tree = SourceTree(pos, chg, 4, 25)
    value = tree_field(targets, tree, 0.5, 25)
    assert np.all(np.isfinite(value))
    ref = point_elements_numpy(targets, pos, chg)
    assert _relative_error(value, ref) < 1e-3


@pytest.mark.parametrize("n", [1, 2])
def test_tiny_source_sets(n: int) -> None:
    pos, chg, targets = _problem(n, 50, 4)
    tree = SourceTree(pos, chg, 4, 10)
    np.testing.assert_allclose(tree_field(targets, tree, 0.5, 10), point_elements_numpy(targets, pos, chg),
                               rtol=1e-13, atol=0)


def test_segment_treecode_matches_the_closed_form_inside_packs() -> None:
    """SegmentTreeSum against b_from_segments on a pack of short chords whose cores are larger
    than the chords, with a third of the points inside the cores."""
    from fieldenergy.fastfield import SegmentTreeSum
    from fieldenergy.kernels._biot_savart import b_from_segments

    rng = np.random.default_rng(5)
    t = np.linspace(0.0, 2 * np.pi, 61)
    starts, ends = [], []
    for dx in (0.0, 0.012, 0.024):  # a 3 x 3 pack of 60-chord polygons, 12 mm apart
        for dz in (0.0, 0.012, 0.024):
            ring = np.column_stack([(0.1 + dx) * np.cos(t), (0.1 + dx) * np.sin(t), np.full(61, dz)])
            starts.append(ring[:-1])
            ends.append(ring[1:])
    s, e = np.ascontiguousarray(np.vstack(starts)), np.ascontiguousarray(np.vstack(ends))
    cur = rng.uniform(0.5, 1.5, len(s))
    radii = np.full(len(s), 0.006)  # chords are 10.5 to 13 mm: cores reach the next chords
    pts = rng.uniform([-0.15, -0.15, -0.03], [0.15, 0.15, 0.05], (3000, 3))
    pick = rng.integers(0, len(s), 1000)
    off = rng.normal(size=(1000, 3))
    off *= (rng.uniform(0.0, 1.2, 1000) * 0.006 / np.linalg.norm(off, axis=1))[:, None]
    pts[:1000] = s[pick] + rng.uniform(0, 1, (1000, 1)) * (e[pick] - s[pick]) + off
    pts = np.ascontiguousarray(pts)
    ref = np.empty_like(pts)
    b_from_segments(pts, s, e, cur, radii, ref)
    val = np.empty_like(pts)
    SegmentTreeSum(s, e, cur, radii, order=6, theta=0.6)(pts, val)
    scale = np.linalg.norm(ref, axis=1).max()
    # measured 5.7e-6 of the largest |B| and 4.2e-7 in the energy of the sampled field
    assert np.linalg.norm(val - ref, axis=1).max() < 2e-5 * scale
    w = np.sum(ref**2)
    assert abs(np.sum(val**2) - w) < 3e-6 * w
