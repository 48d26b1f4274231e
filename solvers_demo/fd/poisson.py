"""Node-centred finite differences for ``-lap u = f`` in 1, 2 or 3 dimensions.

The standard 3/5/7-point stencil has truncation error ``(h**2/12) sum u_xxxx``
(second order). Dirichlet sides take the exact boundary value; Neumann sides
use a ghost node eliminated with the centred difference of the normal
derivative, which keeps second order. ``solve_first_order_neumann`` replaces
that by a one-sided first-order difference, a common mistake that lowers the
global order to one.
"""

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import Solution

SIDES = (("x_min", "x_max"), ("y_min", "y_max"), ("z_min", "z_max"))


def _second_difference(n, h, neumann_lo, neumann_hi):
    """1-D matrix of ``-d2/dx2`` on n+1 nodes; Neumann ends use the ghost-node row."""
    main = np.full(n + 1, 2.0)
    lower = np.full(n, -1.0)
    upper = np.full(n, -1.0)
    if neumann_lo:
        upper[0] = -2.0
    if neumann_hi:
        lower[-1] = -2.0
    return sps.diags([lower, main, upper], [-1, 0, 1], format="csr") / h ** 2


def _assemble(case, first_order_neumann=False):
    grid, mms = case.grid, case.mms
    field = mms.problem.field_names[0]
    dim = grid.dim
    axes = [grid.nodes(a) for a in range(dim)]
    shape = tuple(len(x) for x in axes)
    pts = np.meshgrid(*axes, indexing="ij", sparse=True)
    kinds = [(mms.boundary(field, lo), mms.boundary(field, hi)) for lo, hi in SIDES[:dim]]

    mats = [_second_difference(grid.cells[a], grid.spacing[a], kinds[a][0] == "neumann", kinds[a][1] == "neumann")
            for a in range(dim)]
    A = sps.csr_matrix((np.prod(shape), np.prod(shape)))
    for a in range(dim):
        term = sps.identity(1, format="csr")
        for b in range(dim):
            term = sps.kron(term, mats[a] if b == a else sps.identity(shape[b]), format="csr")
        A = A + term
    rhs = np.asarray(mms.source(field, *pts), dtype=float).copy()
    rhs = np.broadcast_to(rhs, shape).copy()

    dirichlet = np.zeros(shape, dtype=bool)
    exact_bd = np.zeros(shape)
    first_order_rows = {}
    for a in range(dim):
        h = grid.spacing[a]
        for end, side in zip((0, -1), SIDES[a]):
            index = [slice(None)] * dim
            index[a] = end
            index = tuple(index)
            face = [p if b != a else np.array(axes[a][end]).reshape((1,) * dim) for b, p in enumerate(pts)]
            face_shape = tuple(1 if b == a else n for b, n in enumerate(shape))

            def on_face(values):
                return np.broadcast_to(values, face_shape).reshape(rhs[index].shape)
            if kinds[a][end == -1] == "dirichlet":
                dirichlet[index] = True
                exact_bd[index] = on_face(mms.boundary_value(field, side, *face))
            else:
                g = on_face(mms.normal_derivative(field, side, *face))
                rhs[index] += 2.0 * g / h
                first_order_rows.setdefault(a, []).append((end, g))
    return A, rhs, dirichlet, exact_bd, first_order_rows, pts, shape, field


def _solve(case, first_order_neumann):
    grid = case.grid
    problem = case.problem
    if problem.operator != "poisson" or len(problem.fields) != 1 or problem.transient:
        raise ValueError(f"this solver handles steady '-lap u = f' (operator poisson); problem "
                         f"{problem.name} uses {problem.operator!r}; pick a solver for that operator")
    A, rhs, dirichlet, exact_bd, neumann_rows, pts, shape, field = _assemble(case)
    if dirichlet.sum() == 0:
        raise ValueError("all sides are Neumann: the solution is fixed only up to a constant; "
                         "make at least one side Dirichlet")
    A = A.tolil() if first_order_neumann else A
    if first_order_neumann:
        # replace the PDE row of every Neumann-side node by (u_b - u_in)/h = g
        index = np.arange(np.prod(shape)).reshape(shape)
        for a, rows in neumann_rows.items():
            h = grid.spacing[a]
            for end, g in rows:
                sl = [slice(None)] * grid.dim
                sl[a] = end
                inner = list(sl)
                inner[a] = 1 if end == 0 else -2
                for i, j, gv in zip(index[tuple(sl)].ravel(), index[tuple(inner)].ravel(), g.ravel()):
                    A.rows[i], A.data[i] = [i, j], [1.0 / h, -1.0 / h]
                    rhs.flat[i] = gv
        A = A.tocsr()
    free = ~dirichlet.ravel()
    u = exact_bd.ravel().copy()
    b = rhs.ravel()[free] - A[free][:, ~free] @ u[~free]
    u[free] = spla.spsolve(A[free][:, free].tocsc(), b)
    weights = np.ones(shape)
    for a in range(grid.dim):
        w = np.full(shape[a], grid.spacing[a])
        w[[0, -1]] *= 0.5
        weights = weights * w.reshape([-1 if b == a else 1 for b in range(grid.dim)])
    return Solution(values={field: u.reshape(shape)}, points=tuple(pts), weights=weights)


def solve(case):
    """Second-order solver: 5-point stencil (2-D), ghost-node Neumann sides."""
    return _solve(case, first_order_neumann=False)


def solve_first_order_neumann(case):
    """Seeded mistake: Neumann sides by a one-sided first-order difference."""
    return _solve(case, first_order_neumann=True)


solve.formal_order = 2
solve_first_order_neumann.formal_order = 2
