"""Node-centred finite differences for ``-lap u = f`` in 1, 2 or 3 dimensions.

The standard 3/5/7-point stencil has truncation error ``(h**2/12) sum u_xxxx``
(second order; LeVeque 2007, Finite Difference Methods for ODEs and PDEs,
section 3.2). Dirichlet sides take the exact boundary value; Neumann sides
close a half control volume with the given slope, which equals the centred
ghost-node elimination and keeps second order. ``solve_first_order_neumann``
replaces that by a one-sided first-order difference, a common mistake that
lowers the global order to one.

Both are instances of :class:`~solvers_demo.fd.diffusion.FDDiffusion`; the
linear solver is chosen automatically (sine transform, sparse LU or
algebraic multigrid, see :mod:`solvers_demo.fd.linear`).
"""

from .diffusion import FDDiffusion

__all__ = ["solve", "solve_first_order_neumann", "FDPoisson"]

FDPoisson = FDDiffusion

#: Second-order solver: 5-point stencil (2-D), ghost-node Neumann sides.
solve = FDDiffusion()

#: Seeded mistake: Neumann sides by a one-sided first-order difference.
solve_first_order_neumann = FDDiffusion(mistake="neumann-one-sided")
