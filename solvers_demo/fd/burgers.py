"""Viscous Burgers ``u_t + (u**2/2)_x - nu u_xx = f`` in 1-D, solved by Newton's method.

Space: central differences of the conservative flux and of the viscous
term, second order. Time: Crank-Nicolson (second order) or implicit Euler
(first order); a steady problem is solved directly. Every time level is a
nonlinear system solved by Newton's method with the exact tridiagonal
Jacobian, so the iteration converges quadratically (Kelley 2003, Solving
Nonlinear Equations with Newton's Method, chapter 1); the iteration counts
are reported in ``Solution.info``. Dirichlet data on both ends.
"""

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution, SolverError

from ..base import DemoSolver, node_weights
from ._quantities import node_quantities

__all__ = ["FDBurgers"]

_SCHEMES = {"implicit-euler": (1.0, 1), "crank-nicolson": (0.5, 2)}


@dataclass(frozen=True)
class FDBurgers(DemoSolver):
    """Central differences and Newton's method for viscous Burgers.

    Parameters
    ----------
    scheme : {"crank-nicolson", "implicit-euler"}
        Time discretization (ignored for a steady problem).
    tol : float
        Newton stops when the update is below ``tol`` times the solution's size.
    max_iter : int
        Newton iterations allowed per time level before the run fails.
    mistake : str
        A seeded mistake from ``FDBurgers.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("burgers",)
    dims: ClassVar[tuple] = (1,)
    unsteady: ClassVar[bool] = True
    MISTAKES: ClassVar[dict] = {
        "jacobian-entry": "the convective Jacobian entries use u_i instead of u_(i+-1) (Newton slows, "
                          "the converged answer is unchanged)",
        "convection-lagged": "Crank-Nicolson takes the convective flux at the old level only (time levels mixed)",
        "viscous-weight": "the new-level viscous term gets weight 1 instead of 1/2",
    }
    CHOICES: ClassVar[dict] = {"scheme": tuple(_SCHEMES)}

    scheme: str = "crank-nicolson"
    tol: float = 1e-12
    max_iter: int = 50

    @property
    def formal_order(self):
        return 2

    @property
    def time_order(self):
        return _SCHEMES[self.scheme][1]

    # -- discrete operators ---------------------------------------------------
    def _convection(self, u, h):
        return (u[2:] ** 2 - u[:-2] ** 2) / (4 * h)

    def _viscous(self, u, h, nu):
        return -nu * (u[2:] - 2 * u[1:-1] + u[:-2]) / h ** 2

    def _jacobian(self, u, h, nu, wc, wv, shift):
        """Jacobian of ``shift*u + wc*C(u) + wv*V(u)`` w.r.t. the interior values."""
        m = u.size - 2
        if self.mistake == "jacobian-entry":
            up = lo = u[1:-1]                      # should be u[2:] and u[:-2]
            upper, lower = wc * up[:-1] / (2 * h), -wc * lo[1:] / (2 * h)
        else:
            upper, lower = wc * u[2:-1] / (2 * h), -wc * u[1:-2] / (2 * h)
        main = shift + 2 * wv * nu / h ** 2 * np.ones(m)
        upper = upper - wv * nu[:-1] / h ** 2
        lower = lower - wv * nu[1:] / h ** 2
        return sps.diags([lower, main, upper], [-1, 0, 1], format="csc")

    def _newton(self, u, residual, jacobian, where):
        scale = max(np.max(np.abs(u)), 1e-300)
        for it in range(1, self.max_iter + 1):
            du = spla.spsolve(jacobian(u), -residual(u))
            u = u.copy()
            u[1:-1] += du
            if np.max(np.abs(du)) <= self.tol * scale:
                return u, it
        raise SolverError(f"{where}: Newton's method did not converge in {self.max_iter} iterations "
                          f"(last update {np.max(np.abs(du)):.1e}); reduce the time step or raise max_iter")

    def _solve(self, case):
        grid, mms = case.grid, case.mms
        problem = case.problem
        field = problem.field_names[0]
        for side in ("x_min", "x_max"):
            if mms.boundary(field, side) != "dirichlet":
                raise SolverError(f"{self.name}: side {side} of problem {problem.name} is "
                                  f"{mms.boundary(field, side)}; this demo solver takes Dirichlet data only")
        x = grid.nodes(0)
        h = grid.spacing[0]
        tkw = (lambda t: {"t": t}) if problem.transient else (lambda t: {})
        nu = np.broadcast_to(mms.parameter("nu", x, **tkw(grid.t_start)), x.shape)[1:-1]
        if not problem.transient:
            f = mms.source(field, x)[1:-1]
            left = mms.boundary_value(field, "x_min", x[[0]])[0]
            right = mms.boundary_value(field, "x_max", x[[-1]])[0]
            u = left + (right - left) * (x - x[0]) / (x[-1] - x[0])   # first guess: the straight line
            u, it = self._newton(
                u, lambda v: self._convection(v, h) + self._viscous(v, h, nu) - f,
                lambda v: self._jacobian(v, h, nu, 1.0, 1.0, 0.0), self.name)
            return Solution(values={field: u}, points=(x,), weights=node_weights(grid),
                            info={"newton_iterations": it},
                            quantities=node_quantities(case, {field: u}, coefficient="nu"))
        theta = _SCHEMES[self.scheme][0]
        dt = grid.dt
        u = mms.initial(field, x)
        t = grid.t_start
        f_old = mms.source(field, x, t=t)[1:-1]
        iterations = []
        for n in range(grid.steps):
            t_new = grid.t_start + (n + 1) * dt
            f_new = mms.source(field, x, t=t_new)[1:-1]
            c_old, v_old = self._convection(u, h), self._viscous(u, h, nu)
            wc = 0.0 if self.mistake == "convection-lagged" else theta
            wv = 1.0 if self.mistake == "viscous-weight" else theta
            c_fixed = (1 - theta) * c_old + (theta * c_old if self.mistake == "convection-lagged" else 0.0)
            known = -u[1:-1] / dt + c_fixed + (1 - theta) * v_old - theta * f_new - (1 - theta) * f_old
            guess = u.copy()
            guess[0] = mms.boundary_value(field, "x_min", x[[0]], t=t_new)[0]
            guess[-1] = mms.boundary_value(field, "x_max", x[[-1]], t=t_new)[0]
            where = f"{self.name}, step {n + 1} of {grid.steps}"

            def residual(v):
                return v[1:-1] / dt + wc * self._convection(v, h) + wv * self._viscous(v, h, nu) + known

            u, it = self._newton(guess, residual,
                                 lambda v: self._jacobian(v, h, nu, wc, wv, 1.0 / dt), where)
            iterations.append(it)
            f_old, t = f_new, t_new
        return Solution(values={field: u}, points=(x,), weights=node_weights(grid), time=grid.t_end,
                        info={"newton_iterations": int(np.sum(iterations)),
                              "newton_per_step": float(np.mean(iterations))},
                        quantities=node_quantities(case, {field: u}, t=grid.t_end, coefficient="nu"))
