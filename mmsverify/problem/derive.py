"""Derivation: source terms, fluxes and boundary data of a problem, symbolic and as numbers.

The stage between the parsed problem and the evaluators:

* :func:`derive_equations` differentiates a parsed
  :class:`~mmsverify.problem.record.Problem`: the source term of each
  equation, the fluxes for Neumann data and the exact integrands of the
  declared functionals (a :class:`Derivation`). Every derivative is counted
  against the limits of :mod:`mmsverify.problem.operators` and every derived
  term against ``MAX_EQUATION_NODES``, so a file whose derivatives explode
  is refused quickly and the same way on every machine. Derivations are
  kept in memory by the problem's content hash.
* :func:`problem_from_text`, :func:`load_problem` and :func:`get_problem`
  read a problem (:mod:`mmsverify.problem.record`) and derive it at once,
  so a bad file is refused at load time with its file and place named.
* :func:`derive` turns a problem into a :class:`Manufactured` bundle of
  NumPy evaluators. Each expression is compiled lazily, once per process,
  into generated NumPy code (common-subexpression elimination,
  lower-dimensional parts hoisted, block evaluation with bounded
  temporaries; see :mod:`mmsverify.problem.evaluate`). The programs of a
  problem are kept in memory by its content hash, so the levels of a study
  and a second bundle of the same problem share them. A bundle pickles to
  worker processes as the problem and its derived equations.
"""

from collections import OrderedDict
from dataclasses import dataclass
from functools import lru_cache, partial

import numpy as np
import sympy as sp

from mmsverify.problem import boundary
from mmsverify.problem.evaluate import Evaluator, build_program
from mmsverify.errors import ProblemError
from mmsverify.problem.expr import check_real
from mmsverify.problem.operators import (DerivativeTooLarge, count_nodes, derivation_budget, differentiate,
                                         get_operator)
from mmsverify.problem.record import Problem, parse_problem, place, read_problem_text

__all__ = ["Manufactured", "derive", "compile_expression", "Derivation", "derive_equations", "problem_from_text",
           "load_problem", "get_problem", "MAX_EQUATION_NODES"]

_AXIS = {"x": 0, "y": 1, "z": 2}
#: Largest expression tree (nodes) of one derived source term or flux;
#: the 3-D compressible Navier-Stokes energy equation has about 8 000.
MAX_EQUATION_NODES = 100_000
_SMALLER = ("use fewer or simpler terms in the fields (each factor of a product multiplies the size of every "
            "derivative)")


@dataclass(frozen=True)
class Derivation:
    """What differentiation makes of a problem.

    Attributes
    ----------
    equations : dict of str to sympy.Expr
        Residual ``L(q_exact)`` of each equation (the source terms), keyed
        like the fields.
    fluxes : dict of str to list of sympy.Expr
        Flux vector per field for Neumann data (may be empty).
    quantities : dict of str to sympy.Expr
        What each declared functional integrates or evaluates; for a flux
        quantity the outward normal flux on its side.
    """

    equations: dict
    fluxes: dict
    quantities: dict


_DERIVATIONS = OrderedDict()     # content hash -> Derivation, the last 64 problems of this process


def derive_equations(problem, where=None):
    """The :class:`Derivation` of a problem, kept in memory by its content hash.

    Parameters
    ----------
    problem : Problem
    where : callable, optional
        ``where(section, key)`` names the place of an entry in error
        messages (the loaders pass :func:`mmsverify.problem.record.place`
        with the file's text, to name the line); by default the problem's
        source and the table.

    Raises
    ------
    ProblemError
        When a derivative or a derived term outgrows the limits (see the
        module documentation), naming the file and the entry.
    """
    key = problem.digest
    found = _DERIVATIONS.get(key) if key else None
    if found is None:
        found = _derive(problem, where or partial(place, "", problem.source))
        if key:
            _DERIVATIONS[key] = found
            while len(_DERIVATIONS) > 64:
                _DERIVATIONS.popitem(last=False)
    elif key:
        _DERIVATIONS.move_to_end(key)
    return found


def _derive(p, where):
    """The derivation itself (no cache): equations, fluxes and quantities, each within the limits."""
    try:
        fluxes = {}
        if p.operator == "custom":
            equations = {k: _derive_written(e, where("operator.equations", k))
                         for k, e in p.operator_equations.items()}
        else:
            op = get_operator(p.operator)
            try:
                with derivation_budget():
                    equations = op.residuals(p.fields, p.coords, p.t, p.parameters)
                    fluxes = op.fluxes(p.fields, p.coords, p.parameters)
            except DerivativeTooLarge as exc:
                raise ProblemError(f"{where('operator', 'kind')}: {exc} while deriving the source terms; "
                                   f"{_SMALLER}") from None
        for k, e in equations.items():
            entry = ("operator.equations", k) if p.operator == "custom" else ("operator", "kind")
            _check_size(e, f"the source term of equation {k!r}", where, *entry)
            _check_differentiable(e, f"the source term of equation {k!r}", where, "fields",
                                  k if k in p.fields else next(iter(p.fields)))
        for k, vec in fluxes.items():
            for c, e in zip(p.coords, vec):
                _check_size(e, f"the {c}-flux of field {k!r}", where, "operator", "kind")
                _check_differentiable(e, f"the {c}-flux of field {k!r}", where, "fields", k)
        quantities = {name: _quantity(p, fluxes, kind, expr, side, f)
                      for name, (kind, expr, side, f) in p.quantities.items()}
    except RecursionError:
        raise ProblemError(f"{p.source}: an expression is nested too deeply to differentiate") from None
    return Derivation(equations, fluxes, quantities)


def _derive_written(expr, where):
    """An equation written in the file: its derivatives done, innermost first, within one budget."""
    def done(e):
        if isinstance(e, sp.Derivative):
            return differentiate(done(e.expr), *(a for var, n in e.variable_count for a in (var, int(n))))
        if not e.args or not e.has(sp.Derivative):
            return e
        return e.func(*[done(a) for a in e.args])
    try:
        with derivation_budget():
            return check_real(done(expr), where)
    except DerivativeTooLarge as exc:
        raise ProblemError(f"{where}: {exc} while deriving the source term; {_SMALLER}") from None
    except (RecursionError, MemoryError, ProblemError):
        raise
    except Exception as exc:  # sympy may fail on a legal but meaningless derivative
        raise ProblemError(f"{where}: cannot differentiate ({type(exc).__name__}: {exc})") from None


def _check_size(expr, what, where, section, key):
    """Refuse a derived expression whose tree has more than MAX_EQUATION_NODES nodes."""
    if count_nodes(expr, MAX_EQUATION_NODES) > MAX_EQUATION_NODES:
        raise ProblemError(f"{where(section, key)}: {what} has more than {MAX_EQUATION_NODES} terms and factors after "
                           f"differentiation; {_SMALLER}")


#: What a derivation leaves where a derivative does not exist everywhere (a kink of abs, min, max; a jump).
_NOT_DIFFERENTIABLE = frozenset({"DiracDelta", "Heaviside", "Derivative", "Subs"})


def _check_differentiable(expr, what, where, section, key):
    """Refuse a derived term holding a derivative that does not exist everywhere (``abs`` twice differentiated
    gives a Dirac delta): nothing could evaluate it, and a solution with a kink converges at no design order."""
    stack, seen = [expr], 0
    while stack and seen <= MAX_EQUATION_NODES:
        e = stack.pop()
        seen += 1
        name = type(e).__name__
        if name in _NOT_DIFFERENTIABLE:
            raise ProblemError(f"{where(section, key)}: {what} needs a derivative that does not exist everywhere "
                               f"({name} appears): abs, min, max and sign have kinks or jumps; manufactured "
                               "fields must be smooth in the box, e.g. sqrt((x - 0.5)**2 + 0.01) rather than "
                               "abs(x - 0.5)")
        stack.extend(e.args)


def _quantity(p, fluxes, kind, expr, side, field):
    """What a declared functional integrates or evaluates; a flux quantity's outward normal flux is derived."""
    if kind != "flux":
        return expr
    axis, end = _AXIS[side[0]], side.endswith("max")
    vec = fluxes.get(field) or [p.fields[field].diff(c) for c in p.coords]
    return ((1 if end else -1) * vec[axis]).subs(p.coords[axis], (p.upper if end else p.lower)[axis])


def problem_from_text(text, source="<text>"):
    """Read a problem from TOML text and derive it; ``source`` names it in error messages.

    The derivation runs here, so a file whose source terms cannot be derived
    within the limits is refused at once with the line of the entry; it is
    kept in memory for the study that follows (see :func:`derive_equations`).

    Raises
    ------
    ProblemError
        For anything that is not a valid problem, including files beyond the
        limits of size (see :mod:`mmsverify.problem.record` and this module).
    """
    problem = parse_problem(text, source)
    derive_equations(problem, partial(place, text, source))
    return problem


def load_problem(path):
    """Read and derive a problem file (or a bundled problem, by name, see :func:`~mmsverify.problem.record.bundled_problems`)."""
    return problem_from_text(*read_problem_text(path))


def get_problem(problem):
    """Accept a :class:`~mmsverify.problem.record.Problem`, a path or a bundled name; return a Problem."""
    return problem if isinstance(problem, Problem) else load_problem(problem)


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
    >>> from mmsverify.problem.derive import problem_from_text
    >>> m = derive(problem_from_text('[domain]\\nx = [0, 1]\\n[fields]\\nu = "x**3"'))
    >>> float(m.source("u", 0.5))       # -u'' = -6x
    -3.0
    """

    def __init__(self, problem):
        self.problem = problem
        args = problem.coords + ((problem.t,) if problem.t is not None else ())
        self._args = args
        self._ident = None
        self._derivation = None
        self._quantities = {}   # (name, t) -> exact value: every level of a study asks again

    def __getstate__(self):
        # the derived equations travel along, so a worker process does not differentiate again
        return {"problem": self.problem, "derivation": self.derivation}

    def __setstate__(self, state):
        self.__init__(state["problem"])
        self._derivation = state.get("derivation")

    @property
    def derivation(self):
        """The problem's :class:`Derivation` (see :func:`derive_equations`)."""
        if self._derivation is None:
            self._derivation = derive_equations(self.problem)
        return self._derivation

    @property
    def equations(self):
        """Source term (residual ``L(q_exact)``) of each equation, as sympy expressions."""
        return self.derivation.equations

    @property
    def fluxes(self):
        """Flux vector per field for Neumann data, as sympy expressions (may be empty)."""
        return self.derivation.fluxes

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
        known = tuple(self.equations) if table == "equations" else self.problem.names(table)
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
        return self._eval(f"source_{name}", lambda: self.equations[name], coords, t)

    def initial(self, name, *coords):
        """Initial value of a field at the start of the time interval."""
        t0 = self.problem.t_range[0] if self.problem.t is not None else None
        return self.exact(name, *coords, t=t0)

    def gradient(self, name, *coords, t=None, axis=None):
        """Exact gradient of a field: a tuple of one array per dimension, or the ``axis`` component."""
        self._check_field(name)
        if axis is None:
            return tuple(self.gradient(name, *coords, t=t, axis=a) for a in range(self.problem.dim))
        expr = lambda: sp.diff(self.problem.fields[name], self.problem.coords[axis])  # noqa: E731
        return self._eval(f"grad_{name}_{axis}", expr, coords, t)

    def flux(self, name, *coords, t=None):
        """Exact flux vector of a field (e.g. ``k grad u`` for diffusion), one array per dimension."""
        if name not in self.fluxes:
            self._normal_flux(name, "x_min", {})   # raises: no flux for this field
        expr = lambda a: lambda: self.fluxes[name][a]  # noqa: E731
        return tuple(self._eval(f"fluxvec_{name}_{a}", expr(a), coords, t) for a in range(self.problem.dim))

    def normal_flux_at(self, name, points, normals, t=None):
        """Outward normal flux at any boundary points with unit normals (see :mod:`mmsverify.boundary`)."""
        return boundary.normal_flux_at(self, name, points, normals, t)

    def robin_data(self, name, points, normals, alpha, t=None):
        """Robin data ``F(u).n + alpha u`` at boundary points with unit normals."""
        return boundary.robin_data(self, name, points, normals, alpha, t)

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
        return self._normal_flux(name, side, self.fluxes)

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
        if name not in self.fluxes:
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
        expr = lambda: self.derivation.quantities[name]  # noqa: E731
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
        out.update({f"source_{k}": v for k, v in self.equations.items()})
        for (f, side), kind in sorted(p.boundaries.items()):
            if kind == "neumann":
                out[f"dudn_{f}_{side}"] = self.normal_derivative_expr(f, side)
                if f in self.fluxes:
                    out[f"flux_{f}_{side}"] = self.normal_flux_expr(f, side)
        return out


def derive(problem):
    """Derive the numeric bundle of a problem (a Problem, a path or a bundled name)."""
    problem = get_problem(problem)
    if not isinstance(problem, Problem):
        raise ProblemError(f"expected a Problem, got {type(problem).__name__}")
    mms = Manufactured(problem)
    if any(k == "periodic" for k in problem.boundaries.values()):
        trouble = boundary.periodic_problems(mms)
        if trouble:
            raise ProblemError(f"{problem.source}: {trouble[0]}")
    return mms
