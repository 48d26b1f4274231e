"""Derivation: exact solution, source terms and boundary data as numbers.

:func:`derive` turns a :class:`~mmsverify.problem.record.Problem` into a
:class:`Manufactured` bundle of NumPy evaluators. Each expression is
compiled lazily, once per process, into generated NumPy code
(common-subexpression elimination, lower-dimensional parts hoisted, block
evaluation with bounded temporaries; see :mod:`mmsverify.problem.evaluate`). The
programs of a problem are kept in memory by its content hash, so the levels
of a study and a second bundle of the same problem share them. A bundle
pickles to worker processes as the problem alone.
"""

from collections import OrderedDict
from functools import lru_cache

import numpy as np
import sympy as sp

from mmsverify.problem.evaluate import Evaluator, build_program
from mmsverify.errors import ProblemError
from mmsverify.problem.record import Problem, get_problem

__all__ = ["Manufactured", "derive", "compile_expression"]

_AXIS = {"x": 0, "y": 1, "z": 2}


@lru_cache(maxsize=4)
def _gauss_legendre(n):
    nodes, weights = np.polynomial.legendre.leggauss(n)
    nodes.flags.writeable = weights.flags.writeable = False
    return nodes, weights


@lru_cache(maxsize=512)
def _compiled(expr, args):
    return Evaluator(build_program(expr, args))


def compile_expression(expr, args):
    """NumPy function of ``args`` for a sympy expression, with CSE, cached by content.

    The result always has the broadcast shape of its inputs, also for a
    constant expression, and is a new array the caller may modify.

    Examples
    --------
    >>> x, y = sp.symbols("x y")
    >>> f = compile_expression(sp.sin(x) * y, (x, y))
    >>> f(np.zeros(2), 3.0)
    array([0., 0.])
    """
    return _compiled(sp.sympify(expr), tuple(args))


class _Programs:
    """Evaluators of the problems of this process, by content hash: built once, kept for the last 64 problems."""

    _memory = OrderedDict()          # (content hash, args) -> {key: Evaluator}

    @staticmethod
    def ident(problem, args):
        """What identifies the generated programs of a problem."""
        return problem.content_hash(), tuple(str(a) for a in args)

    @classmethod
    def evaluator(cls, ident, args, key, make_expr):
        table = cls._memory.get(ident)
        if table is None:
            table = cls._memory[ident] = {}
            while len(cls._memory) > 64:
                cls._memory.popitem(last=False)
        found = table.get(key)
        if found is None:
            found = table[key] = Evaluator(build_program(make_expr(), args))
        return found


class Manufactured:
    """The numeric side of a manufactured problem, as a solver sees it.

    Every method takes the space coordinates as separate arrays that
    broadcast together (full meshes or ``np.ix_``-style axis arrays), and for
    transient problems the time ``t`` as a keyword. Axis arrays are the
    cheapest input; full ``np.meshgrid`` arrays are recognised and treated
    alike. Large arrays are evaluated in blocks, so temporary memory stays
    near the size of the result.

    Examples
    --------
    >>> from mmsverify.problem.record import problem_from_text
    >>> m = derive(problem_from_text('[domain]\\nx = [0, 1]\\n[fields]\\nu = "x**3"'))
    >>> float(m.source("u", 0.5))       # -u'' = -6x
    -3.0
    """

    def __init__(self, problem):
        self.problem = problem
        args = problem.coords + ((problem.t,) if problem.t is not None else ())
        self._args = args
        self._ident = None
        self._quantities = {}   # (name, t) -> exact value: every level of a study asks again

    def __getstate__(self):
        return {"problem": self.problem}

    def __setstate__(self, state):
        self.__init__(state["problem"])

    # -- plumbing ---------------------------------------------------------
    def _eval(self, key, make_expr, coords, t):
        p = self.problem
        if len(coords) != p.dim:
            raise ProblemError(f"{p.name}: expected {p.dim} coordinate arrays, got {len(coords)}")
        values = tuple(coords)
        if p.t is not None:
            if t is None:
                raise ProblemError(f"{p.name} is transient: pass t=... to evaluate it")
            values += (t,)
        return _Programs.evaluator(self._programs_ident(), self._args, key, make_expr)(*values)

    def _programs_ident(self):
        """What identifies this problem's generated programs (and cached values); worked out once."""
        if self._ident is None:
            self._ident = _Programs.ident(self.problem, self._args)
        return self._ident

    def _check_field(self, name, table="fields", what="field"):
        known = self.problem.names(table)
        if name not in known:
            raise ProblemError(f"{self.problem.name}: no {what} {name!r}; known: {', '.join(known)}")

    def _side(self, side):
        axis = _AXIS.get(side[:1])
        if axis is None or axis >= self.problem.dim or side[1:] not in ("_min", "_max"):
            sides = [s for s in ("x_min", "x_max", "y_min", "y_max", "z_min", "z_max") if _AXIS[s[0]] < self.problem.dim]
            raise ProblemError(f"{self.problem.name}: unknown side {side!r}; sides are {', '.join(sides)}")
        return axis, (1 if side.endswith("max") else -1)

    # -- public -----------------------------------------------------------
    @property
    def content_hash(self):
        return self.problem.content_hash()

    def exact(self, name, *coords, t=None):
        """Exact value of a field."""
        self._check_field(name)
        return self._eval(f"exact_{name}", lambda: self.problem.fields[name], coords, t)

    def source(self, name, *coords, t=None):
        """Manufactured source term of an equation (named after its field)."""
        self._check_field(name, "equations", "equation")
        return self._eval(f"source_{name}", lambda: self.problem.equations[name], coords, t)

    def initial(self, name, *coords):
        """Initial value of a field at the start of the time interval."""
        t0 = self.problem.t_range[0] if self.problem.t is not None else None
        return self.exact(name, *coords, t=t0)

    def boundary(self, name, side):
        """Kind of boundary data, ``"dirichlet"`` or ``"neumann"``."""
        self._check_field(name)
        self._side(side)
        return self.problem.boundaries[(name, side)]

    def boundary_value(self, name, side, *coords, t=None):
        """Dirichlet value of a field on a side (the exact solution there)."""
        self._side(side)
        return self.exact(name, *coords, t=t)

    def normal_derivative_expr(self, name, side):
        """Outward normal derivative of a field on a side, as a sympy expression."""
        axis, sign = self._side(side)
        self._check_field(name)
        return sign * sp.diff(self.problem.fields[name], self.problem.coords[axis])

    def normal_derivative(self, name, side, *coords, t=None):
        """Outward normal derivative ``grad(u) . n`` of a field on a side."""
        self._side(side)
        self._check_field(name)
        return self._eval(f"dudn_{name}_{side}", lambda: self.normal_derivative_expr(name, side), coords, t)

    def normal_flux_expr(self, name, side):
        """Outward normal flux of a field on a side, as a sympy expression."""
        return self._normal_flux(name, side, self.problem.fluxes)

    def _normal_flux(self, name, side, fluxes):
        axis, sign = self._side(side)
        flux = fluxes.get(name)
        if flux is None:
            raise ProblemError(f"{self.problem.name}: operator {self.problem.operator} defines no flux for "
                               f"{name!r}; use normal_derivative instead")
        return sign * flux[axis]

    def normal_flux(self, name, side, *coords, t=None):
        """Outward normal flux (e.g. ``k grad(u) . n`` for diffusion) on a side."""
        self._side(side)
        if name not in self.problem.names("fluxes"):
            self._normal_flux(name, side, {})   # raises: no flux for this field
        return self._eval(f"flux_{name}_{side}", lambda: self.normal_flux_expr(name, side), coords, t)

    def parameter(self, name, *coords, t=None):
        """An operator parameter (coefficient) evaluated with the exact fields."""
        self._check_field(name, "parameters", "parameter")
        return self._eval(f"parameter_{name}", lambda: self.problem.parameters[name], coords, t)

    def exact_quantity(self, name, t=None):
        """Exact value of a functional declared under ``[quantities]``.

        Integrals use tensor Gauss-Legendre quadrature (64 points per
        direction), exact to round-off for the smooth fields manufactured
        solutions use; flux integrals run over the side, point values are
        evaluated directly. Transient problems default to the end time.
        """
        p = self.problem
        self._check_field(name, "quantities", "quantity")
        if p.t is not None and t is None:
            t = p.t_range[1]
        key = (name, None if t is None else float(t))
        if key not in self._quantities:
            self._quantities[key] = self._exact_quantity(name, t)
        return self._quantities[key]

    def _exact_quantity(self, name, t):
        p = self.problem
        kind, where, _ = p.quantity_info(name)
        expr = lambda: p.quantities[name][1]  # noqa: E731
        if kind == "point":
            return float(self._eval(f"quantity_{name}", expr, where, t))
        axes = list(range(p.dim))
        fixed = {}
        if kind == "flux":
            axis = _AXIS[where[0]]
            fixed[axis] = p.upper[axis] if where.endswith("max") else p.lower[axis]
            axes.remove(axis)
        nodes, weights = _gauss_legendre(64)
        coords, w = [None] * p.dim, 1.0
        for k, a in enumerate(axes):
            lo, hi = p.lower[a], p.upper[a]
            shape = [1] * len(axes)
            shape[k] = -1
            coords[a] = (0.5 * (hi - lo) * nodes + 0.5 * (hi + lo)).reshape(shape)
            w = w * (0.5 * (hi - lo) * weights).reshape(shape)
        for a, v in fixed.items():
            coords[a] = np.array(v)
        values = self._eval(f"quantity_{name}", expr, coords, t)
        return float(np.sum(w * values))

    def expressions(self):
        """Every derived expression by a descriptive key, for export and reports."""
        p = self.problem
        out = {f"exact_{k}": v for k, v in p.fields.items()}
        out.update({f"source_{k}": v for k, v in p.equations.items()})
        for (f, side), kind in sorted(p.boundaries.items()):
            if kind == "neumann":
                out[f"dudn_{f}_{side}"] = self.normal_derivative_expr(f, side)
                if f in p.fluxes:
                    out[f"flux_{f}_{side}"] = self.normal_flux_expr(f, side)
        return out


def derive(problem):
    """Derive the numeric bundle of a problem (a Problem, a path or a bundled name)."""
    problem = get_problem(problem)
    if not isinstance(problem, Problem):
        raise ProblemError(f"expected a Problem, got {type(problem).__name__}")
    return Manufactured(problem)
