"""The functionals a problem declares, computed from node values of a node-centred solution.

Every FD demo solver reports the problem's ``[quantities]`` this way, at
second order, with only what a user's solver sees (``case.problem``,
``case.mms``, ``case.grid``):

* ``integral``: the trapezoid rule on the nodes (:func:`~solvers_demo.base.node_weights`),
  error ``O(h**2)`` (Atkinson 1989, An Introduction to Numerical Analysis,
  section 5.1).
* ``flux``: the outward normal flux ``c du/dn`` of the operator's flux vector
  (``c`` is ``k`` for diffusion, ``nu`` for Burgers), integrated over the side
  by the trapezoid rule. ``du/dn`` is the one-sided six-point difference
  ``(137 u_b - 300 u_1 + 300 u_2 - 200 u_3 + 75 u_4 - 12 u_5) / (60 h)``
  along the inward normal, of fifth order (Fornberg 1988, Math. Comp.
  51:699, Table 3). Its own error is thus well below the solution's
  ``O(h**2)``, and the flux error is that of the solution.

  Why not second order: the three-point difference ``(3 u_b - 4 u_1 + u_2) / (2h)``
  (LeVeque 2007, Finite Difference Methods for ODEs and PDEs, section 1.1)
  adds an error of the scheme's order with an unrelated coefficient. On
  plate-poisson's y_min side its next (third-order) term first cancels the
  solution's error: observed orders 3.75, 4.12, 0.12 from 8 to 64 cells,
  so the demo would fail a correct solver. A balance of the boundary half
  cells gives 1.75, 1.95, 1.99 there but 1.25, 1.72, 1.87 on x_min, and it
  needs each solver's source, storage and convection terms (time-centred for
  Crank-Nicolson); the six-point difference gives 1.65, 1.92, 1.99 and 1.99,
  2.00, 2.00, and needs only node values, so the same code serves every
  operator, every boundary kind, steady and time-stepping solvers.
* ``point``: multilinear interpolation of the node values in the cell that
  holds the point, ``O(h**2)`` for a smooth field. The error's coefficient
  depends on where in its cell the point lies, which changes from level to
  level unless the point is a node of the coarsest grid (then of every
  level, and the value is the solution's own); elsewhere the observed order
  scatters about 2.

An axis of fewer than five cells takes the widest one-sided difference that
fits (three points at two cells). A quantity is left out (and the study
notes it as not reported) when its expression is not simply one of the
computed fields (``integral = "u**2"``), or, for a flux, when the side's
axis has a single cell.
The declarations are read with :meth:`Problem.names` and
:meth:`Problem.quantity_info`, which never build sympy expressions.
"""

import numpy as np

from ..base import node_weights

__all__ = ["node_quantities"]

_AXES = "xyz"
#: Outward derivative times h from the boundary node inwards, by number of points: order = points - 1
#: (Fornberg 1988, Math. Comp. 51:699, Table 3; from memory, checked in tests/test_demo_quantities.py).
#: Six points where the axis has five cells or more; fewer on coarser axes.
_ONE_SIDED = {
    6: (137 / 60, -5.0, 5.0, -10 / 3, 5 / 4, -1 / 5),
    5: (25 / 12, -4.0, 3.0, -4 / 3, 1 / 4),
    4: (11 / 6, -3.0, 3 / 2, -1 / 3),
    3: (3 / 2, -2.0, 1 / 2),
}


def node_quantities(case, values, t=None, coefficient="k"):
    """Every declared quantity of ``case.problem`` that the node values determine.

    Parameters
    ----------
    case : mmsverify.Case
    values : dict of str to ndarray
        Node values per field, of shape ``cells + 1`` per direction.
    t : float, optional
        Time of the values (transient problems), for a coefficient that depends on it.
    coefficient : str or None
        Operator parameter multiplying the gradient in the flux (``"k"``,
        ``"nu"``); absent from the problem means 1; None for a flux ``grad u``.

    Returns
    -------
    dict of str to float
        Name -> value, for ``Solution.quantities``.
    """
    problem, grid = case.problem, case.grid
    out = {}
    for name in problem.names("quantities"):
        kind, where, text = problem.quantity_info(name)
        u = values.get(str(text).strip())
        if u is None:
            continue
        u = np.asarray(u, dtype=float)
        if kind == "integral":
            out[name] = float(np.sum(node_weights(grid) * u))
        elif kind == "point":
            out[name] = _interpolate(grid, u, where)
        elif kind == "flux":
            value = _side_flux(case, u, where, t, coefficient)
            if value is not None:
                out[name] = value
    return out


def _trapezoid(x):
    """Trapezoid weights of the nodes ``x`` (one axis)."""
    w = np.zeros(len(x))
    d = np.diff(x)
    w[:-1] += 0.5 * d
    w[1:] += 0.5 * d
    return w


def _side_flux(case, u, side, t, coefficient):
    """Trapezoid integral over ``side`` of ``c du/dn`` (outward), or None on a one-cell axis."""
    grid, problem = case.grid, case.problem
    dim, axis = grid.dim, _AXES.index(side[0])
    stencil = _ONE_SIDED.get(min(grid.cells[axis] + 1, 6))
    if stencil is None:
        return None
    end, step = (-1, -1) if side.endswith("max") else (0, 1)

    def layer(i):
        return np.take(u, i, axis=axis)

    dudn = sum(c * layer(end + i * step) for i, c in enumerate(stencil)) / grid.spacing[axis]
    others = [a for a in range(dim) if a != axis]
    c = problem.parameter_constant(coefficient, 1.0) if coefficient else 1.0
    if c is None:   # a variable coefficient, on the side's nodes
        pts = list(np.meshgrid(*[grid.nodes(a) for a in range(dim)], indexing="ij", sparse=True))
        pts[axis] = np.array(grid.nodes(axis)[end]).reshape((1,) * dim)
        kw = {"t": t} if problem.transient else {}
        shape = tuple(1 if a == axis else n + 1 for a, n in enumerate(grid.cells))
        c = np.broadcast_to(case.mms.parameter(coefficient, *pts, **kw), shape).reshape(dudn.shape)
    weights = np.ones(())
    for a in others:
        weights = np.multiply.outer(weights, _trapezoid(grid.nodes(a)))
    return float(np.sum(weights * c * dudn))


def _interpolate(grid, u, at):
    """Multilinear interpolation of node values ``u`` at the point ``at``."""
    result = u
    for a in reversed(range(grid.dim)):       # contract the last axis first; earlier axes keep their place
        x = grid.nodes(a)
        i = int(np.clip(np.searchsorted(x, at[a], side="right") - 1, 0, len(x) - 2))
        s = (at[a] - x[i]) / (x[i + 1] - x[i])
        result = (1 - s) * np.take(result, i, axis=a) + s * np.take(result, i + 1, axis=a)
    return float(result)
