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
quasi-uniform but has no structure to hide behind. ``domain="disc"``
solves on the disc inscribed in the box instead (a curved boundary): each
boundary edge takes the kind of the box side its outward normal points to
most, and Neumann and Robin data come from the edges' own normals
(``mms.normal_flux_at``, ``mms.robin_data``).

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

__all__ = ["FEMPoisson", "p1", "p2", "p1_perturbed", "p2_perturbed", "p1_disc"]

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
    boundary_kinds: ClassVar[tuple] = ("dirichlet", "neumann", "robin")
    CHOICES: ClassVar[dict] = {"degree": (1, 2), "domain": ("box", "disc")}
    MISTAKES: ClassVar[dict] = {
        "neumann-sign": "the Neumann data enter with the wrong sign",
        "box-normal": "on a disc, the Neumann data use the normal of the nearest box side, not the curve's",
        "robin-sign": "the Robin coefficient enters the boundary integral with the wrong sign",
    }

    degree: int = 1
    perturb: float = 0.0
    domain: str = "box"

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
        k = _constant_k(mms)
        mesh = self._mesh(grid)
        element = skfem.ElementTriP1() if self.degree == 1 else skfem.ElementTriP2()
        # two orders above the stiffness integrand, so quadrature error stays below the discretization error
        order = 2 * self.degree + 2
        basis = skfem.Basis(mesh, element, intorder=order)

        @skfem.BilinearForm
        def stiffness(u, v, w):
            return k * dot(grad(u), grad(v))

        @skfem.LinearForm
        def load(v, w):
            return mms.source(name, w.x[0], w.x[1]) * v

        A = stiffness.assemble(basis)
        b = load.assemble(basis)
        kinds = _facet_kinds(mesh, grid, problem, name)
        for kind in ("neumann", "robin"):
            facets = mesh.boundary_facets()[kinds == kind]
            if facets.size == 0:
                continue
            fb = skfem.FacetBasis(mesh, element, facets=facets, intorder=order)
            points, normals = np.asarray(fb.global_coordinates()), np.asarray(fb.normals)
            if self.mistake == "box-normal":
                normals = _box_normals(normals)
            if kind == "neumann":
                sign = -1.0 if self.mistake == "neumann-sign" else 1.0
                data = sign * mms.normal_flux_at(name, points, normals)
            else:
                alpha = problem.robin[_robin_side(problem)]
                data = mms.robin_data(name, points, normals, alpha)
                used = -alpha if self.mistake == "robin-sign" else alpha

                @skfem.BilinearForm
                def convective(u, v, w, a=used):
                    return a * u * v

                A = A + convective.assemble(fb)
            b = b + skfem.LinearForm(lambda v, w, d=data: d * v).assemble(fb)
        dirichlet = mesh.boundary_facets()[kinds == "dirichlet"]
        if dirichlet.size == 0:
            raise SolverError("FEMPoisson needs a Dirichlet part of the boundary (pure Neumann leaves a "
                              "constant free)")
        dofs = basis.get_dofs(dirichlet).all()
        u = np.zeros(basis.N)
        u[dofs] = mms.exact(name, *basis.doflocs[:, dofs])
        u = skfem.solve(*skfem.condense(A, b, x=u, D=dofs))
        field = basis.interpolate(u)
        x = basis.mapping.F(basis.X)        # quadrature points, (2, triangles, points per triangle)
        return Solution(values={name: np.asarray(field)}, gradients={name: (field.grad[0], field.grad[1])},
                        points=(x[0], x[1]), weights=basis.dx, h=_representative_size(mesh), unknowns=basis.N,
                        mesh=f"disc, {mesh.t.shape[1]} triangles" if self.domain == "disc" else "")

    def _mesh(self, grid):
        import skfem
        if self.domain == "disc":
            # the disc inscribed in the box; n cells per direction -> about n triangles across it
            refinements = max(1, int(round(np.log2(grid.cells[0] / 2))))
            mesh = skfem.MeshTri.init_circle(refinements)
            centre = 0.5 * (np.asarray(grid.lower) + np.asarray(grid.upper))
            radius = 0.5 * min(u - lo for lo, u in zip(grid.lower, grid.upper))
            return skfem.MeshTri(centre[:, None] + radius * mesh.p, mesh.t)
        xs = np.linspace(grid.lower[0], grid.upper[0], grid.cells[0] + 1)
        ys = np.linspace(grid.lower[1], grid.upper[1], grid.cells[1] + 1)
        mesh = skfem.MeshTri.init_tensor(xs, ys)
        return _perturbed(mesh, grid, self.perturb) if self.perturb else mesh


def _constant_k(mms):
    if "k" not in mms.problem.names("parameters"):
        return 1.0
    probe = mms.parameter("k", np.array([0.3, 0.7]), np.array([0.6, 0.2]))
    if not np.allclose(probe, probe[0]):
        raise SolverError("FEMPoisson solves a constant coefficient k; this problem's k varies")
    return float(probe[0])


def _facet_kinds(mesh, grid, problem, name):
    """The boundary kind of every boundary facet: that of the box side its outward normal points to most."""
    facets = mesh.boundary_facets()
    p = mesh.p[:, mesh.facets[:, facets]]
    mid = p.mean(axis=1)
    tangent = p[:, 1] - p[:, 0]
    normal = np.array([tangent[1], -tangent[0]])
    # orient outwards: away from the centroid of the triangle the facet belongs to
    tri = mesh.f2t[0, facets]
    inside = mesh.p[:, mesh.t[:, tri]].mean(axis=1)
    normal *= np.where(((mid - inside) * normal).sum(axis=0) < 0, -1.0, 1.0)
    axis = np.argmax(np.abs(normal), axis=0)
    positive = normal[axis, np.arange(facets.size)] > 0
    sides = np.array([["x_min", "x_max"], ["y_min", "y_max"]])[axis, positive.astype(int)]
    return np.array([problem.boundaries[(name, s)] for s in sides])


def _robin_side(problem):
    (side, *more) = sorted(problem.robin)
    if more:
        raise SolverError("FEMPoisson takes one Robin coefficient; this problem gives one per side for "
                          f"{', '.join(sorted(problem.robin))}")
    return side


def _box_normals(n):
    """The seeded mistake: the unit normal of the box side nearest to each true normal."""
    axis = np.argmax(np.abs(n), axis=0)
    out = np.zeros_like(n)
    np.put_along_axis(out, axis[None], np.sign(np.take_along_axis(n, axis[None], axis=0)), axis=0)
    return out


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
p1_disc = FEMPoisson(degree=1, domain="disc")
p2_perturbed = FEMPoisson(degree=2, perturb=0.2)
