"""Correct 1-D solvers for the verdict benchmark, written by hand from the solver protocol.

* :class:`PerturbedPoisson`: the three-point scheme for -u'' = f on a randomly perturbed grid. Its
  truncation error is only first order on such a grid, yet its nodal error is second order
  (supraconvergence: Manteuffel & White 1986, Math. Comp. 47:511; Kreiss et al. 1986, Math. Comp. 47:537).
* :class:`CompactPoisson`: the fourth-order compact (Numerov) scheme
  ``(-u[i-1] + 2 u[i] - u[i+1]) / h**2 = (f[i-1] + 10 f[i] + f[i+1]) / 12`` on a uniform grid
  (LeVeque 2007, Finite Difference Methods for ODEs and PDEs, sec. 2.20; from memory).
* :class:`ExtrapolatedLoad`: the second-order three-point scheme that also reports the integral of u,
  extrapolated within the solver from its own grid and one twice as coarse (Richardson): a functional
  that converges at order 4 while the field converges at order 2 (common practice).

Each states its order as ``formal_order`` and takes Dirichlet data at both ends.
"""

from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

from mmsverify import Solution


def _solve_nodes(case, x, compact=False):
    """Nodal solution of -u'' = f with Dirichlet ends on the nodes ``x`` (uniform when ``compact``)."""
    mms, name = case.mms, case.problem.field_names[0]
    hl, hr = np.diff(x)[:-1], np.diff(x)[1:]
    n = x.size - 2
    f = mms.source(name, x)
    u0 = float(mms.boundary_value(name, "x_min", x[:1])[0])
    u1 = float(mms.boundary_value(name, "x_max", x[-1:])[0])
    if compact:
        h = x[1] - x[0]
        rhs = (f[:-2] + 10 * f[1:-1] + f[2:]) / 12 * h ** 2
        lower, diag, upper = -np.ones(n), 2 * np.ones(n), -np.ones(n)
    else:                           # 2/(hl + hr) * ((u[i+1] - u[i])/hr - (u[i] - u[i-1])/hl) = -f
        s = 2 / (hl + hr)
        rhs = f[1:-1].copy()
        lower, diag, upper = -s / hl, s * (1 / hl + 1 / hr), -s / hr
    rhs[0] -= lower[0] * u0
    rhs[-1] -= upper[-1] * u1
    bands = np.zeros((3, n))
    bands[0, 1:], bands[1], bands[2, :-1] = upper[:-1], diag, lower[1:]
    return np.concatenate([[u0], sla.solve_banded((1, 1), bands, rhs), [u1]])


def _trapezoid_weights(x):
    w = np.zeros_like(x)
    d = np.diff(x)
    w[:-1] += d / 2
    w[1:] += d / 2
    return w


@dataclass(frozen=True)
class PerturbedPoisson:
    """Three-point -u'' = f on nodes moved at random by up to ``amplitude`` of a cell (fresh per level)."""

    seed: int = 0
    amplitude: float = 0.25
    formal_order: int = 2

    @property
    def name(self):
        return f"perturbed-1d(seed={self.seed})"

    def __call__(self, case):
        g = case.grid
        x = np.linspace(g.lower[0], g.upper[0], g.cells[0] + 1)
        rng = np.random.default_rng([self.seed, g.level])
        x[1:-1] += self.amplitude * g.spacing[0] * rng.uniform(-1, 1, x.size - 2)
        u = _solve_nodes(case, x)
        return Solution({case.problem.field_names[0]: u}, (x,), _trapezoid_weights(x), info={"irregular": True})


@dataclass(frozen=True)
class CompactPoisson:
    """Fourth-order compact scheme for -u'' = f on a uniform grid."""

    formal_order: int = 4
    name: str = "compact-1d"

    def __call__(self, case):
        g = case.grid
        x = np.linspace(g.lower[0], g.upper[0], g.cells[0] + 1)
        u = _solve_nodes(case, x, compact=True)
        return Solution({case.problem.field_names[0]: u}, (x,), _trapezoid_weights(x))


@dataclass(frozen=True)
class ExtrapolatedLoad:
    """Three-point scheme; reports quantity ``load`` (integral of u) extrapolated from h and 2h."""

    formal_order: int = 2
    name: str = "extrapolated-load-1d"

    def __call__(self, case):
        g = case.grid
        x = np.linspace(g.lower[0], g.upper[0], g.cells[0] + 1)
        u = _solve_nodes(case, x)
        coarse = x[::2]
        uc = _solve_nodes(case, coarse)
        fine_load = float(_trapezoid_weights(x) @ u)
        coarse_load = float(_trapezoid_weights(coarse) @ uc)
        load = (4 * fine_load - coarse_load) / 3
        return Solution({case.problem.field_names[0]: u}, (x,), _trapezoid_weights(x), quantities={"load": load})
