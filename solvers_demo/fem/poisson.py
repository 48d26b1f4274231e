"""Lagrange finite elements (P1, P2) on triangles for ``-div(k grad u) = f``, with scikit-fem.

The error is measured where finite elements are accurate on average: the
solution and its gradient are returned at the quadrature points of every
triangle, with the quadrature weights times the triangle's Jacobian as the
weights. The volume-weighted norms of the study are then the integral
norms of the finite-element error (up to quadrature error of a higher
order), and the textbook orders hold: L2 at p+1, the H1 seminorm at p
(Brenner & Scott, *The Mathematical Theory of Finite Element Methods*,
Theorem 4.4.20 and Section 0.8). Sampling at the nodes instead would show
the superconvergence of nodal values, which is not the L2 error.

A level of ``n x n`` cells is a square mesh cut into ``2 n**2`` triangles
(``MeshTri.init_tensor``); the solver reports its own h and its unknowns.
The h is the representative size ``sqrt(2 A / T)`` of ``T`` triangles
covering the area ``A`` (the leg of a right triangle of average area): a
mean, so a random mesh does not make it jump the way its longest edge
does. ``perturb`` moves every interior node by a random
fraction of the local spacing (seeded per level), for a mesh that is
quasi-uniform but has no structure to hide behind.

Examples
--------
>>> from mmsverify import run_study
>>> r = run_study("plate-poisson", FEMPoisson(degree=1), levels=3, base_cells=4)
>>> [v.norm for v in r.verdicts], r.passed
(['L2', 'H1semi', 'H1', 'energy'], True)
"""

from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from mmsverify import Solution, SolverError

from ..base import DemoSolver

__all__ = ["FEMPoisson", "p1", "p2", "p1_perturbed", "p2_perturbed"]

_SIDES = ("x_min", "x_max", "y_min", "y_max")


@dataclass(frozen=True)
class FEMPoisson(DemoSolver):
    """Continuous Lagrange elements of degree 1 or 2 on a triangulated box.

    Attributes
    ----------
    degree : int
        1 (P1) or 2 (P2).
    perturb : float
        Random displacement of interior nodes, as a fraction of the spacing (0 to 0.3).
    """

    operators: ClassVar[tuple] = ("poisson", "diffusion")
    dims: ClassVar[tuple] = (2,)
    CHOICES: ClassVar[dict] = {"degree": (1, 2)}
    MISTAKES: ClassVar[dict] = {"neumann-sign": "the Neumann data enter with the wrong sign"}

    degree: int = 1
    perturb: float = 0.0

    def _validate(self):
        super()._validate()
        if not 0 <= self.perturb <= 0.3:
            raise SolverError(f"FEMPoisson: perturb={self.perturb!r} must be from 0 to 0.3 (fraction of the "
                              "spacing) so that no triangle folds over")

    @property
    def formal_order(self):
        return self.degree + 1

    @property
    def norm_orders(self):
        """L2 at p+1, the gradient norms at p (Brenner & Scott, Theorem 4.4.20)."""
        p = self.degree
        return {"L2": p + 1, "H1semi": p, "H1": p, "energy": p}

    @property
    def judged_norms(self):
        # Linf at quadrature points is not covered by the L2 estimate; it is measured, not judged
        return {"u": ("L2",), "T": ("L2",)}

    def _solve(self, case):
        import skfem
        from skfem.helpers import dot, grad

        problem, mms, grid = case.problem, case.mms, case.grid
        (name,) = problem.field_names
        if problem.names("parameters") and "k" in problem.names("parameters"):
            k_probe = mms.parameter("k", np.array([0.3, 0.7]), np.array([0.6, 0.2]))
            if not np.allclose(k_probe, k_probe[0]):
                raise SolverError("FEMPoisson solves a constant coefficient k; this problem's k varies")
            k = float(k_probe[0])
        else:
            k = 1.0
        xs = np.linspace(grid.lower[0], grid.upper[0], grid.cells[0] + 1)
        ys = np.linspace(grid.lower[1], grid.upper[1], grid.cells[1] + 1)
        mesh = skfem.MeshTri.init_tensor(xs, ys)
        if self.perturb:
            mesh = _perturbed(mesh, grid, self.perturb)
        element = skfem.ElementTriP1() if self.degree == 1 else skfem.ElementTriP2()
        # two orders above the stiffness integrand, so quadrature error stays below the discretization error
        basis = skfem.Basis(mesh, element, intorder=2 * self.degree + 2)

        @skfem.BilinearForm
        def stiffness(u, v, w):
            return k * dot(grad(u), grad(v))

        @skfem.LinearForm
        def load(v, w):
            return mms.source(name, w.x[0], w.x[1]) * v

        A = stiffness.assemble(basis)
        b = load.assemble(basis)
        dirichlet = []
        for side in _SIDES:
            axis, at = (0 if side[0] == "x" else 1), (grid.lower if side.endswith("min") else grid.upper)
            facets = mesh.facets_satisfying(lambda x, a=axis, c=at[axis]: np.isclose(x[a], c))
            if problem.boundaries[(name, side)] == "dirichlet":
                dirichlet.append(facets)
                continue
            sign = -1.0 if self.mistake == "neumann-sign" else 1.0
            fb = skfem.FacetBasis(mesh, element, facets=facets, intorder=2 * self.degree + 2)

            @skfem.LinearForm
            def flux(v, w, s=side):
                return sign * mms.normal_flux(name, s, w.x[0], w.x[1]) * v

            b = b + flux.assemble(fb)
        if not dirichlet:
            raise SolverError("FEMPoisson needs a Dirichlet side (pure Neumann leaves a constant free)")
        dofs = basis.get_dofs(np.concatenate(dirichlet)).all()
        u = np.zeros(basis.N)
        u[dofs] = mms.exact(name, *basis.doflocs[:, dofs])
        u = skfem.solve(*skfem.condense(A, b, x=u, D=dofs))
        field = basis.interpolate(u)
        x = basis.mapping.F(basis.X)        # quadrature points, (2, triangles, points per triangle)
        return Solution(values={name: np.asarray(field)}, gradients={name: (field.grad[0], field.grad[1])},
                        points=(x[0], x[1]), weights=basis.dx, h=_representative_size(mesh), unknowns=basis.N)


def _representative_size(mesh):
    # Roache 1998, Verification and Validation in Computational Science and Engineering: h = (V / N)**(1/d);
    # the factor 2 makes it the cell width of a structured mesh cut into two triangles per square
    p = mesh.p[:, mesh.t]
    area = 0.5 * np.abs((p[0, 1] - p[0, 0]) * (p[1, 2] - p[1, 0]) - (p[0, 2] - p[0, 0]) * (p[1, 1] - p[1, 0]))
    return float(np.sqrt(2 * area.sum() / mesh.t.shape[1]))


def _perturbed(mesh, grid, amount):
    import skfem
    rng = np.random.default_rng(1000 + grid.level)
    interior = np.setdiff1d(np.arange(mesh.p.shape[1]), mesh.boundary_nodes())
    p = mesh.p.copy()
    for a in range(2):
        p[a, interior] += amount * grid.spacing[a] * rng.uniform(-1, 1, interior.size)
    return skfem.MeshTri(p, mesh.t)


p1 = FEMPoisson(degree=1)
p2 = FEMPoisson(degree=2)
p1_perturbed = FEMPoisson(degree=1, perturb=0.2)
p2_perturbed = FEMPoisson(degree=2, perturb=0.2)
