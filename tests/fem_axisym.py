"""An independent axisymmetric magnetostatic finite-element solve of a winding pack (scikit-fem).

The unknown is the stream function psi = r A_phi on an (r, z) section truncated by a box with
psi = 0 on the axis and on the far boundary. From curl (1/mu0 curl A) = J with the test field
(w / r) e_phi the weak form is

    integral (1 / (mu0 r)) grad psi . grad w  dr dz  =  integral J_phi w  dr dz,

and B_r = -(1/r) dpsi/dz, B_z = (1/r) dpsi/dr. psi is approximated by P2 triangles; B is
L2-projected onto P1 with the weight r, which cancels the 1/r:
integral B_z phi r = integral (dpsi/dr) phi. The mesh is a graded tensor grid whose lines
include the edges of the pack, so J is constant on every triangle.

References (common practice, from memory): the psi = r A_phi formulation of axisymmetric
magnetostatics, e.g. in J. Jin, The Finite Element Method in Electromagnetics, 2nd ed., 2002.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from fieldenergy.constants import MU0


@dataclass(frozen=True)
class WindingPack:
    """A rectangular-section coil about the z axis with uniform J_phi (SI units)."""

    r_inner: float
    r_outer: float
    z_low: float
    z_high: float
    ampere_turns: float

    @property
    def current_density(self) -> float:
        """J_phi, A/m^2."""
        return self.ampere_turns / ((self.r_outer - self.r_inner) * (self.z_high - self.z_low))


@dataclass(frozen=True)
class AxisymmetricSolution:
    """Nodes (n, 2) as (r, z), triangles (m, 3), nodal B (n, 2) as (B_r, B_z), cell-centre B (m, 2)."""

    points: NDArray[np.float64]
    triangles: NDArray[np.int64]
    b_nodes: NDArray[np.float64]
    b_cells: NDArray[np.float64]


def graded_nodes(start: float, fine_end: float, step: float, far_end: float, growth: float) -> NDArray[np.float64]:
    """1D nodes: uniform ``step`` from ``start`` to ``fine_end``, then steps growing by ``growth`` to ``far_end``."""
    n_fine = round((fine_end - start) / step)
    nodes = list(start + step * np.arange(n_fine + 1))
    h = step
    while nodes[-1] < far_end:
        h *= growth
        nodes.append(min(far_end, nodes[-1] + h) if far_end - nodes[-1] - h > 0.5 * h else far_end)
    return np.array(nodes)


def solve_pack(pack: WindingPack, step: float, fine: tuple[float, float], far: float, growth: float = 1.3) -> AxisymmetricSolution:
    """Solve for the field of ``pack`` on a box [0, far] x [-far, far].

    Parameters
    ----------
    pack
        The winding pack.
    step
        Uniform mesh step in the fine region (m); the pack's edges must lie on multiples of it.
    fine
        The fine region r < fine[0], |z| < fine[1] (m).
    far
        Half-size of the truncated box (m); psi = 0 on its boundary and on the axis.
    growth
        Ratio of consecutive mesh steps outside the fine region.

    Returns
    -------
    AxisymmetricSolution
        B projected to the nodes and B at the triangle centroids (T).
    """
    from skfem import (
        Basis,
        BilinearForm,
        ElementTriP1,
        ElementTriP2,
        LinearForm,
        MeshTri,
        asm,
        condense,
        solve,
    )
    from skfem.helpers import dot, grad

    r = graded_nodes(0.0, fine[0], step, far, growth)
    z_half = graded_nodes(0.0, fine[1], step, far, growth)
    z = np.concatenate([-z_half[:0:-1], z_half])
    mesh = MeshTri.init_tensor(r, z)
    basis2 = Basis(mesh, ElementTriP2(), intorder=4)
    basis1 = Basis(mesh, ElementTriP1(), intorder=4)

    @BilinearForm
    def stiffness(u, v, w):  # type: ignore[no-untyped-def]
        return dot(grad(u), grad(v)) / (MU0 * w.x[0])

    @LinearForm
    def source(v, w):  # type: ignore[no-untyped-def]
        inside = (w.x[0] > pack.r_inner) & (w.x[0] < pack.r_outer) & (w.x[1] > pack.z_low) & (w.x[1] < pack.z_high)
        return np.where(inside, pack.current_density, 0.0) * v

    psi = solve(*condense(asm(stiffness, basis2), asm(source, basis2), D=basis2.get_dofs()))
    b_nodes = _project_b(basis1, basis2, psi)
    b_cells = _cell_centre_b(mesh, psi)
    return AxisymmetricSolution(mesh.p.T.copy(), mesh.t.T.astype(np.int64), b_nodes, b_cells)


def _project_b(basis1: Any, basis2: Any, psi: NDArray[np.float64]) -> NDArray[np.float64]:
    """r-weighted L2 projection of (B_r, B_z) onto P1: M b = integral (-dpsi/dz, dpsi/dr) phi."""
    from skfem import BilinearForm, LinearForm, asm, solve

    @BilinearForm
    def mass(u, v, w):  # type: ignore[no-untyped-def]
        return u * v * w.x[0]

    @LinearForm
    def rhs_r(v, w):  # type: ignore[no-untyped-def]
        return -w.psi.grad[1] * v

    @LinearForm
    def rhs_z(v, w):  # type: ignore[no-untyped-def]
        return w.psi.grad[0] * v

    m = asm(mass, basis1)
    field = basis2.interpolate(psi)
    # Positive definite even with nodes on the axis: each shape function lives where r > 0.
    return np.stack([solve(m, asm(rhs_r, basis1, psi=field)), solve(m, asm(rhs_z, basis1, psi=field))], axis=1)


def _cell_centre_b(mesh: Any, psi: NDArray[np.float64]) -> NDArray[np.float64]:
    """(B_r, B_z) at each triangle's centroid from the P2 gradient (one value per cell)."""
    from skfem import Basis, ElementTriP2

    centroid_rule = (np.array([[1.0 / 3.0], [1.0 / 3.0]]), np.array([0.5]))
    basis = Basis(mesh, ElementTriP2(), quadrature=centroid_rule)
    dpsi = basis.interpolate(psi).grad[:, :, 0]
    r = np.asarray(basis.global_coordinates())[0][:, 0]
    return np.stack([-dpsi[1] / r, dpsi[0] / r], axis=1)
