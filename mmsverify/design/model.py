"""Internal: a manufactured problem seen as named terms, fields and bounds.

The design checks (:mod:`mmsverify.design.checks`) and the balancer
(:mod:`mmsverify.design.balance`) work on a :class:`Model`: the terms of every
equation, each with its derivative structure (which field is differentiated
how often in which variable, which coefficients multiply it), the bounds of
physical admissibility, and NumPy evaluation on samples of the domain.

Terms are kept in *structured* form: fields and coefficients appear as
undefined functions (``u(x, y)``, ``_par_k(x, y)``) and their derivatives as
``Derivative`` atoms; :attr:`Model.atoms` maps every atom to its concrete
expression. Evaluating the small structured term and the small atoms is far
cheaper than printing the fully expanded source term, which matters for
compressible-flow operators whose expanded energy source runs to thousands
of operations.

A model built from a :class:`~mmsverify.problem.record.Problem` has numbers for
its constants. A model built from problem-file text (:func:`model_from_text`)
keeps the named ``[constants]`` as sympy symbols, so terms and bounds can be
evaluated for any constant values without deriving again.
"""

import ast
from dataclasses import dataclass
import tomllib

import numpy as np
import sympy as sp
from sympy.core.function import AppliedUndef

from mmsverify.errors import ProblemError
from mmsverify.problem.expr import parse_expression, parse_quietly
from mmsverify.problem.operators import derivative_functions, get_operator
from mmsverify.problem.derive import derive_equations, get_problem, problem_from_text

__all__ = ["Model", "Term", "Bound", "IMPLIED_LOWER", "model_from_problem", "model_from_text",
           "split_sum", "sample_points", "compile_exprs", "diff"]

#: Lower limits a built-in operator needs to be well posed, as (limit, strict): positive
#: conductivity, heat capacity, density, pressure; non-negative diffusivity and viscosity
#: where zero leaves a meaningful (advective, inviscid) equation; gamma > 1.
IMPLIED_LOWER = {
    "diffusion": {"k": (0.0, True), "rho_c": (0.0, True)},
    "poisson": {"k": (0.0, True), "rho_c": (0.0, True)},
    "advection_diffusion": {"k": (0.0, False)},
    "burgers": {"nu": (0.0, False)},
    "navier_stokes": {"rho": (0.0, True), "nu": (0.0, False)},
    "navier_stokes_compressible": {"rho": (0.0, True), "p": (0.0, True), "mu": (0.0, False),
                                   "Pr": (0.0, True), "gamma": (1.0, True)},
}


@dataclass(frozen=True)
class Term:
    """One term of one equation, in structured form (see the module docstring).

    ``derivatives`` holds ``(field, variable, order)`` for every derivative
    of a field in the term; ``fields``, ``parameters`` and ``constants`` the
    names the term uses (constants only where the file writes the term).
    """

    equation: str
    name: str
    expr: object
    derivatives: tuple = ()
    fields: tuple = ()
    parameters: tuple = ()
    constants: tuple = ()


@dataclass(frozen=True)
class Bound:
    """A limit on a field, a coefficient or a derived quantity."""

    name: str
    expr: object
    lower: float = None
    upper: float = None
    strict: bool = False
    implied: bool = False

    def describe(self):
        lo = "" if self.lower is None else f"{self.lower:g} {'<' if self.strict else '<='} "
        hi = "" if self.upper is None else f" <= {self.upper:g}"
        return f"{lo}{self.name}{hi}"


@dataclass(frozen=True)
class Model:
    """Terms, fields and bounds of a problem, ready for sampling."""

    name: str
    coords: tuple
    t: object
    lower: tuple
    upper: tuple
    t_range: tuple
    fields: dict
    parameters: dict
    terms: tuple
    bounds: tuple
    space_order: int
    time_order: int
    atoms: dict = None
    consts: tuple = ()
    values: tuple = ()
    operator: str = "custom"
    generic: tuple = ()     # the terms with every coefficient varying (see _build_terms)

    @property
    def variables(self):
        return self.coords + ((self.t,) if self.t is not None else ())

    @property
    def args(self):
        return self.variables + tuple(self.consts)

    @property
    def box(self):
        """(lower, upper) of every variable, time last."""
        box = list(zip(self.lower, self.upper))
        return box + ([tuple(self.t_range)] if self.t is not None else [])

    def concrete(self, expr):
        """A structured expression with every atom replaced by its concrete value."""
        return sp.sympify(expr).xreplace(self.atoms)

    def compile(self, exprs):
        """NumPy function of ``args`` values evaluating structured expressions (list of arrays)."""
        exprs = [sp.sympify(e) for e in exprs]
        used = set()
        for e in exprs:
            used |= {a for a in e.atoms(sp.Derivative, AppliedUndef) | e.free_symbols if a in self.atoms}
        used = sorted(used, key=sp.default_sort_key)
        dummies = [sp.Dummy(f"a{i}") for i in range(len(used))]
        reduced = [e.xreplace(dict(zip(used, dummies))) for e in exprs]
        atoms = compile_exprs([self.atoms[a] for a in used], self.args, cse=False) if used else None
        terms = compile_exprs(reduced, tuple(dummies) + self.args)

        def evaluate(*values):
            return terms(*(atoms(*values) if atoms else []), *values)

        return evaluate

    def equations(self):
        out = {}
        for term in self.terms:
            out.setdefault(term.equation, []).append(term)
        return out


def split_sum(text):
    """Top-level terms of expression text: a list of ``(sign, text)``.

    ``"-d(k*d(u, x), x) + r*u**3"`` gives ``[(1, "-d(k*d(u, x), x)"), (1, "r*u**3")]``;
    ``"a - (b + c)"`` gives ``[(1, "a"), (-1, "(b + c)")]``. Text that does
    not parse is returned whole (the safe parser reports the error).
    """
    flat = " ".join(str(text).split())
    try:
        tree = parse_quietly(flat).body
    except (SyntaxError, ValueError, RecursionError):
        return [(1, flat)]
    parts = []

    def grouped(node):          # written in parentheses: the writer's own grouping, one term
        before, after = flat[: node.col_offset].rstrip(), flat[node.end_col_offset:].lstrip()
        return node is not tree and before.endswith("(") and after.startswith(")")

    def walk(node, sign):
        if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Add, ast.Sub)) and not grouped(node):
            walk(node.left, sign)
            walk(node.right, sign if isinstance(node.op, ast.Add) else -sign)
        else:
            seg = ast.get_source_segment(flat, node)
            parts.append((sign, f"({seg})" if grouped(node) else seg))

    walk(tree, 1)
    return parts


def _names_in(text):
    try:
        return {n.id for n in ast.walk(parse_quietly(text)) if isinstance(n, ast.Name)}
    except (SyntaxError, ValueError, RecursionError):
        return set()


def _structure(abstract, field_funcs, param_funcs):
    derivs = set()
    names = {F.func: f for f, F in field_funcs.items()}
    for d in abstract.atoms(sp.Derivative):
        f = names.get(getattr(d.expr, "func", None))
        if f is not None:
            derivs.update((f, str(v), int(n)) for v, n in d.variable_count)
    fields = tuple(f for f, F in field_funcs.items() if abstract.has(F))
    params = tuple(k for k, s in param_funcs.items() if abstract.has(s))
    return tuple(sorted(derivs)), fields, params


def _constant_syms(constants):
    return {k: sp.Float(v) if int(v) != v else sp.Integer(int(v)) for k, v in constants.items()}


def diff(expr, *variable_count):
    """``sp.diff`` one order at a time: several times faster than ``sp.diff(e, (x, 4))`` on trigonometric sums."""
    for var, n in variable_count:
        for _ in range(int(n)):
            expr = sp.diff(expr, var)
    return expr


def _atoms(terms, field_funcs, param_funcs, fields, parameters, known=()):
    """Concrete value of every field, coefficient and derivative atom in the terms (not in ``known``)."""
    concrete = {F: fields[f] for f, F in field_funcs.items()}
    concrete |= {P: sp.sympify(parameters[k]) for k, P in param_funcs.items()}
    cache = {}

    def derivative(base, counts):
        """Derivative of a concrete expression, built from the next lower one (each computed once)."""
        key = (base, counts)
        if key not in cache:
            if not counts:
                cache[key] = concrete[base]
            else:
                (var, n), rest = counts[0], counts[1:]
                cache[key] = sp.diff(derivative(base, (((var, n - 1),) if n > 1 else ()) + rest), var)
        return cache[key]

    out = {}
    for term in terms:
        expr = sp.sympify(term.expr)
        for a in expr.atoms(sp.Derivative, AppliedUndef) | expr.free_symbols:
            if a in out or a in known:
                continue
            if isinstance(a, sp.Derivative) and a.expr in concrete:
                counts = tuple(sorted(((v, int(n)) for v, n in a.variable_count if n), key=lambda c: str(c[0])))
                out[a] = derivative(a.expr, counts)
            elif a in concrete:
                out[a] = concrete[a]
    return out


def _build_terms(operator, X, t, fields, parameters, equation_text, equations, base, vary=False, known=()):
    """Structured terms and their atoms; ``base`` maps coordinate and constant names to sympy objects.

    With ``vary`` every coefficient is a function of all variables, so the
    terms show every coefficient derivative they need, also of constant
    coefficients (whose concrete derivatives are then zero); atoms in
    ``known`` are not computed again.
    """
    var = X + ((t,) if t is not None else ())
    field_funcs = {f: sp.Function(f)(*var) for f in fields}
    # a coefficient that varies is a function (its derivatives appear); a constant one a symbol
    param_funcs = {k: sp.Function(f"_par_{k}")(*var) if vary or sp.sympify(v).free_symbols & set(var)
                   else sp.Symbol(f"_par_{k}") for k, v in parameters.items()}
    terms = []
    if operator != "custom":
        split = get_operator(operator).terms(field_funcs, X, t, param_funcs)
        for eq, parts in split.items():
            for name, expr in parts.items():
                expr = sp.sympify(expr)
                terms.append(Term(eq, name, expr, *_structure(expr, field_funcs, param_funcs)))
    else:
        fns = derivative_functions(X, t)
        names = {**base, **field_funcs, **param_funcs}
        for eq in equations:
            text = equation_text.get(eq)
            if text is None:        # built in Python: split the residual as sympy holds it
                terms += [Term(eq, f"term {i}", e) for i, e in enumerate(sp.Add.make_args(equations[eq]), 1)]
                continue
            for sign, seg in split_sum(text):
                expr = sign * parse_expression(seg, names, functions=fns, where=f"equation {eq}, term {seg!r}")
                label = ("-" if sign < 0 else "") + seg
                consts = tuple(sorted(_names_in(seg) & (set(base) - {str(v) for v in var})))
                terms.append(Term(eq, label, expr, *_structure(expr, field_funcs, param_funcs), consts))
    return tuple(terms), _atoms(terms, field_funcs, param_funcs, fields, parameters, known)


def _with_generic(operator, X, t, fields, parameters, equation_text, equations, base, atoms):
    """The terms with every coefficient varying (see :func:`_build_terms`) and all atoms together."""
    generic, more = _build_terms(operator, X, t, fields, parameters, equation_text, equations, base, vary=True,
                                 known=atoms)
    return generic, {**more, **atoms}


def _implied_bounds(operator, fields, parameters, taken):
    out = []
    for name, (lo, strict) in IMPLIED_LOWER.get(operator, {}).items():
        if name in taken:
            continue
        expr = fields.get(name, parameters.get(name))
        if expr is None:
            continue
        expr = sp.sympify(expr)
        if expr.is_number and expr.is_real and (expr > lo if strict else expr >= lo):
            continue            # a constant that meets the limit (k = 1 of Poisson): nothing to search
        out.append(Bound(name, expr, lo, None, strict=strict, implied=True))
    return out


def model_from_problem(problem):
    """The model of a Problem (or path, or bundled name), constants as numbers."""
    p = get_problem(problem)
    equations = derive_equations(p).equations
    base = {str(c): c for c in p.coords} | ({"t": p.t} if p.t is not None else {}) | _constant_syms(p.constants)
    terms, atoms = _build_terms(p.operator, p.coords, p.t, p.fields, p.parameters, p.equation_text, equations,
                                base)
    generic, atoms = _with_generic(p.operator, p.coords, p.t, p.fields, p.parameters, p.equation_text,
                                   equations, base, atoms)
    bounds = [Bound(k, e, lo, hi) for k, (e, lo, hi) in p.bounds.items()]
    bounds += _implied_bounds(p.operator, p.fields, p.parameters, p.bounds)
    return Model(p.name, p.coords, p.t, p.lower, p.upper, p.t_range, dict(p.fields), dict(p.parameters),
                 terms, tuple(bounds), p.space_order, p.time_order, atoms, operator=p.operator, generic=generic)


def _value(v, names, where):
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return sp.nsimplify(v) if isinstance(v, int) else sp.Float(v)
    return parse_expression(v, names, where=where)


def model_from_text(text, source="<text>", keep=()):
    """The model of problem-file text with its ``[constants]`` kept as symbols.

    Constants named in ``keep`` are substituted by their values instead.
    The text is first read as usual, so every error of the file is reported
    as :func:`~mmsverify.problem.derive.problem_from_text` reports it.
    """
    p = problem_from_text(text, source)
    data = tomllib.loads(text)
    symbolic = [k for k in p.constants if k not in keep]
    consts = {k: sp.Symbol(k, real=True) for k in symbolic}
    base = {str(c): c for c in p.coords} | ({"t": p.t} if p.t is not None else {})
    base |= _constant_syms({k: v for k, v in p.constants.items() if k in keep}) | consts
    fields = {k: _value(v, base, f"{source}, [fields] {k}") for k, v in data["fields"].items()}
    op_tab = dict(data.get("operator", {}))
    kind = op_tab.pop("kind", "poisson")
    op_tab.pop("equations", None)
    if kind != "custom":
        op_tab = {k: op_tab.get(k, d) for k, d in get_operator(kind).parameters.items()}
    parameters = {k: _value(v, {**base, **fields}, f"{source}, [operator] {k}") for k, v in op_tab.items()}
    equations = derive_equations(p).equations
    terms, atoms = _build_terms(kind, p.coords, p.t, fields, parameters, p.equation_text, equations, base)
    generic, atoms = _with_generic(kind, p.coords, p.t, fields, parameters, p.equation_text, equations, base,
                                   atoms)
    bounds = []
    names = {**base, **fields, **parameters}
    for key, (_, lo, hi) in p.bounds.items():
        spec = data["bounds"][key]
        if isinstance(spec, dict) and "expr" in spec:
            expr = _value(spec["expr"], names, f"{source}, [bounds] {key}")
        else:
            expr = fields[key] if key in fields else parameters[key]
        bounds.append(Bound(key, expr, lo, hi))
    bounds += _implied_bounds(kind, fields, parameters, p.bounds)
    return Model(p.name, p.coords, p.t, p.lower, p.upper, p.t_range, fields, parameters, terms, tuple(bounds),
                 p.space_order, p.time_order, atoms, tuple(consts.values()), tuple(p.constants[k] for k in symbolic),
                 operator=kind, generic=generic)


def sample_points(model, per_axis=None, times=5):
    """A tensor grid over the box (boundaries included) and ``times`` instants, flattened."""
    dim = len(model.coords)
    n = per_axis or {1: 65, 2: 25, 3: 11}[dim]
    axes = [np.linspace(lo, hi, n) for lo, hi in zip(model.lower, model.upper)]
    if model.t is not None:
        axes.append(np.linspace(*model.t_range, times))
    return tuple(m.ravel() for m in np.meshgrid(*axes, indexing="ij"))


def compile_exprs(exprs, args, cse=False):
    """One NumPy function of ``args`` returning a list of float arrays (NaN where undefined)."""
    exprs = list(exprs)
    try:
        fn = sp.lambdify(args, exprs, modules=["numpy", "scipy"], cse=cse, docstring_limit=0)
    except Exception as exc:  # an expression numpy cannot evaluate
        raise ProblemError(f"cannot evaluate the design expressions numerically ({exc})") from None

    def evaluate(*values):
        shape = np.broadcast_shapes(*(np.shape(v) for v in values))
        with np.errstate(all="ignore"):
            out = fn(*values)
        result = []
        for o in out:
            a = np.asarray(o)
            if np.iscomplexobj(a):
                a = np.where(np.abs(a.imag) > 1e-12 * (1 + np.abs(a.real)), np.nan, a.real)
            result.append(np.broadcast_to(a.astype(float), shape))
        return result

    return evaluate
