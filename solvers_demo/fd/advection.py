"""Steady advection-diffusion ``a . grad u - div(k grad u) = f`` by node-centred finite differences.

Diffusion: the conservative stencil of :mod:`._assembly`. Convection, per
direction, with the velocity taken at the node:

* ``"upwind"``: first-order one-sided difference from the upstream side;
* ``"central"``: second-order centred difference;
* ``"upwind2"``: second-order upwind-biased ``(3 u_i - 4 u_(i-1) + u_(i-2)) / 2h``,
  centred at a node with only one upstream neighbour.

Orders from the truncation errors (LeVeque 2007, Finite Difference Methods
for ODEs and PDEs, section 10.4; Ferziger & Peric 2002,
Computational Methods for Fluid Dynamics, section 3.4). Dirichlet data on
every side.
"""

from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
import scipy.sparse as sps

from mmsverify import Solution, SolverError

from ..base import DemoSolver, node_weights
from ._assembly import SIDES, assemble_diffusion
from ._quantities import node_quantities
from .linear import solve_nodes

__all__ = ["FDAdvectionDiffusion", "CONVECTION"]

CONVECTION = {"upwind": 1, "central": 2, "upwind2": 2}
_VELOCITY = ("ax", "ay", "az")


@dataclass(frozen=True)
class FDAdvectionDiffusion(DemoSolver):
    """Node-centred finite differences for steady advection-diffusion in 1 to 3 dimensions.

    Parameters
    ----------
    convection : {"upwind", "central", "upwind2"}
    mistake : str
        A seeded mistake from ``FDAdvectionDiffusion.MISTAKES``.
    """

    operators: ClassVar[tuple] = ("advection_diffusion",)
    MISTAKES: ClassVar[dict] = {
        "first-order-convection": "the convective term by first-order upwinding in a second-order solver",
        "velocity-swapped": "the x velocity is used in the y direction and the other way round",
        "central-factor": "the centred difference lacks its factor 1/2",
    }
    CHOICES: ClassVar[dict] = {"convection": tuple(CONVECTION)}

    convection: str = "central"

    @property
    def formal_order(self):
        return CONVECTION[self.convection]

    def _convection_matrix(self, case, volume):
        grid, mms = case.grid, case.mms
        dim = grid.dim
        shape = tuple(n + 1 for n in grid.cells)
        pts = np.meshgrid(*[grid.nodes(a) for a in range(dim)], indexing="ij", sparse=True)
        index = np.arange(int(np.prod(shape))).reshape(shape)
        scheme = "upwind" if self.mistake == "first-order-convection" else self.convection
        rows, cols, vals = [], [], []
        for a in range(dim):
            comp = _VELOCITY[a]
            if self.mistake == "velocity-swapped" and dim >= 2:
                comp = _VELOCITY[1 - a] if a < 2 else comp
            vel = np.broadcast_to(mms.parameter(comp, *pts), shape) * volume / grid.spacing[a]
            pos = np.indices(shape)[a]
            n = shape[a]
            stride = int(index.strides[a] // index.itemsize)
            inner = (pos > 0) & (pos < n - 1)
            i = index[inner]
            v = vel[inner]
            p = pos[inner]
            if scheme == "central":
                c = 1.0 if self.mistake == "central-factor" else 0.5
                rows += [i, i]
                cols += [i + stride, i - stride]
                vals += [c * v, -c * v]
            elif scheme == "upwind":
                up = np.where(v >= 0, -stride, stride)
                rows += [i, i]
                cols += [i, i + up]
                vals += [np.abs(v), -np.abs(v)]
            else:  # upwind2, centred where a second upstream node is missing
                up = np.where(v >= 0, -stride, stride)
                far = np.where(v >= 0, p >= 2, p <= n - 3)
                s = np.abs(v)
                rows += [i[far]] * 3 + [i[~far]] * 2
                cols += [i[far], (i + up)[far], (i + 2 * up)[far], (i + stride)[~far], (i - stride)[~far]]
                vals += [1.5 * s[far], -2.0 * s[far], 0.5 * s[far], 0.5 * v[~far], -0.5 * v[~far]]
        n_all = int(np.prod(shape))
        return sps.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                              shape=(n_all, n_all))

    def _solve(self, case):
        grid = case.grid
        field = case.problem.field_names[0]
        for a in range(grid.dim):
            for side in SIDES[a]:
                if case.mms.boundary(field, side) != "dirichlet":
                    raise SolverError(f"{self.name}: side {side} of problem {case.problem.name} is "
                                      f"{case.mms.boundary(field, side)}; this demo solver takes Dirichlet data only")
        system = assemble_diffusion(case)
        volume = system.mass.reshape(system.shape)
        C = self._convection_matrix(case, volume)
        free = (~system.dirichlet).astype(float)
        system = replace(system, K=(system.K + sps.diags(free) @ C).tocsr(), symmetric=False)
        u = solve_nodes(system, "direct", where=self.name)
        axes = tuple(grid.nodes(a).reshape([-1 if b == a else 1 for b in range(grid.dim)])
                     for a in range(grid.dim))
        values = {field: u.reshape(system.shape)}
        return Solution(values=values, points=axes, weights=node_weights(grid),
                        quantities=node_quantities(case, values))
