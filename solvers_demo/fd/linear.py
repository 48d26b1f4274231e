"""Linear solvers for the node systems of :mod:`solvers_demo.fd._assembly`.

* ``"direct"``: sparse LU (``scipy.sparse.linalg.spsolve``), any system.
* ``"amg"``: conjugate gradients preconditioned by classical (Ruge-Stuben)
  algebraic multigrid (pyamg), for the symmetric systems; a million
  unknowns in 2-D take about 4 s on a 2-core machine, four million about
  16 s (``bench/solver_scaling.py``).
* ``"dst"``: a fast sine transform, exact for a constant coefficient on a
  uniform grid with Dirichlet data on every side (the eigenvectors of the
  1-D second difference are sines; LeVeque 2007, Finite Difference Methods
  for ODEs and PDEs, section 3.4); a million unknowns take under a second.
* ``"auto"``: ``dst`` where it applies, ``direct`` below 50 000 unknowns,
  else ``amg`` for symmetric and ``direct`` for other systems.

Every result is checked by its residual, so a method that does not apply
raises :class:`mmsverify.SolverError` instead of returning a wrong answer.
"""

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import SolverError

__all__ = ["METHODS", "solve_nodes"]

METHODS = ("auto", "direct", "amg", "dst")
_DIRECT_LIMIT = 50_000
_RTOL = 1e-10  # relative residual; far below the discretization errors studied


def _dst(system, b, grid, kconst):
    from scipy.fft import dstn
    interior = tuple(n - 2 for n in system.shape)
    eig = np.zeros(interior)
    for a, n in enumerate(interior):
        m = np.arange(1, n + 1)
        lam = (2.0 - 2.0 * np.cos(np.pi * m / (n + 1))) / grid.spacing[a] ** 2
        eig = eig + lam.reshape([-1 if c == a else 1 for c in range(len(interior))])
    volume = float(np.prod(grid.spacing))
    rhs = (b / volume).reshape(interior)
    u = dstn(dstn(rhs, type=1, norm="ortho") / (kconst * eig), type=1, norm="ortho")
    return u.ravel()


def _amg(A, b):
    import pyamg
    A = A.tocsr()
    A.sum_duplicates()
    A.sort_indices()
    # classical (Ruge-Stuben) AMG suits these M-matrices; on 10**6 unknowns it took about 60 % of the
    # time of smoothed aggregation here (both with CG, same tolerance)
    ml = pyamg.ruge_stuben_solver(A, max_coarse=500, coarse_solver="splu")
    return ml.solve(b, tol=_RTOL * 0.1, accel="cg", maxiter=300)


def solve_nodes(system, method="auto", grid=None, kconst=None, where="solver"):
    """Solve a :class:`~solvers_demo.fd._assembly.NodeSystem`; return the flat node values.

    Parameters
    ----------
    system : NodeSystem
    method : {"auto", "direct", "amg", "dst"}
    grid : mmsverify.Grid, optional
        Needed by ``"dst"``.
    kconst : float, optional
        The constant coefficient, if it is one (enables ``"dst"``).
    where : str
        Named in error messages.
    """
    if method not in METHODS:
        raise SolverError(f"{where}: linear solver {method!r} is not known; use one of {', '.join(METHODS)}")
    free = ~system.dirichlet
    u = np.where(free, 0.0, system.values)
    n_free = int(np.count_nonzero(free))
    b = (system.load - system.K @ u)[free]     # the Dirichlet values moved to the right-hand side
    interior = np.zeros(system.shape, dtype=bool)
    interior[tuple(slice(1, -1) for _ in system.shape)] = True
    dst_ok = (grid is not None and kconst is not None and system.symmetric
              and np.array_equal(free, interior.ravel()))
    if method == "auto":
        if dst_ok:
            method = "dst"
        elif n_free <= _DIRECT_LIMIT or not system.symmetric:
            method = "direct"
        else:
            method = "amg"
    if method == "dst":  # needs no matrix of the free nodes: the residual below uses K itself
        if not dst_ok:
            raise SolverError(f"{where}: the sine transform needs a constant coefficient and Dirichlet data on "
                              "every side; use linear='direct' or 'amg'")
        x = _dst(system, b, grid, kconst)
    else:
        A = system.K[free][:, free].tocsr()
        if method == "amg":
            if not system.symmetric:
                raise SolverError(f"{where}: algebraic multigrid with CG needs a symmetric system; this boundary "
                                  "treatment is not symmetric, use linear='direct'")
            x = _amg(A, b)
        else:
            x = spla.spsolve(A.tocsc(), b)
        del A
    u[free] = x
    res = np.linalg.norm((system.K @ u - system.load)[free])   # = |A x - b|
    if not res <= 1e3 * _RTOL * max(np.linalg.norm(b), 1e-300):
        raise SolverError(f"{where}: the {method} linear solve left a relative residual "
                          f"{res / max(np.linalg.norm(b), 1e-300):.1e}; use linear='direct'")
    return u
