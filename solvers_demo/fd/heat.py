"""Transient diffusion ``rho_c du/dt - div(k grad u) = f`` by the theta method.

Space: the node-centred conservative stencil of :mod:`._assembly` (second
order). Time: implicit Euler (``theta = 1``, first order) or Crank-Nicolson
(``theta = 1/2``, second order), both unconditionally stable for this
equation (LeVeque 2007, Finite Difference Methods for ODEs and PDEs,
sections 9.1-9.3). Sources and boundary data enter at the same time
levels as the operator; Dirichlet values and one-sided Neumann rows are
imposed at the new level.
"""

from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution, SolverError

from ..base import DemoSolver, node_weights
from ._assembly import assemble_diffusion
from ._quantities import node_quantities
from .diffusion import NEUMANN

__all__ = ["FDHeat", "SCHEMES"]

SCHEMES = {"implicit-euler": (1.0, 1), "crank-nicolson": (0.5, 2)}


def _depends_on_time(problem, name):
    return problem.t is not None and str(problem.t) in problem.parameter_symbols(name)


@dataclass(frozen=True)
class FDHeat(DemoSolver):
    """Theta-method time stepping of transient diffusion in 1 to 3 dimensions.

    Parameters
    ----------
    scheme : {"implicit-euler", "crank-nicolson"}
    neumann : {"flux", "one-sided", "one-sided-3pt"}
        Neumann boundary treatment (see :class:`~solvers_demo.fd.diffusion.FDDiffusion`).
    mistake : str
        A seeded mistake from ``FDHeat.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("diffusion", "poisson")
    steady: ClassVar[bool] = False
    unsteady: ClassVar[bool] = True
    MISTAKES: ClassVar[dict] = {
        "source-new-level": "Crank-Nicolson takes sources and boundary fluxes at the new level only "
                            "(time levels mixed)",
        "dirichlet-lagged": "Dirichlet values at the new level are taken from the old time",
        "one-step-short": "the time loop stops one step before the end time (off by one)",
        "capacity-missing": "the heat capacity rho_c is left out of the storage term",
    }
    CHOICES: ClassVar[dict] = {"scheme": tuple(SCHEMES), "neumann": NEUMANN}

    scheme: str = "crank-nicolson"
    neumann: str = "flux"

    @property
    def formal_order(self):
        return 1 if self.neumann == "one-sided" else 2

    @property
    def time_order(self):
        return SCHEMES[self.scheme][1]

    def _solve(self, case):
        grid, mms = case.grid, case.mms
        field = case.problem.field_names[0]
        theta = SCHEMES[self.scheme][0]
        dt = grid.dt
        steps = grid.steps - (1 if self.mistake == "one-step-short" else 0)
        pts = np.meshgrid(*[grid.nodes(a) for a in range(grid.dim)], indexing="ij", sparse=True)
        shape = tuple(n + 1 for n in grid.cells)
        u = np.broadcast_to(mms.initial(field, *pts), shape).ravel().copy()
        has_capacity = "rho_c" in case.problem.names("parameters") and self.mistake != "capacity-missing"
        t = grid.t_start
        old = assemble_diffusion(case, t=t, neumann=self.neumann)
        if not old.dirichlet.any() and not (old.mass == 0).any():
            raise SolverError(f"{self.name}: every side of problem {case.problem.name} is Neumann; the "
                              "demo solver needs at least one Dirichlet side")
        # coefficients fixed in time: one matrix and one factorisation for every step
        static = not any(_depends_on_time(case.problem, name) for name in ("k", "rho_c"))
        factor = None
        for n in range(steps):
            t_new = grid.t_start + (n + 1) * dt
            new = assemble_diffusion(case, t=t_new, neumann=self.neumann, with_matrix=not static)
            if static:
                new = replace(new, K=old.K)
            if self.mistake == "source-new-level":
                load = new.load
            else:
                load = theta * new.load + (1 - theta) * old.load
            algebraic = (new.mass == 0) & ~new.dirichlet
            free = ~new.dirichlet
            if factor is None or not static:
                rho_c = (np.broadcast_to(mms.parameter("rho_c", *pts, t=t + theta * dt), shape).ravel()
                         if has_capacity else 1.0)
                M = new.mass * rho_c / dt
                lhs = sps.diags(M) + theta * new.K
                if algebraic.any():  # impose algebraic rows fully at the new level
                    lhs = sps.diags((~algebraic).astype(float)) @ lhs + sps.diags(algebraic.astype(float)) @ new.K
                lhs = lhs.tocsr()
                coupling = lhs[free][:, ~free]
                factor = spla.splu(lhs[free][:, free].tocsc())
            rhs = M * u - (1 - theta) * (old.K @ u) + load
            if algebraic.any():
                rhs = np.where(algebraic, new.load, rhs)
            values = old.values if self.mistake == "dirichlet-lagged" else new.values
            u_new = np.where(new.dirichlet, values, 0.0)
            u_new[free] = factor.solve(rhs[free] - coupling @ u_new[~free])
            u, old, t = u_new, new, t_new
        axes = tuple(grid.nodes(a).reshape([-1 if b == a else 1 for b in range(grid.dim)])
                     for a in range(grid.dim))
        values = {field: u.reshape(shape)}
        return Solution(values=values, points=axes, weights=node_weights(grid), time=grid.t_end,
                        info={"steps": steps}, quantities=node_quantities(case, values, t=grid.t_end))
