"""Cell-centred finite volumes for steady advection ``a . grad u = f`` on 2-D quadrilateral meshes.

The face flux is ``(a . S) u_f`` with ``u_f`` from the upwind cell:

* ``"first-order"``: ``u_f = u_P`` (donor cell), first order;
* ``"unlimited"``: ``u_f = u_P + g_P . (x_f - x_P)`` with least-squares
  gradients, second order;
* ``"limited"``: the same with a limiter that keeps the reconstruction
  within the neighbours' range (Barth & Jespersen 1989, AIAA 89-0366), here
  in the differentiable form of Venkatakrishnan (1995, J. Comput. Phys.
  118:120-130) with no threshold (``K = 0``), so that the iterations settle
  instead of cycling. At smooth extrema it clips the slope to zero, so the
  scheme is locally first order there: on smooth meshes L1 stays near second
  order while Linf drops to one. On irregular meshes the limiter also acts
  in smooth regions, and L1 falls below two as well (Berger, Aftosmis &
  Murman 2005, Analysis of slope limiters on irregular grids, AIAA
  2005-0490).

Inflow faces take the boundary data, outflow faces the reconstructed cell
value. The limited scheme is nonlinear; it is solved by defect correction
with the first-order operator, which converges for these smooth problems.
Values are reported at centroids with cell areas as weights.
"""

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution, SolverError

from ..base import DemoSolver
from ._gradients import least_squares_gradient
from .mesh import FAMILIES, quad_mesh

__all__ = ["FVAdvection", "RECONSTRUCTIONS"]

RECONSTRUCTIONS = {"first-order": 1, "unlimited": 2, "limited": 2}


@dataclass(frozen=True)
class FVAdvection(DemoSolver):
    """Upwind finite volumes with optional limited linear reconstruction.

    Parameters
    ----------
    grid : {"uniform", "stretched", "skewed", "perturbed"}
        Mesh family; ``case.options["grid"]`` overrides it.
    reconstruction : {"first-order", "unlimited", "limited"}
    tol, max_iter : float, int
        Defect-correction stopping rule (update below ``tol`` times the solution's size).
    mistake : str
        A seeded mistake from ``FVAdvection.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("advection_diffusion",)
    dims: ClassVar[tuple] = (2,)
    MISTAKES: ClassVar[dict] = {
        "reconstruction-half": "the reconstruction extrapolates only half way from the centroid to the face",
        "inflow-at-centroid": "inflow data evaluated at the cell centroid instead of the face midpoint",
    }
    CHOICES: ClassVar[dict] = {"grid": FAMILIES, "reconstruction": tuple(RECONSTRUCTIONS)}

    grid: str = "uniform"
    seed: int = None     # another table of random displacements for grid="perturbed"
    reconstruction: str = "limited"
    tol: float = 1e-12
    max_iter: int = 400

    @property
    def formal_order(self):
        return RECONSTRUCTIONS[self.reconstruction]

    def _solve(self, case):
        mms, problem = case.mms, case.problem
        field = problem.field_names[0]
        if problem.parameter_constant("k", 0.0) != 0.0:     # None when k varies
            raise SolverError(f"{self.name}: solves pure advection; problem {problem.name} has diffusion "
                              f"k = {problem.parameters['k']}; set k = 0 or use FDAdvectionDiffusion")
        mesh = quad_mesh(case.grid, self.grid, self.seed)
        n = mesh.n_cells
        xc, yc = mesh.centroids
        xcv = np.stack([xc, yc], axis=-1)
        f, b = mesh.faces, mesh.boundary_faces

        def velocity(points):
            return np.stack([np.broadcast_to(mms.parameter(c, points[:, 0], points[:, 1]), len(points))
                             for c in ("ax", "ay")], axis=-1)

        phi = np.sum(velocity(f["xf"]) * f["S"], axis=1)
        phib = np.sum(velocity(b["xf"]) * b["S"], axis=1)
        inflow = phib < 0
        where = b["xf"] if self.mistake != "inflow-at-centroid" else xcv[b["P"]]
        ub = np.zeros(len(b["P"]))
        for side in np.unique(b["side"]):
            m = b["side"] == side
            ub[m] = mms.boundary_value(field, str(side), where[m, 0], where[m, 1])
        # donor-cell operator: sum of outgoing (a.S) u_upwind
        up = np.where(phi >= 0, f["P"], f["N"])
        rows = np.concatenate([f["P"], f["N"], b["P"][~inflow]])
        cols = np.concatenate([up, up, b["P"][~inflow]])
        vals = np.concatenate([phi, -phi, phib[~inflow]])
        U = sps.csr_matrix((vals, (rows, cols)), shape=(n, n)).tocsc()
        rhs = np.broadcast_to(mms.source(field, xc, yc), n) * mesh.areas
        np.subtract.at(rhs, b["P"][inflow], phib[inflow] * ub[inflow])
        lu = spla.splu(U)
        u = lu.solve(rhs)
        if self.reconstruction == "first-order":
            return Solution(values={field: u}, points=(xc, yc), weights=mesh.areas,
                            info={"grid": self.grid, "irregular": self.grid == "perturbed"})
        grad = least_squares_gradient(mesh, inflow, ub)
        reach = 0.5 if self.mistake == "reconstruction-half" else 1.0
        # face and cell displacement for the upwind reconstruction
        dxf = f["xf"] - xcv[up]
        outb = ~inflow
        dxb = b["xf"][outb] - xcv[b["P"][outb]]
        scale = max(np.max(np.abs(u)), 1e-300)
        for it in range(1, self.max_iter + 1):
            gx, gy = grad(u)
            psi = self._limiter(mesh, u, gx, gy, inflow, ub) if self.reconstruction == "limited" else 1.0
            sx, sy = psi * gx, psi * gy
            corr_f = phi * reach * (sx[up] * dxf[:, 0] + sy[up] * dxf[:, 1])
            corr_b = phib[outb] * reach * (sx[b["P"][outb]] * dxb[:, 0] + sy[b["P"][outb]] * dxb[:, 1])
            defect = np.zeros(n)
            np.add.at(defect, f["P"], corr_f)
            np.subtract.at(defect, f["N"], corr_f)
            np.add.at(defect, b["P"][outb], corr_b)
            u_new = lu.solve(rhs - defect)
            change = np.max(np.abs(u_new - u))
            u = u_new
            if change <= self.tol * scale:
                break
        else:
            raise SolverError(f"{self.name}: defect correction did not converge in {self.max_iter} iterations "
                              f"(last change {change:.1e}); raise max_iter or use reconstruction='unlimited'")
        return Solution(values={field: u}, points=(xc, yc), weights=mesh.areas,
                        info={"grid": self.grid, "iterations": it, "irregular": self.grid == "perturbed"})

    @staticmethod
    def _limiter(mesh, u, gx, gy, inflow, ub):
        """Limiter factor per cell: Venkatakrishnan's smooth function with no threshold (K = 0)."""
        f, b = mesh.faces, mesh.boundary_faces
        xc, yc = mesh.centroids
        umax, umin = u.copy(), u.copy()
        np.maximum.at(umax, f["P"], u[f["N"]])
        np.maximum.at(umax, f["N"], u[f["P"]])
        np.minimum.at(umin, f["P"], u[f["N"]])
        np.minimum.at(umin, f["N"], u[f["P"]])
        np.maximum.at(umax, b["P"][inflow], ub[inflow])
        np.minimum.at(umin, b["P"][inflow], ub[inflow])
        owners = np.concatenate([f["P"], f["N"], b["P"]])
        xf = np.concatenate([f["xf"], f["xf"], b["xf"]])
        delta = gx[owners] * (xf[:, 0] - xc[owners]) + gy[owners] * (xf[:, 1] - yc[owners])
        room = np.where(delta > 0, umax[owners] - u[owners], umin[owners] - u[owners])
        num = room * room + 2.0 * room * delta
        den = room * room + room * delta + 2.0 * delta * delta
        with np.errstate(divide="ignore", invalid="ignore"):
            value = np.where(den > 0, num / den, 1.0)
        psi = np.ones_like(u)
        np.minimum.at(psi, owners, np.minimum(1.0, value))
        return psi
