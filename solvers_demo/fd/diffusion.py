"""Steady diffusion ``-div(k grad u) = f`` (Poisson for ``k = 1``) by node-centred finite differences.

The conservative stencil takes ``k`` at face midpoints, so it is second
order for a smooth variable coefficient as well as for Poisson's equation
(LeVeque 2007, Finite Difference Methods for ODEs and PDEs, section 2.15).
Works in 1, 2 and 3 dimensions; the unknowns are the nodes, reported with
their trapezoid volumes, and with the problem's declared ``[quantities]``
(:mod:`._quantities`; every FD demo solver reports them the same way).
"""

from dataclasses import dataclass
from typing import ClassVar

from mmsverify import Solution, SolverError

from ..base import DemoSolver, node_weights
from ._assembly import MISTAKE_EFFECTS, assemble_diffusion
from ._quantities import node_quantities
from .linear import METHODS, solve_nodes

__all__ = ["FDDiffusion", "NEUMANN", "constant_coefficient"]

NEUMANN = ("flux", "one-sided", "one-sided-3pt")


def constant_coefficient(case, name="k"):
    """The operator parameter ``name`` as a float if it is constant (1 if absent), else None."""
    return case.problem.parameter_constant(name, 1.0)


@dataclass(frozen=True)
class FDDiffusion(DemoSolver):
    """Node-centred conservative finite differences for steady diffusion.

    Parameters
    ----------
    neumann : {"flux", "one-sided", "one-sided-3pt"}
        Neumann boundary treatment: half control volume (second order),
        one-sided two-point (first order), one-sided three-point (second).
    linear : {"auto", "direct", "amg", "dst"}
        Linear solver (see :mod:`solvers_demo.fd.linear`).
    mistake : str
        A seeded mistake from ``FDDiffusion.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("poisson", "diffusion")
    MISTAKES: ClassVar[dict] = dict(MISTAKE_EFFECTS, **{
        "neumann-one-sided": "Neumann sides by the first-order one-sided difference in a second-order solver",
    })
    CHOICES: ClassVar[dict] = {"neumann": NEUMANN, "linear": METHODS}

    neumann: str = "flux"
    linear: str = "auto"

    @property
    def formal_order(self):
        return 1 if self.neumann == "one-sided" else 2

    def _solve(self, case):
        neumann = "one-sided" if self.mistake == "neumann-one-sided" else self.neumann
        system = assemble_diffusion(case, neumann=neumann, mistake=self.mistake)
        if not system.dirichlet.any():
            raise SolverError(f"{self.name}: every side of problem {case.problem.name} is Neumann, so the "
                              "solution is fixed only up to a constant; make at least one side Dirichlet")
        kconst = constant_coefficient(case)
        u = solve_nodes(system, self.linear, grid=case.grid, kconst=kconst, where=self.name)
        grid = case.grid
        pts = tuple(grid.nodes(a).reshape([-1 if b == a else 1 for b in range(grid.dim)])
                    for a in range(grid.dim))
        values = {case.problem.field_names[0]: u.reshape(system.shape)}
        return Solution(values=values, points=pts, weights=node_weights(grid),
                        info={"unknowns": int((~system.dirichlet).sum())}, quantities=node_quantities(case, values))
