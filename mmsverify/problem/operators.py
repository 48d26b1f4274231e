"""PDE operators that turn manufactured fields into source terms.

An operator maps the exact fields to the residual ``L(q)`` of each
equation; the manufactured source is then ``f = L(q_exact)`` so that
``L(q) = f`` holds exactly. Operators are plain records in a registry:
each states the fields it needs, its parameters with defaults, and, where
the equation has one, the flux vector used for Neumann data.

Sign conventions (documented once, used everywhere):

* diffusion:   ``rho_c * du/dt - div(k grad u) = f`` (the time term only
  for transient problems); flux ``k grad u``.
* advection_diffusion: ``du/dt + a . grad u - div(k grad u) = f``.
* burgers:     ``du/dt + u du/dx - nu d2u/dx2 = f`` (1-D, also steady).
* navier_stokes: steady incompressible, 2-D, fields u, v, p, constant
  density ``rho`` and kinematic viscosity ``nu``:
  ``u.grad u + grad p / rho - nu lap u = f_u, f_v`` and
  ``du/dx + dv/dy = f_p`` (the mass source, equation named ``p``).
* navier_stokes_compressible: compressible Navier-Stokes of a calorically
  perfect gas in conservation form, 2-D or 3-D, primitive fields ``rho``,
  ``u``, ``v`` (``w`` in 3-D) and ``p``; steady or transient. With
  ``U = (rho, rho u_i, rho E)`` the residuals are
  ``dU/dt + div(F_inviscid - F_viscous) = f``::

      mass:        d(rho)/dt   + d(rho u_j)/dx_j                               = f_rho
      momentum i:  d(rho u_i)/dt + d(rho u_i u_j + p delta_ij - tau_ij)/dx_j   = f_(u_i)
      energy:      d(rho E)/dt + d((rho E + p) u_j - u_i tau_ij + q_j)/dx_j     = f_p

  with ``E = p / ((gamma - 1) rho) + |u|**2 / 2``, the Stokes stress
  ``tau_ij = mu (du_i/dx_j + du_j/dx_i) - (2/3) mu div(u) delta_ij`` and
  Fourier's heat flux ``q_j = -k dT/dx_j`` with ``k = mu c_p / Pr``, which
  for ``T = p / (rho R)`` is ``q = -gamma mu / ((gamma - 1) Pr) grad(p/rho)``
  (the gas constant cancels). Equations are keyed like the incompressible
  operator: ``rho`` mass, ``u``/``v``/``w`` momentum, ``p`` energy. To
  give a conductivity ``k`` instead, set ``Pr = mu c_p / k``. ``mu`` may be
  an expression; it is differentiated where it stands. Neumann data: the
  viscous traction ``tau_ij n_j`` for each velocity component.
* custom: equations written in the problem file with ``d(expr, x)``,
  ``d(expr, x, 2)``, ``d(expr, x, y)`` and ``lap(expr)``.
"""

import contextlib
from dataclasses import dataclass
from types import MappingProxyType

import sympy as sp

from mmsverify.errors import ProblemError

__all__ = ["derivation_budget", "DerivativeTooLarge", "MAX_DERIVATIVE_WORK", "MAX_DERIVATIVE_NODES", "Operator",
           "OPERATORS", "get_operator", "derivative_functions", "differentiate", "count_nodes"]


@dataclass(frozen=True)
class Operator:
    """A PDE operator.

    Attributes
    ----------
    name : str
    summary : str
        One line for listings.
    fields : tuple of str or None
        Required field names; None for a single scalar field of any name.
    parameters : dict
        Parameter names and their default values (numbers or expression text).
    dims : tuple of int
        Space dimensions supported.
    """

    name: str
    summary: str
    fields: tuple
    parameters: dict
    dims: tuple
    _residuals: object
    _fluxes: object = None
    _fields_by_dim: object = None

    def required_fields(self, dim):
        """Field names the operator needs in ``dim`` space dimensions (None: one scalar of any name)."""
        if self._fields_by_dim is not None and dim in self._fields_by_dim:
            return self._fields_by_dim[dim]
        return self.fields

    def residuals(self, q, X, t, par):
        """Residual expression of each equation, keyed by equation name."""
        return self._residuals(q, X, t, par)

    def fluxes(self, q, X, par):
        """Flux vector per field for Neumann data, or an empty dict."""
        return self._fluxes(q, X, par) if self._fluxes else {}

    def terms(self, q, X, t, par):
        """The residual of each equation split into named terms.

        Returns ``{equation: {term name: expr}}``; the terms of an equation
        add up to its residual. Operators without a split give one term,
        ``"residual"``. Names used: ``time``, ``diffusion``, ``advection``,
        ``convection``, ``pressure``, ``viscous``, ``conduction`` (the heat
        flux of the compressible energy equation, whose ``pressure`` term is
        the pressure work ``div(p u)``) and, for the mass equation of
        ``navier_stokes``, ``continuity_x`` and ``continuity_y`` (kept apart
        because a divergence-free velocity makes only their sum zero).
        """
        split = _TERM_SPLITS.get(self.name)
        if split is None:
            return {eq: {"residual": r} for eq, r in self.residuals(q, X, t, par).items()}
        return split(q, X, t, par)


#: Most expression-tree nodes that one derivation may produce in all its derivatives together, and in
#: one derivative; both are counts, so a file whose derivatives explode is refused quickly and the same
#: way on every machine (the bundled problems produce at most 3 000 in all and 160 in one).
MAX_DERIVATIVE_WORK = 200_000
MAX_DERIVATIVE_NODES = 20_000


class DerivativeTooLarge(ProblemError):
    """The derivatives of a problem outgrow :data:`MAX_DERIVATIVE_NODES` or :data:`MAX_DERIVATIVE_WORK`."""


class _Work:
    """Nodes produced by the derivatives of the derivation now running (see :func:`derivation_budget`)."""
    left = None


@contextlib.contextmanager
def derivation_budget():
    """Count the derivatives made inside against :data:`MAX_DERIVATIVE_WORK` (one derivation)."""
    _Work.left = MAX_DERIVATIVE_WORK
    try:
        yield
    finally:
        _Work.left = None


def count_nodes(expr, limit):
    """Number of nodes of the expression tree, counting stops past ``limit``."""
    n = 0
    for n, _ in enumerate(sp.preorder_traversal(expr), 1):
        if n > limit:
            break
    return n


def _size(e, memo):
    n = memo.get(e)
    if n is None:
        n = memo[e] = 1 + sum(_size(a, memo) for a in e.args)
    return n


def _derivative_size(e, var, memo, sizes):
    """Nodes of the tree of ``d e / d var`` by the product and chain rules, before simplification (an estimate)."""
    n = memo.get(e)
    if n is not None:
        return n
    if var not in e.free_symbols:
        n = 0
    elif e.is_Symbol:
        n = 1
    elif e.is_Add:
        n = 1 + sum(_derivative_size(a, var, memo, sizes) for a in e.args)
    else:   # a product, power or function: one term per argument that depends on var, the rest copied
        whole = _size(e, sizes)
        n = 1 + sum(_derivative_size(a, var, memo, sizes) + whole + 1 for a in e.args if var in a.free_symbols)
    memo[e] = n
    return n


def differentiate(expr, *spec):
    """A derivative, one order at a time, each result counted against the derivation's budget.

    ``spec`` as for :func:`sympy.diff`: variables, each optionally followed
    by its order (``x, 2, y``).
    """
    steps = []
    for s in spec:
        if isinstance(s, int) and steps:
            steps.extend([steps[-1]] * (s - 1))
        else:
            steps.append(s)
    for var in steps:
        if _derivative_size(expr, var, {}, {}) > MAX_DERIVATIVE_NODES:   # sympy would take long to find out
            raise DerivativeTooLarge(f"a derivative would have more than {MAX_DERIVATIVE_NODES} terms and factors")
        expr = sp.diff(expr, var)
        n = count_nodes(expr, MAX_DERIVATIVE_NODES)
        if n > MAX_DERIVATIVE_NODES:
            raise DerivativeTooLarge(f"a derivative has more than {MAX_DERIVATIVE_NODES} terms and factors")
        if _Work.left is not None:
            _Work.left -= n
            if _Work.left < 0:
                raise DerivativeTooLarge(f"the derivatives together have more than {MAX_DERIVATIVE_WORK} terms "
                                         "and factors")
    return expr


_d = differentiate      # the short name keeps the formulas below readable


def _sum(terms):
    """Sum of a list of expressions as one flattening ``Add``."""
    return sp.Add(*terms)


def _grad(u, X):
    return [_d(u, xi) for xi in X]


def _div(vec, X):
    return _sum([_d(c, xi) for c, xi in zip(vec, X)])


def _scalar(q):
    (name, u), = q.items()
    return name, u


def _diffusion(q, X, t, par):
    name, u = _scalar(q)
    r = -_div([par["k"] * g for g in _grad(u, X)], X)
    if t is not None:
        r += par["rho_c"] * _d(u, t)
    return {name: r}


def _diffusive_flux(q, X, par):
    name, u = _scalar(q)
    return {name: [par["k"] * g for g in _grad(u, X)]}


def _advection_diffusion(q, X, t, par):
    name, u = _scalar(q)
    a = [par[c] for c in ("ax", "ay", "az")[: len(X)]]
    r = _sum([ai * g for ai, g in zip(a, _grad(u, X))]) - _div([par["k"] * g for g in _grad(u, X)], X)
    if t is not None:
        r += _d(u, t)
    return {name: r}


def _burgers(q, X, t, par):
    name, u = _scalar(q)
    (x,) = X
    r = u * _d(u, x) - par["nu"] * _d(u, x, 2)
    if t is not None:
        r += _d(u, t)
    return {name: r}


def _burgers_flux(q, X, par):
    name, u = _scalar(q)
    return {name: [par["nu"] * _d(u, X[0])]}


def _navier_stokes(q, X, t, par):
    u, v, p = q["u"], q["v"], q["p"]
    x, y = X
    rho, nu = par["rho"], par["nu"]
    res = {}
    for name, c, xi in (("u", u, x), ("v", v, y)):
        r = u * _d(c, x) + v * _d(c, y) + _d(p, xi) / rho \
            - nu * (_d(c, x, 2) + _d(c, y, 2))
        if t is not None:
            r += _d(c, t)
        res[name] = r
    res["p"] = _d(u, x) + _d(v, y)
    return res


def _ns_flux(q, X, par):
    return {c: [par["nu"] * g for g in _grad(q[c], X)] for c in ("u", "v")}


_VELOCITY = ("u", "v", "w")


def _compressible_parts(q, X, par, d):
    """Velocity list, stress tensor and heat flux of the compressible operator."""
    vel = [q[c] for c in _VELOCITY[: len(X)]]
    mu, gamma, pr = par["mu"], par["gamma"], par["Pr"]
    div_u = sp.Add(*[d(c, xi) for c, xi in zip(vel, X)])
    tau = [[mu * (d(vel[i], X[j]) + d(vel[j], X[i]))
            - (sp.Rational(2, 3) * mu * div_u if i == j else 0)
            for j in range(len(X))] for i in range(len(X))]
    conduct = gamma * mu / ((gamma - 1) * pr)
    heat = [-conduct * d(q["p"] / q["rho"], xi) for xi in X]
    return vel, tau, heat


class _Jet:
    """Fields and their partial derivatives as plain symbols (a jet), for the chain rule.

    Differentiating products of the full fields repeats the differentiation
    of each field in every product and makes the result grow with the
    number of terms. On jet symbols the operator is differentiated as a
    small expression (``d`` applies the chain rule), each field derivative
    is then computed once, and the result shares it wherever it occurs
    (which CSE later finds at once).
    """

    def __init__(self, q, variables):
        self.q, self.variables = q, tuple(variables)
        self.order = {}                       # jet symbol -> (field, counts)
        self.symbol = {}                      # (field, counts) -> jet symbol
        self.fields = {k: self._sym(k, (0,) * len(self.variables)) for k in q}
        self._values = {}

    def _sym(self, name, counts):
        key = (name, counts)
        if key not in self.symbol:
            sym = sp.Symbol(f"_jet_{name}_" + "_".join(map(str, counts)))
            self.symbol[key], self.order[sym] = sym, key
        return self.symbol[key]

    def d(self, expr, var):
        """Total derivative of an expression in jet symbols and coordinates."""
        expr = sp.sympify(expr)
        i = self.variables.index(var)
        out = [_d(expr, var)]
        for sym in expr.free_symbols & self.order.keys():
            name, counts = self.order[sym]
            up = counts[:i] + (counts[i] + 1,) + counts[i + 1:]
            out.append(_d(expr, sym) * self._sym(name, up))
        return sp.Add(*out)

    def insert(self, expr):
        """Replace jet symbols by the fields' derivatives (each computed once)."""
        done = self._values

        def value(key):
            if key not in done:
                name, counts = key
                i = next((j for j, c in enumerate(counts) if c), None)
                if i is None:
                    done[key] = self.q[name]
                else:
                    lower = counts[:i] + (counts[i] - 1,) + counts[i + 1:]
                    done[key] = _d(value((name, lower)), self.variables[i])
            return done[key]
        return sp.sympify(expr).xreplace({s: value(k) for s, k in self.order.items() if s in expr.free_symbols})


def _by_chain_rule(build, q, X, t, par):
    """Run ``build(fields, X, t, par, d)`` on a jet, then insert the fields' derivatives."""
    jet = _Jet(q, tuple(X) + ((t,) if t is not None else ()))
    out = build(jet.fields, X, t, par, jet.d)
    return {k: ([jet.insert(c) for c in v] if isinstance(v, list) else jet.insert(v)) for k, v in out.items()}


def _ns_compressible(q, X, t, par):
    return _by_chain_rule(_ns_compressible_jet, q, X, t, par)


def _ns_compressible_jet(q, X, t, par, d):
    rho, p, gamma = q["rho"], q["p"], par["gamma"]
    vel, tau, heat = _compressible_parts(q, X, par, d)
    dim = len(X)

    def div(vec):
        return sp.Add(*[d(c, xi) for c, xi in zip(vec, X)])
    rho_e = p / (gamma - 1) + rho * sp.Add(*[c ** 2 for c in vel]) / 2
    res = {"rho": div([rho * c for c in vel])}
    for i, name in enumerate(_VELOCITY[:dim]):
        res[name] = div([rho * vel[i] * vel[j] + (p if i == j else 0) - tau[i][j] for j in range(dim)])
    res["p"] = div([(rho_e + p) * vel[j] - sp.Add(*[vel[i] * tau[i][j] for i in range(dim)]) + heat[j]
                    for j in range(dim)])
    if t is not None:
        res["rho"] += d(rho, t)
        for name, c in zip(_VELOCITY, vel):
            res[name] += d(rho * c, t)
        res["p"] += d(rho_e, t)
    return res


def _ns_compressible_flux(q, X, par):
    def build(q, X, t, par, d):
        _, tau, _ = _compressible_parts(q, X, par, d)
        return {name: list(tau[i]) for i, name in enumerate(_VELOCITY[: len(X)])}
    return _by_chain_rule(build, q, X, None, par)


OPERATORS = MappingProxyType({
    "diffusion": Operator("diffusion", "rho_c du/dt - div(k grad u) = f (Poisson when steady, k = 1)",
                          None, {"k": 1, "rho_c": 1}, (1, 2, 3), _diffusion, _diffusive_flux),
    "poisson": Operator("poisson", "-lap u = f", None, {"k": 1, "rho_c": 1}, (1, 2, 3),
                        _diffusion, _diffusive_flux),
    "advection_diffusion": Operator("advection_diffusion", "du/dt + a.grad u - div(k grad u) = f", None,
                                    {"k": 1, "ax": 1, "ay": 0, "az": 0}, (1, 2, 3),
                                    _advection_diffusion, _diffusive_flux),
    "burgers": Operator("burgers", "du/dt + u du/dx - nu d2u/dx2 = f (viscous Burgers, 1-D)", None,
                        {"nu": 1}, (1,), _burgers, _burgers_flux),
    "navier_stokes": Operator("navier_stokes", "steady or transient incompressible 2-D Navier-Stokes, fields u, v, p",
                              ("u", "v", "p"), {"rho": 1, "nu": 1}, (2,), _navier_stokes, _ns_flux),
    "navier_stokes_compressible": Operator(
        "navier_stokes_compressible",
        "compressible Navier-Stokes (perfect gas, conservation form), 2-D/3-D, fields rho, u, v, (w), p",
        ("rho", "u", "v", "w", "p"), {"gamma": 1.4, "mu": 1, "Pr": 0.72}, (2, 3),
        _ns_compressible, _ns_compressible_flux,
        MappingProxyType({2: ("rho", "u", "v", "p"), 3: ("rho", "u", "v", "w", "p")})),
})


def get_operator(name):
    """Look up a built-in operator by name; unknown names list the valid ones."""
    try:
        return OPERATORS[name]
    except KeyError:
        raise ProblemError(f"unknown operator {name!r}; built-in operators are "
                           f"{', '.join(sorted(OPERATORS))}, or 'custom' with an [operator.equations] table") from None


def derivative_functions(X, t, evaluate=True):
    """Functions ``d`` and ``lap`` for user-written operators.

    ``d(expr, x)``, ``d(expr, x, 2)`` (second derivative), ``d(expr, x, y)``
    (mixed) and ``lap(expr)`` (Laplacian in the problem's space coordinates).
    With ``evaluate=False`` they check their arguments and return unevaluated
    :class:`sympy.Derivative` objects, which the reader of problem files
    keeps for :mod:`mmsverify.problem.derive` to differentiate.
    """
    variables = set(X) | ({t} if t is not None else set())

    def d(expr, *spec):
        if not spec:
            raise ProblemError("d(expr, x, ...) needs at least one coordinate")
        args = []
        for s in spec:
            if isinstance(s, (int, sp.Integer)) and not isinstance(s, bool):
                if not args or int(s) < 1 or int(s) > 6:
                    raise ProblemError(f"derivative order {s} must follow a coordinate and be 1 to 6")
                args[-1] = (args[-1][0], int(s))
            elif s in variables:
                args.append((s, 1))
            else:
                names = ", ".join(sorted(str(v) for v in variables))
                raise ProblemError(f"d(...) differentiates with respect to a coordinate ({names}), got {s}")
        if not evaluate:
            return sp.Derivative(expr, *args, evaluate=False)
        for var, n in args:
            expr = _d(expr, var, n)
        return expr

    def lap(expr):
        if not evaluate:
            return sp.Add(*[sp.Derivative(expr, (xi, 2), evaluate=False) for xi in X])
        return sp.Add(*[_d(expr, xi, 2) for xi in X])

    return {"d": d, "lap": lap}


# -- residuals split into named terms (Operator.terms) ---------------------
def _with_time(terms, u, t, coef=1):
    return ({"time": coef * _d(u, t)} if t is not None else {}) | terms


def _diffusion_terms(q, X, t, par):
    name, u = _scalar(q)
    return {name: _with_time({"diffusion": -_div([par["k"] * g for g in _grad(u, X)], X)}, u, t, par["rho_c"])}


def _advection_diffusion_terms(q, X, t, par):
    name, u = _scalar(q)
    a = [par[c] for c in ("ax", "ay", "az")[: len(X)]]
    return {name: _with_time({"advection": sp.Add(*[ai * g for ai, g in zip(a, _grad(u, X))]),
                              "diffusion": -_div([par["k"] * g for g in _grad(u, X)], X)}, u, t)}


def _burgers_terms(q, X, t, par):
    name, u = _scalar(q)
    (x,) = X
    return {name: _with_time({"convection": u * _d(u, x), "viscous": -par["nu"] * _d(u, x, 2)}, u, t)}


def _navier_stokes_terms(q, X, t, par):
    u, v, p = q["u"], q["v"], q["p"]
    x, y = X
    out = {}
    for name, c, xi in (("u", u, x), ("v", v, y)):
        out[name] = _with_time({"convection": u * _d(c, x) + v * _d(c, y),
                                "pressure": _d(p, xi) / par["rho"],
                                "viscous": -par["nu"] * (_d(c, x, 2) + _d(c, y, 2))}, c, t)
    out["p"] = {"continuity_x": _d(u, x), "continuity_y": _d(v, y)}
    return out


def _ns_compressible_terms(q, X, t, par):
    """Terms of the compressible operator, written out again from the module docstring.

    Self-contained (plain ``sp.diff``) so the split does not depend on how the
    residual is assembled; tests check that the terms add up to the residual.
    Callers that split often pass undefined functions for the fields (as the
    design checks do), which keeps the differentiation cheap.
    """
    dim = len(X)
    rho, p, gamma, mu, pr = q["rho"], q["p"], par["gamma"], par["mu"], par["Pr"]
    vel = [q[c] for c in _VELOCITY[:dim]]
    div_u = sp.Add(*[_d(c, xi) for c, xi in zip(vel, X)])
    tau = [[mu * (_d(vel[i], X[j]) + _d(vel[j], X[i]))
            - (sp.Rational(2, 3) * mu * div_u if i == j else 0) for j in range(dim)] for i in range(dim)]
    heat = [-gamma * mu / ((gamma - 1) * pr) * _d(p / rho, xi) for xi in X]
    rho_e = p / (gamma - 1) + rho * sp.Add(*[c ** 2 for c in vel]) / 2
    time = (lambda e: {"time": _d(e, t)}) if t is not None else (lambda e: {})
    out = {"rho": time(rho) | {"convection": _div([rho * c for c in vel], X)}}
    for i, name in enumerate(_VELOCITY[:dim]):
        out[name] = time(rho * vel[i]) | {"convection": _div([rho * vel[i] * c for c in vel], X),
                                          "pressure": _d(p, X[i]), "viscous": -_div(tau[i], X)}
    out["p"] = time(rho_e) | {
        "convection": _div([rho_e * c for c in vel], X), "pressure": _div([p * c for c in vel], X),
        "viscous": -_div([sp.Add(*[vel[i] * tau[i][j] for i in range(dim)]) for j in range(dim)], X),
        "conduction": _div(heat, X)}
    return out


_TERM_SPLITS = {"diffusion": _diffusion_terms, "poisson": _diffusion_terms,
                "advection_diffusion": _advection_diffusion_terms, "burgers": _burgers_terms,
                "navier_stokes": _navier_stokes_terms, "navier_stokes_compressible": _ns_compressible_terms}
