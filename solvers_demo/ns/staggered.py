"""Steady incompressible Navier-Stokes in 2-D on a staggered (MAC) grid, solved by Newton's method.

``u . grad u + grad p / rho - nu lap u = f`` and ``div u = f_p`` (the
operator ``navier_stokes``). Central differences in the advective form
(the operator's form, which matters here because the manufactured velocity
need not be divergence-free), pressure differences across the faces, the
divergence per cell: second order in velocity and pressure (Harlow & Welch
1965, Phys. Fluids 8:2182; Ferziger & Peric 2002, Computational Methods
for Fluid Dynamics, section 7.5). Velocity data on every wall.

The pressure is fixed up to a constant: its area-weighted mean is set to
the midpoint-rule mean of the exact pressure. The mass sources are shifted
by the constant that makes their sum match the boundary inflow (an O(h**2)
mismatch of the midpoint rule), so the discrete system is compatible. Newton's method with the exact Jacobian converges in a
handful of iterations (reported in ``Solution.info``).

Values are reported at cell centres (velocities averaged from the two
faces, second order) or, with ``report="u"``, ``"v"`` or ``"p"``, one field
at its own staggered location.

Measured on cavity-flow (8 to 128 cells): u and v second order in every
norm; p second order in L1 and L2, while its largest error sits in a
corner and grows relative to h**2 by about the same amount per halving,
h**2 log(1/h)-like, so the Linf order approaches two only slowly (1.79,
1.79, 1.84); the same with linear, quadratic or cubic ghost rows, so it is
not the wall treatment. (Max-norm bounds for discrete Stokes pressures
commonly carry such logarithmic factors; from memory.)
"""

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution, SolverError

from ..base import DemoSolver
from ._mac import Affine, MacGrid

__all__ = ["StaggeredNS", "REPORTS"]

REPORTS = ("centres", "u", "v", "p")


@dataclass(frozen=True)
class StaggeredNS(DemoSolver):
    """MAC finite differences and Newton's method for steady 2-D incompressible flow.

    Parameters
    ----------
    report : {"centres", "u", "v", "p"}
        Where values are reported: all fields at cell centres, or one field at its own location.
    tol, max_iter : float, int
        Newton stops when the update is below ``tol`` times the velocity scale.
    mistake : str
        A seeded mistake from ``StaggeredNS.MISTAKES``.

    Notes
    -----
    ``judged_norms``: p is judged in L1 and L2 only, since its corner error
    makes the Linf order approach two only slowly (see the module notes);
    u and v are judged in every norm.
    """

    operators: ClassVar[tuple] = ("navier_stokes",)
    dims: ClassVar[tuple] = (2,)
    MISTAKES: ClassVar[dict] = {
        "pressure-gradient-halved": "the u-momentum pressure difference divided by 2h, a centred-difference "
                                    "habit that is wrong on a staggered grid",
        "convection-term-missing": "the v du/dy term of the u-momentum equation is left out",
        "wall-ghost-value": "the tangential wall velocity copied to the ghost node, half a cell off the wall",
        "source-at-centre": "the momentum sources evaluated at cell centres instead of the faces",
    }
    CHOICES: ClassVar[dict] = {"report": REPORTS}
    judged_norms: ClassVar[dict] = {"p": ("L1", "L2")}  # Linf of p nears 2 slowly: see the module notes

    report: str = "centres"
    tol: float = 1e-11
    max_iter: int = 30

    @property
    def formal_order(self):
        return 2

    @property
    def not_computed(self):
        """Fields left out of the Solution: all but the one reported at its own location."""
        return () if self.report == "centres" else tuple(f for f in ("u", "v", "p") if f != self.report)

    def _operators(self, g):
        """Affine differences of u and v at their own interior points, in the unknowns X = [U, V, P]."""
        n = g.nu_ + g.nv_ + g.np_
        EU = sps.eye(g.nu_, n, 0, format="csr")
        EV = sps.eye(g.nv_, n, g.nu_, format="csr")
        EP = sps.eye(g.np_, n, g.nu_ + g.nv_, format="csr")
        zero_u, zero_v = np.zeros(g.nu_), np.zeros(g.nv_)
        u_ext = g.u_ext @ Affine(EU, zero_u)
        v_ext = g.v_ext @ Affine(EV, zero_v)
        u_full = g.u_full @ Affine(EU, zero_u)
        v_full = g.v_full @ Affine(EV, zero_v)
        ush, vsh = (g.nx + 1, g.ny + 2), (g.nx + 2, g.ny + 1)
        up, vp = g.u_points(), g.v_points()

        def stencil(ext, shape, pts, shift):
            return Affine(g.pick(shape, pts, shift), np.zeros(pts[0].size)) @ ext

        ops = {}
        for name, ext, shape, pts in (("u", u_ext, ush, up), ("v", v_ext, vsh, vp)):
            c = stencil(ext, shape, pts, (0, 0))
            e, w = stencil(ext, shape, pts, (1, 0)), stencil(ext, shape, pts, (-1, 0))
            nn, s = stencil(ext, shape, pts, (0, 1)), stencil(ext, shape, pts, (0, -1))
            ops[name] = c
            ops[f"d{name}dx"] = (e - w).scaled(0.5 / g.hx)
            ops[f"d{name}dy"] = (nn - s).scaled(0.5 / g.hy)
            ops[f"lap{name}"] = (e + w - c.scaled(2.0)).scaled(1 / g.hx ** 2) + \
                (nn + s - c.scaled(2.0)).scaled(1 / g.hy ** 2)
        # v at u points and u at v points: averages of the four neighbours
        i, j = up[0], up[1] - 1                      # u face (i, j+1/2) -> v faces (i-1|i, j|j+1)
        vfull_shape = (g.nx, g.ny + 1)
        picks = [np.ravel_multi_index((i + di, j + dj), vfull_shape) for di in (-1, 0) for dj in (0, 1)]
        avg = sum(sps.csr_matrix((np.full(i.size, 0.25), (np.arange(i.size), p)), shape=(i.size, g.nx * (g.ny + 1)))
                  for p in picks)
        ops["v_at_u"] = Affine(avg.tocsr(), np.zeros(i.size)) @ v_full
        m, j2 = vp[0] - 1, vp[1]                    # v face (m+1/2, j) -> u faces (m|m+1, j-1|j)
        ufull_shape = (g.nx + 1, g.ny)
        picks = [np.ravel_multi_index((m + di, j2 + dj), ufull_shape) for di in (0, 1) for dj in (-1, 0)]
        avg = sum(sps.csr_matrix((np.full(m.size, 0.25), (np.arange(m.size), p)), shape=(m.size, (g.nx + 1) * g.ny))
                  for p in picks)
        ops["u_at_v"] = Affine(avg.tocsr(), np.zeros(m.size)) @ u_full
        # pressure differences across faces and the divergence per cell
        P = np.arange(g.np_).reshape(g.nx, g.ny)
        hx = 2 * g.hx if self.mistake == "pressure-gradient-halved" else g.hx
        dpx = (sps.csr_matrix((np.ones(i.size), (np.arange(i.size), P[i, j])), shape=(i.size, g.np_))
               - sps.csr_matrix((np.ones(i.size), (np.arange(i.size), P[i - 1, j])), shape=(i.size, g.np_))) / hx
        ops["dpdx"] = Affine((dpx @ EP).tocsr(), np.zeros(i.size))
        dpy = (sps.csr_matrix((np.ones(m.size), (np.arange(m.size), P[m, j2])), shape=(m.size, g.np_))
               - sps.csr_matrix((np.ones(m.size), (np.arange(m.size), P[m, j2 - 1])), shape=(m.size, g.np_))) / g.hy
        ops["dpdy"] = Affine((dpy @ EP).tocsr(), np.zeros(m.size))
        ci, cj = np.meshgrid(np.arange(g.nx), np.arange(g.ny), indexing="ij")
        ci, cj = ci.ravel(), cj.ravel()

        def pick_full(full, shape, a, b):
            return Affine(sps.csr_matrix((np.ones(a.size), (np.arange(a.size), np.ravel_multi_index((a, b), shape))),
                                         shape=(a.size, int(np.prod(shape)))), np.zeros(a.size)) @ full

        ops["div"] = (pick_full(u_full, ufull_shape, ci + 1, cj) - pick_full(u_full, ufull_shape, ci, cj)).scaled(
            1 / g.hx) + (pick_full(v_full, vfull_shape, ci, cj + 1) - pick_full(v_full, vfull_shape, ci, cj)).scaled(
            1 / g.hy)
        ops["p"] = Affine(EP, np.zeros(g.np_))
        return ops

    def _solve(self, case):
        mms, problem = case.mms, case.problem
        for name in ("u", "v"):
            for side in ("x_min", "x_max", "y_min", "y_max"):
                if mms.boundary(name, side) != "dirichlet":
                    raise SolverError(f"{self.name}: side {side} of problem {problem.name} gives {name} as "
                                      f"{mms.boundary(name, side)}; this demo solver takes velocity data on every wall")
        # wall data is the exact field on the walls (boundary_value checks the side name only)
        g = MacGrid(case.grid, lambda x, y: mms.boundary_value("u", "x_min", x, y),
                    lambda x, y: mms.boundary_value("v", "x_min", x, y),
                    ghost="wall-value" if self.mistake == "wall-ghost-value" else "quadratic")
        ops = self._operators(g)
        up, vp = g.u_points(), g.v_points()
        xu, yu = g.xn[up[0]], g.yc[up[1] - 1]
        xv, yv = g.xc[vp[0] - 1], g.yn[vp[1]]
        if self.mistake == "source-at-centre":
            xu, yv = xu - 0.5 * g.hx, yv - 0.5 * g.hy
        fu = np.broadcast_to(mms.source("u", xu, yu), xu.shape)
        fv = np.broadcast_to(mms.source("v", xv, yv), xv.shape)
        X2, Y2 = np.meshgrid(g.xc, g.yc, indexing="ij")
        fp = np.broadcast_to(mms.source("p", X2, Y2), X2.shape).ravel()
        rho = float(np.mean(mms.parameter("rho", X2, Y2)))
        nu_u = np.broadcast_to(mms.parameter("nu", xu, yu), xu.shape)
        nu_v = np.broadcast_to(mms.parameter("nu", xv, yv), xv.shape)
        p_mean = float(np.mean(mms.exact("p", X2, Y2)))      # gauge: midpoint-rule mean of the exact p
        area = np.full(g.np_, g.hx * g.hy)
        n = g.nu_ + g.nv_ + g.np_
        with_dvdy = self.mistake != "convection-term-missing"

        def residual_and_jacobian(X):
            u, dudx, dudy = ops["u"](X), ops["dudx"](X), ops["dudy"](X)
            v, dvdx, dvdy = ops["v"](X), ops["dvdx"](X), ops["dvdy"](X)
            vu, uv = ops["v_at_u"](X), ops["u_at_v"](X)
            ru = u * dudx + (vu * dudy if with_dvdy else 0) + ops["dpdx"](X) / rho - nu_u * ops["lapu"](X) - fu
            rv = uv * dvdx + v * dvdy + ops["dpdy"](X) / rho - nu_v * ops["lapv"](X) - fv
            rp = ops["div"](X) - fp
            D = sps.diags
            Ju = D(dudx) @ ops["u"].M + D(u) @ ops["dudx"].M + ops["dpdx"].M / rho - D(nu_u) @ ops["lapu"].M
            if with_dvdy:
                Ju = Ju + D(dudy) @ ops["v_at_u"].M + D(vu) @ ops["dudy"].M
            Jv = D(dvdx) @ ops["u_at_v"].M + D(uv) @ ops["dvdx"].M + D(dvdy) @ ops["v"].M + D(v) @ ops["dvdy"].M \
                + ops["dpdy"].M / rho - D(nu_v) @ ops["lapv"].M
            return np.concatenate([ru, rv, rp]), sps.vstack([Ju, Jv, ops["div"].M]).tocsr()

        # The summed mass equations telescope to the boundary inflow; shift the mass sources by the
        # (O(h**2)) constant that makes them agree, then one mass equation is implied by the others and
        # is replaced by fixing the pressure change in cell 0. The pressure level is set at the end.
        shift = (np.sum(ops["div"].m) - np.sum(fp)) / g.np_
        fp = fp + shift
        pin = g.nu_ + g.nv_
        keep = np.ones(n)
        keep[pin] = 0.0
        pin_row = sps.csr_matrix(([1.0], ([pin], [pin])), shape=(n, n))
        X = np.zeros(n)
        X[pin:] = p_mean
        scale = max(np.max(np.abs(g.u_full.m)), np.max(np.abs(g.v_full.m)), 1e-300)
        for it in range(1, self.max_iter + 1):
            r, J = residual_and_jacobian(X)
            A = (sps.diags(keep) @ J + pin_row).tocsc()
            dx = spla.spsolve(A, -keep * r)
            X += dx
            if not np.all(np.isfinite(dx)):
                break
            if np.max(np.abs(dx)) <= self.tol * scale:
                break
        else:
            raise SolverError(f"{self.name}: Newton's method did not converge in {self.max_iter} iterations "
                              f"(last update {np.max(np.abs(dx)):.1e}); use more cells or raise max_iter")
        if not np.all(np.isfinite(X)):
            raise SolverError(f"{self.name}: the Newton iteration broke down (singular Jacobian)")
        X[pin:] += p_mean - np.sum(area * X[pin:]) / area.sum()
        return self._report(g, ops, X, {"newton_iterations": it, "mass_source_shift": float(shift)})

    def _report(self, g, ops, X, info):
        uf = (g.u_full @ Affine(sps.eye(g.nu_, X.size, 0, format="csr"), np.zeros(g.nu_)))(X).reshape(g.nx + 1, g.ny)
        vf = (g.v_full @ Affine(sps.eye(g.nv_, X.size, g.nu_, format="csr"), np.zeros(g.nv_)))(X).reshape(g.nx, g.ny + 1)
        p = X[g.nu_ + g.nv_:].reshape(g.nx, g.ny)
        cell = g.hx * g.hy
        if self.report == "centres":
            return Solution(values={"u": 0.5 * (uf[1:] + uf[:-1]), "v": 0.5 * (vf[:, 1:] + vf[:, :-1]), "p": p},
                            points=(g.xc[:, None], g.yc[None, :]), weights=cell, info=info)
        if self.report == "p":
            return Solution(values={"p": p}, points=(g.xc[:, None], g.yc[None, :]), weights=cell, info=info)
        if self.report == "u":
            w = np.full((g.nx + 1, 1), cell)
            w[[0, -1]] *= 0.5
            return Solution(values={"u": uf}, points=(g.xn[:, None], g.yc[None, :]), weights=w, info=info)
        w = np.full((1, g.ny + 1), cell)
        w[:, [0, -1]] *= 0.5
        return Solution(values={"v": vf}, points=(g.xc[:, None], g.yn[None, :]), weights=w, info=info)
