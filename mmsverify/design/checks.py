"""Design checks: does a manufactured solution exercise what it should?

A manufactured solution verifies only what it exercises. The usual
guidelines (Salari & Knupp 2000, SAND2000-1444, sec. 3; Roy 2005, J. Comput.
Phys. 205:131, sec. 3.2; both from memory) ask that every term of the
equations be exercised with comparable weight, that the solution have enough
non-zero derivatives for the scheme's truncation error to show, and that the
fields respect the physics the code relies on. Three checks, each on samples
of the domain and time interval:

:func:`term_sizes`
    every term of every equation (:meth:`~mmsverify.problem.operators.Operator.terms`;
    for custom operators the top-level terms as written in the file), RMS over
    the samples relative to the largest term of its equation. A term that
    vanishes or is much smaller than the rest leaves its coding unverified;
    the report says which field derivative, coefficient or constant to change.
:func:`truncation_check`
    a scheme of order ``p`` for an ``m``-th derivative has a leading error
    proportional to the ``(m + p)``-th derivative, e.g. ``(h**2/12) u_xxxx``
    for the central second difference (LeVeque 2007, Finite Difference
    Methods for ODEs and PDEs, sec. 2.5, and ``(h**2/12)(u_xxxx + u_yyyy)`` for
    the five-point Laplacian, sec. 3.2; section numbers from memory). If those
    derivatives vanish for every field and direction the scheme is exact for
    the solution and the observed order means nothing. Pure derivatives in
    each variable are examined (a dimension-by-dimension view).
:func:`admissibility_check`
    the ``[bounds]`` of the problem file and the positivity a built-in
    operator needs (conductivity, viscosity, density, pressure; see
    :data:`~mmsverify.design.model.IMPLIED_LOWER`), by sampling and then by
    bounded local optimisation (SLSQP) from several starts over space and
    time.

:func:`audit` runs all three; :func:`design_warnings` is the fast version a
study prints ahead of its levels. Balancing the terms is in
:mod:`mmsverify.design.balance`.
"""

from dataclasses import dataclass

import numpy as np
import sympy as sp

from mmsverify.design.model import diff, model_from_problem, sample_points

__all__ = ["TermSize", "TermReport", "LeadingDerivative", "TruncationReport", "BoundCheck",
           "AdmissibilityReport", "DesignAudit", "term_sizes", "truncation_check", "admissibility_check",
           "audit", "design_warnings", "SMALL_TERM", "Unexercised", "CoverageReport", "coverage_check",
           "term_sizes_at", "admissibility_at"]

#: Default: a term below this fraction of the largest term of its equation is "small".  # common practice
SMALL_TERM = 0.01
_ZERO = 1e-10       # relative size below which a sampled quantity counts as identically zero


def _rms(a):
    a = np.asarray(a, dtype=float)
    return float(np.sqrt(np.nanmean(a * a))) if a.size and not np.all(np.isnan(a)) else 0.0


def _model(problem):
    return problem if hasattr(problem, "atoms") else model_from_problem(problem)


def _atom_label(atom):
    if isinstance(atom, sp.Symbol):
        return f"coefficient {atom.name.removeprefix('_par_')}"
    if isinstance(atom, sp.Derivative):
        f = atom.expr.func.__name__.removeprefix("_par_")
        n = sum(c for _, c in atom.variable_count)
        den = "".join(f"d{v}" + (str(c) if c > 1 else "") for v, c in atom.variable_count)
        return f"d{n if n > 1 else ''}{f}/{den}"
    name = atom.func.__name__
    return f"coefficient {name[5:]}" if name.startswith("_par_") else name


# -- term exercise ------------------------------------------------------------------------
@dataclass(frozen=True)
class TermSize:
    """Size of one term: RMS and peak over the samples, RMS relative to the largest in its equation."""

    equation: str
    term: str
    rms: float
    peak: float
    relative: float
    status: str          # "ok", "small", "zero", or "off" (every coefficient of the term is 0)
    hint: str = ""
    reasons: tuple = ()  # fields, derivatives, coefficients of the term that vanish

    @property
    def ok(self):
        return self.status in ("ok", "off")

    @property
    def message(self):
        return f"equation {self.equation}, term {self.term}: {self.hint}"


@dataclass(frozen=True)
class TermReport:
    """Sizes of every term of a problem (see :func:`term_sizes`)."""

    problem: str
    terms: tuple
    threshold: float
    points: int

    @property
    def ok(self):
        return all(t.ok for t in self.terms)

    @property
    def warnings(self):
        out = []
        for eq in dict.fromkeys(t.equation for t in self.terms):
            terms = [t for t in self.terms if t.equation == eq]
            if len(terms) > 1 and all(t.status in ("zero", "off") for t in terms):
                why = "; ".join(dict.fromkeys(r for t in terms for r in t.reasons))
                out.append(f"equation {eq}: every term vanishes" + (f" ({why})" if why else "")
                           + "; the equation is not exercised at all, give its fields variation")
            else:
                out += [t.message for t in terms if not t.ok]
        return out

    def __str__(self):
        lines = [f"term sizes of {self.problem} (RMS over {self.points} points; a term below "
                 f"{self.threshold:g} of the largest of its equation is flagged)",
                 f"  {'equation':<10}{'term':<34}{'rms':<12}{'peak':<12}{'relative':<10}status"]
        for t in self.terms:
            name = t.term if len(t.term) <= 32 else t.term[:29] + "..."
            lines.append(f"  {t.equation:<10}{name:<34}{t.rms:<12.3e}{t.peak:<12.3e}{t.relative:<10.3g}{t.status}")
        lines += [f"  note: equation {t.equation}, term {t.term} is switched off ({'; '.join(t.reasons)}); "
                  "this problem does not verify the code's handling of it" for t in self.terms if t.status == "off"]
        lines += [f"  !! {w}" for w in self.warnings]
        return "\n".join(lines)


def _is_coefficient(atom):
    if isinstance(atom, sp.Derivative):
        return False
    name = atom.name if isinstance(atom, sp.Symbol) else atom.func.__name__
    return name.startswith("_par_")


def _why_zero(model, term, pts):
    """Which fields, derivatives or coefficients of a term vanish on the samples.

    Returns ``(reasons, off)``: ``off`` when every coefficient multiplying the
    term is zero, i.e. the problem switches the term off on purpose (pure
    advection with ``k = 0``, inviscid flow with ``nu = 0``).
    """
    atoms = sorted((term.expr.atoms(sp.Derivative, sp.core.function.AppliedUndef) | term.expr.free_symbols)
                   & set(model.atoms), key=sp.default_sort_key)
    if not atoms:
        return (), False
    values = model.compile(atoms)(*pts, *model.values)
    extent = min(hi - lo for lo, hi in model.box)
    field_rms = dict(zip(model.fields, map(_rms, model.compile(list(model.fields.values()))(*pts, *model.values))))
    out, coefficients, zero_coefficients = [], 0, 0
    for atom, v in zip(atoms, values):
        deriv = isinstance(atom, sp.Derivative)
        base = atom.expr if deriv else atom
        order = sum(c for _, c in atom.variable_count) if deriv else 0
        scale = field_rms.get(getattr(base, "func", type(base)).__name__, 1.0) or 1.0
        coefficients += _is_coefficient(atom)
        if _rms(v) > _ZERO * scale / extent ** order:
            continue
        zero_coefficients += _is_coefficient(atom)
        if not deriv:
            out.append(f"{_atom_label(atom)} is 0")
        elif len(atom.variable_count) == 1:
            var, field = atom.variable_count[0][0], _atom_label(base)
            why = f"does not vary in {var}" if order == 1 else f"is a polynomial of degree below {order} in {var}"
            out.append(f"{_atom_label(atom)} = 0 ({field} {why})")
        else:
            out.append(f"{_atom_label(atom)} = 0")
    return tuple(out), bool(coefficients) and zero_coefficients == coefficients


def _hint(term, status, rel, largest, reasons, threshold):
    levers = []
    if term.fields:
        levers.append(f"the amplitudes or wavenumbers of {', '.join(term.fields)}")
    if term.parameters:
        levers.append(f"the coefficient(s) {', '.join(term.parameters)}")
    if term.constants:
        levers.append(f"the constant(s) {', '.join(term.constants)}")
    lever = " or ".join(levers) or "the fields"
    if status == "zero":
        why = f" because {'; '.join(reasons)}" if reasons else ""
        return (f"vanishes everywhere{why}, so its coding goes unverified; change {lever} so that it does not "
                f"(give the fields variation in every direction the term differentiates)")
    extra = f" ({'; '.join(reasons)})" if reasons else ""
    return (f"only {rel:.1e} of the largest term ({largest}){extra}; a mistake in it could hide below the "
            f"others. Raise it at least {threshold / max(rel, 1e-300):.1f}x (about {1 / max(rel, 1e-300):.0f}x to "
            f"match the largest) through {lever}, or see `mmsverify audit --balance`")


def term_sizes_at(model, threshold, pts):
    values = model.compile([t.expr for t in model.terms])(*pts, *model.values)
    sizes = {t: (_rms(v), float(np.nanmax(np.abs(v))) if np.any(np.isfinite(v)) else 0.0)
             for t, v in zip(model.terms, values)}
    out = []
    for eq, terms in model.equations().items():
        top = max(terms, key=lambda t: sizes[t][0])
        big = sizes[top][0]
        for t in terms:
            rms, peak = sizes[t]
            rel = rms / big if big > 0 else 0.0
            status = "zero" if rel <= _ZERO else "small" if rel < threshold else "ok"
            reasons, off = ((), False) if status == "ok" else _why_zero(model, t, pts)
            if status == "zero" and off:
                status = "off"
            hint = "" if status in ("ok", "off") else _hint(t, status, rel, top.name, reasons, threshold)
            out.append(TermSize(eq, t.name, rms, peak, rel, status, hint, reasons))
    return TermReport(model.name, tuple(out), threshold, len(pts[0]))


def term_sizes(problem, threshold=SMALL_TERM, per_axis=None):
    """Size of every term of every equation over the domain and time interval.

    Parameters
    ----------
    problem : Problem, path or bundled name
    threshold : float
        A term whose RMS is below this fraction of the largest term of its
        equation is reported as ``"small"``; one below 1e-10 as ``"zero"``.
    per_axis : int, optional
        Samples per space direction (default 65, 25, 11 in 1-D, 2-D, 3-D).

    Returns
    -------
    TermReport
    """
    model = _model(problem)
    return term_sizes_at(model, threshold, sample_points(model, per_axis))


# -- truncation error ---------------------------------------------------------------------
@dataclass(frozen=True)
class LeadingDerivative:
    """The derivative that leads the truncation error of one field in one variable."""

    field: str
    variable: str
    operator_order: int
    order: int
    rms: float
    vanishes: bool

    @property
    def label(self):
        return f"d{self.order}{self.field}/d{self.variable}{self.order}"


@dataclass(frozen=True)
class TruncationReport:
    """Leading truncation-error derivatives for the formal orders (see :func:`truncation_check`)."""

    problem: str
    space_order: int
    time_order: int
    items: tuple

    def _status(self, in_time):
        items = [i for i in self.items if (i.variable == "t") == in_time]
        if not items or not any(i.vanishes for i in items):
            return "ok"
        return "exact" if all(i.vanishes for i in items) else "partial"

    @property
    def space_status(self):
        return self._status(False)

    @property
    def time_status(self):
        return self._status(True)

    @property
    def ok(self):
        return self.space_status == "ok" and self.time_status == "ok"

    @property
    def warnings(self):
        out = []
        for in_time, order, status in ((False, self.space_order, self.space_status),
                                       (True, self.time_order, self.time_status)):
            zero = [i for i in self.items if (i.variable == "t") == in_time and i.vanishes]
            what = "time integrator" if in_time else "scheme"
            if status == "exact":
                out.append(f"every leading truncation-error derivative vanishes ({', '.join(i.label for i in zero)}):"
                           f" a {what} of order {order} reproduces this solution exactly, so order {order} cannot "
                           f"be observed; use fields that are not low-degree polynomials in "
                           f"{'t' if in_time else 'space'} (add a sine or an exponential)")
            elif status == "partial":
                out += [f"{i.label} = 0: the truncation error of {i.field} in {i.variable} is not exercised ({i.field}"
                        f" is a polynomial of degree below {i.order} in {i.variable}); give it a non-polynomial "
                        f"dependence on {i.variable}" for i in zero]
        return out

    def __str__(self):
        lines = [f"leading truncation-error derivatives of {self.problem} (space order {self.space_order}"
                 + (f", time order {self.time_order})" if self.time_order else ")"),
                 f"  {'field':<8}{'variable':<10}{'in equations':<14}{'examined':<12}{'rms':<12}status"]
        for i in self.items:
            lines.append(f"  {i.field:<8}{i.variable:<10}{'d' + str(i.operator_order):<14}{i.label:<12}"
                         f"{i.rms:<12.3e}{'VANISHES' if i.vanishes else 'ok'}")
        lines += [f"  !! {w}" for w in self.warnings]
        return "\n".join(lines)


def _truncation(model, space_order, time_order, pts):
    highest = {}
    for term in model.terms:
        for f, var, n in term.derivatives:
            highest[(f, var)] = max(highest.get((f, var), 0), n)
    names = {str(v): v for v in model.variables}
    keys = [k for k in sorted(highest, key=lambda k: (list(model.fields).index(k[0]), k[1]))
            if k[1] != "t" or time_order]
    orders = [highest[k] + (time_order if k[1] == "t" else space_order) for k in keys]
    derivs = [diff(model.fields[f], (names[var], n)) for (f, var), n in zip(keys, orders)]
    values = model.compile([d for d in derivs if d != 0] + list(model.fields.values()))(*pts, *model.values) \
        if keys else []
    field_rms = dict(zip(model.fields, (_rms(v) for v in values[len(values) - len(model.fields):]))) if keys else {}
    it = iter(values)
    extent = dict(zip(map(str, model.variables), (hi - lo for lo, hi in model.box)))
    items = []
    for (f, var), n, d in zip(keys, orders, derivs):
        rms = 0.0 if d == 0 else _rms(next(it))
        vanishes = d == 0 or rms <= _ZERO * max(field_rms[f], 1e-300) / extent[var] ** n
        items.append(LeadingDerivative(f, var, highest[(f, var)], n, rms, bool(vanishes)))
    return TruncationReport(model.name, space_order, time_order, tuple(items))


def truncation_check(problem, formal_order=None, time_order=None, per_axis=None):
    """Check that the derivatives leading the truncation error are not identically zero.

    For every field and variable, ``m`` is the highest derivative of the
    field in that variable anywhere in the equations, and the derivative of
    order ``m + p`` (``p`` the formal order: space, or time for ``t``) must
    not vanish. ``formal_order`` and ``time_order`` override the problem's
    ``[order]``. Returns a :class:`TruncationReport`.
    """
    model = _model(problem)
    p = int(round(formal_order)) if formal_order is not None else model.space_order
    q = int(round(time_order)) if time_order is not None else model.time_order
    return _truncation(model, p, q if model.t is not None else None, sample_points(model, per_axis))


# -- admissibility ------------------------------------------------------------------------
@dataclass(frozen=True)
class BoundCheck:
    """Smallest and largest value of a bounded quantity found by sampling and optimisation."""

    name: str
    rule: str
    lower: float
    upper: float
    strict: bool
    implied: bool
    low: float
    high: float
    at_low: tuple
    at_high: tuple
    sampled_low: float
    sampled_high: float
    undefined: int
    variables: tuple
    starts: int

    @property
    def ok(self):
        below = self.lower is not None and (self.low <= self.lower if self.strict else self.low < self.lower)
        above = self.upper is not None and self.high > self.upper
        return not (below or above or self.undefined)

    def _at(self, point):
        return ", ".join(f"{v}={c:.4g}" for v, c in zip(self.variables, point))

    @property
    def message(self):
        source = "required by the operator" if self.implied else "from [bounds]"
        found = lambda s, f: "" if s == f else f" (sampling alone found {s:.6g})"
        out = []
        if self.undefined:
            out.append(f"{self.name} is undefined (NaN) at {self.undefined} sample point(s)")
        if self.lower is not None and not (self.low > self.lower if self.strict else self.low >= self.lower):
            out.append(f"{self.name} reaches {self.low:.6g} at {self._at(self.at_low)}"
                       f"{found(self.sampled_low, self.low)}, violating {self.rule} ({source})")
        if self.upper is not None and self.high > self.upper:
            out.append(f"{self.name} reaches {self.high:.6g} at {self._at(self.at_high)}"
                       f"{found(self.sampled_high, self.high)}, violating {self.rule} ({source})")
        return "; ".join(out) + ("; change the offsets or amplitudes of the fields (see `mmsverify audit --balance`)"
                                 if out else "")


@dataclass(frozen=True)
class AdmissibilityReport:
    """All bound checks of a problem (see :func:`admissibility_check`)."""

    problem: str
    checks: tuple
    points: int

    @property
    def ok(self):
        return all(c.ok for c in self.checks)

    @property
    def warnings(self):
        return [c.message for c in self.checks if not c.ok]

    def __str__(self):
        starts = max((c.starts for c in self.checks), default=0)
        lines = [f"physical admissibility of {self.problem} ({self.points} samples"
                 + (f", then SLSQP from {starts} starts per limit)" if starts else ")")]
        if not self.checks:
            lines.append("  no bounds stated (add a [bounds] table) and none implied by the operator")
        for c in self.checks:
            lines.append(f"  {c.rule:<34} range found [{c.low:.6g}, {c.high:.6g}]  {'ok' if c.ok else 'VIOLATED'}")
        lines += [f"  !! {w}" for w in self.warnings]
        return "\n".join(lines)


def _extreme(fn, sign, pts, vals, box, starts, rng):
    """Smallest value of sign*fn over the box, from the best samples and random starts."""
    finite = np.where(np.isfinite(vals), sign * vals, np.inf)
    best = int(np.argmin(finite))
    value, point = float(finite[best]), tuple(float(p[best]) for p in pts)
    if starts <= 0 or not np.isfinite(value):
        return sign * value, point
    lo, hi = np.array(box).T
    order = np.argsort(finite)[: (starts + 1) // 2]
    x0s = [np.array([p[i] for p in pts]) for i in order]
    x0s += [lo + (hi - lo) * rng.random(len(lo)) for _ in range(starts // 2)]

    def g(z):
        v = float(fn(*z))
        return sign * v if np.isfinite(v) else 1e300

    for x0 in x0s:
        from scipy.optimize import minimize  # here: importing scipy.optimize costs ~0.4 s
        res = minimize(g, x0, method="SLSQP", bounds=list(zip(lo, hi)), options={"maxiter": 60})
        if res.fun < value:
            value, point = float(res.fun), tuple(float(c) for c in res.x)
    return sign * value, point


def admissibility_at(model, pts, starts, seed):
    checks = []
    rng = np.random.default_rng(seed)
    every = model.compile([b.expr for b in model.bounds]) if model.bounds else None
    values = every(*pts, *model.values) if every else []
    for k, (b, vals) in enumerate(zip(model.bounds, values)):
        def fn(*z, _k=k):
            return every(*z, *model.values)[_k]

        varies = bool(sp.sympify(b.expr).free_symbols & set(model.variables))
        low, at_low = _extreme(fn, 1.0, pts, vals, model.box, starts if varies else 0, rng)
        high, at_high = _extreme(fn, -1.0, pts, vals, model.box, starts if varies else 0, rng)
        finite = vals[np.isfinite(vals)]
        s_low, s_high = (float(finite.min()), float(finite.max())) if finite.size else (np.nan, np.nan)
        checks.append(BoundCheck(b.name, b.describe(), b.lower, b.upper, b.strict, b.implied, low, high,
                                 at_low, at_high, s_low, s_high, int(np.sum(~np.isfinite(vals))),
                                 tuple(str(v) for v in model.variables), starts))
    return AdmissibilityReport(model.name, tuple(checks), len(pts[0]))


def admissibility_check(problem, starts=6, seed=0, per_axis=None):
    """Check the fields against the problem's bounds over space and time.

    Every bounded quantity is sampled on a grid (boundaries and corners
    included) and then minimised and maximised with bounded SLSQP from
    ``starts`` points (half the best samples, half drawn with ``seed``), so
    a violation between sample points is still found. ``starts=0`` samples
    only. Returns an :class:`AdmissibilityReport`.
    """
    model = _model(problem)
    return admissibility_at(model, sample_points(model, per_axis), starts, seed)


# -- unexercised coefficients and derivatives --------------------------------------------------
@dataclass(frozen=True)
class Unexercised:
    """A coefficient or field derivative that a term needs but that vanishes for this solution."""

    name: str           # the coefficient or field
    derivatives: tuple  # labels such as "dk/dx", "d2u/dxdy"
    terms: tuple        # "equation T, term diffusion"
    reason: str
    suggestion: str

    @property
    def message(self):
        return (f"{', '.join(self.derivatives)} {'is' if len(self.derivatives) == 1 else 'are'} zero everywhere "
                f"({self.reason}), though {'; '.join(self.terms)} {'needs' if len(self.terms) == 1 else 'need'} "
                f"{'it' if len(self.derivatives) == 1 else 'them'}: a mistake in that part of the scheme cannot "
                f"be seen. {self.suggestion}")


@dataclass(frozen=True)
class CoverageReport:
    """What the terms need and the solution leaves at zero (see :func:`coverage_check`)."""

    problem: str
    findings: tuple

    @property
    def ok(self):
        return not self.findings

    @property
    def warnings(self):
        return [f.message for f in self.findings]

    def __str__(self):
        head = ("coverage: every coefficient and field derivative the terms need varies" if self.ok else
                "coverage: parts of the operator the solution does not exercise")
        return "\n".join([head] + [f"  !! {w}" for w in self.warnings])


def _number(expr):
    e = sp.sympify(expr)
    return float(e) if e.is_number and e.is_real else None


def _wave(variables):
    return f"sin({' + '.join(variables)} + 0.3)" if variables else "1"


def _coefficient_finding(model, name, atoms, terms):
    value = sp.sympify(model.parameters[name])
    variables = sorted({str(v) for a in atoms for v, _ in a.variable_count})
    labels = tuple(_atom_label(a) for a in atoms)
    number = _number(value) if not model.consts else None
    if not (value.free_symbols & set(model.variables)):
        shown = f"{number:g}" if number is not None else str(value)
        reason = f"{name} = {shown} is constant"
        factor = f"1 + 0.25*{_wave(variables)}"
        suggest = (f"Make {name} vary where the scheme forms it between points (face averages), e.g. "
                   f"{name} = \"{factor if shown == '1' else f'{shown}*({factor})'}\" in [operator]")
    else:
        reason = f"{name} does not vary in {', '.join(variables)}"
        suggest = f"Give {name} variation in {', '.join(variables)}, e.g. a factor (1 + 0.25*{_wave(variables)})"
    return Unexercised(name, labels, tuple(terms), reason, suggest)


def _field_finding(field, atoms, terms):
    labels = tuple(_atom_label(a) for a in atoms)
    mixed = [a for a in atoms if len(a.variable_count) > 1]
    pure = [a for a in atoms if len(a.variable_count) == 1]
    reasons, adds = [], []
    if mixed:
        pairs = sorted({tuple(sorted(str(v) for v, _ in a.variable_count)) for a in mixed})
        reasons.append(f"{field} has no product of {' and '.join('/'.join(p) for p in pairs)}")
        adds += [f"0.1*{'*'.join(f'sin({v} + 0.3)' for v in p)}" for p in pairs]
    for a in pure:
        (v, n), = a.variable_count
        reasons.append(f"{field} does not vary in {v}" if n == 1 else f"{field} is a polynomial of degree below {n} in {v}")
        adds.append(f"0.1*sin(2*{v} + 0.3)")
    return Unexercised(field, labels, tuple(terms), "; ".join(reasons),
                       f"Add to {field} a part that varies so, e.g. + {' + '.join(dict.fromkeys(adds))}")


def _coverage(model, pts):
    """Coefficient and field derivatives that a term needs (with every coefficient allowed to vary) but that
    vanish on the samples; terms that vanish whole are left to the term sizes."""
    if not model.generic:
        return CoverageReport(model.name, ())
    term_values = model.compile([t.expr for t in model.generic])(*pts, *model.values)
    largest = {}
    for t, v in zip(model.generic, term_values):
        largest[t.equation] = max(largest.get(t.equation, 0.0), _rms(v))
    live = [t for t, v in zip(model.generic, term_values) if _rms(v) > _ZERO * largest[t.equation]]
    atoms = sorted({a for t in live for a in t.expr.atoms(sp.Derivative) if a in model.atoms},
                   key=sp.default_sort_key)
    if not atoms:
        return CoverageReport(model.name, ())
    values = dict(zip(atoms, model.compile(atoms)(*pts, *model.values)))
    extent = min(hi - lo for lo, hi in model.box)
    bases = sorted({a.expr for a in atoms}, key=sp.default_sort_key)
    scale = dict(zip(bases, (_rms(v) or 1.0 for v in model.compile([model.atoms[b] for b in bases])(
        *pts, *model.values))))
    zero = {}
    for a in atoms:
        order = sum(c for _, c in a.variable_count)
        if _rms(values[a]) <= _ZERO * scale[a.expr] / extent ** order:
            zero.setdefault(a.expr.func.__name__, []).append(a)
    defaults = {}
    if model.operator != "custom":
        from mmsverify.problem.operators import get_operator
        defaults = get_operator(model.operator).parameters
    findings = []
    for base, found in zero.items():
        where = [f"equation {t.equation}, term {t.name}" for t in live if any(t.expr.has(a) for a in found)]
        if base.startswith("_par_"):
            name = base.removeprefix("_par_")
            value = _number(model.parameters[name])
            # the operator's own default (k = 1 of Poisson, a zero velocity component) is no coefficient the
            # problem claims to exercise; a zero coefficient switches its terms off on purpose
            if value == 0 or (name in defaults and value == _number(defaults[name])):
                continue
            findings.append(_coefficient_finding(model, name, found, where))
        else:
            findings.append(_field_finding(base, found, where))
    return CoverageReport(model.name, tuple(findings))


def coverage_check(problem, per_axis=None):
    """Coefficients and field derivatives the operator's terms need but the solution does not exercise.

    Each term is written with every coefficient varying in space and time
    (so ``-d(k du/dx)/dx`` shows ``dk/dx``); a derivative of a coefficient
    or field in a term that does not vanish, which the manufactured solution
    leaves zero everywhere (a constant coefficient, a field that does not
    vary in a direction, a field without a cross term), is reported with a
    field or expression that would exercise it. A mistake in how a code
    forms a constant coefficient between points (arithmetic against
    harmonic face averages) is invisible to such a solution. Coefficients
    at the operator's default value and zero coefficients are not reported.

    Returns
    -------
    CoverageReport
    """
    model = _model(problem)
    return _coverage(model, sample_points(model, per_axis))


# -- together -------------------------------------------------------------------------------
@dataclass(frozen=True)
class DesignAudit:
    """Term sizes, truncation-error derivatives and admissibility of one problem."""

    problem: str
    terms: TermReport
    truncation: TruncationReport
    admissibility: AdmissibilityReport
    coverage: CoverageReport = None

    @property
    def ok(self):
        return self.terms.ok and self.truncation.ok and self.admissibility.ok and self._coverage.ok

    @property
    def _coverage(self):
        return self.coverage if self.coverage is not None else CoverageReport(self.problem, ())

    @property
    def warnings(self):
        return self.terms.warnings + self.truncation.warnings + self.admissibility.warnings + self._coverage.warnings

    def __str__(self):
        verdict = "design OK" if self.ok else f"design has {len(self.warnings)} warning(s)"
        return "\n\n".join([f"{verdict}: {self.problem}", str(self.terms), str(self._coverage),
                            str(self.truncation), str(self.admissibility)])


def audit(problem, formal_order=None, time_order=None, *, threshold=SMALL_TERM, starts=6, seed=0, per_axis=None):
    """Run every design check on a problem; returns a :class:`DesignAudit`."""
    model = _model(problem)
    pts = sample_points(model, per_axis)
    p = int(round(formal_order)) if formal_order is not None else model.space_order
    q = int(round(time_order)) if time_order is not None else model.time_order
    return DesignAudit(model.name, term_sizes_at(model, threshold, pts),
                       _truncation(model, p, q if model.t is not None else None, pts),
                       admissibility_at(model, pts, starts, seed), _coverage(model, pts))


def design_warnings(problem, formal_order=None, time_order=None):
    """Design warnings to print ahead of a study: a list of one-line texts (empty when the design is sound).

    Fast: coarse samples and two optimisation starts per limit. Never raises;
    a check that cannot run becomes a warning saying so.
    """
    try:
        a = audit(problem, formal_order, time_order, starts=2)
    except Exception as exc:  # the study must go on; say why the design was not checked
        return [f"design checks could not run: {type(exc).__name__}: {exc}"]
    return [f"design: {w}" for w in a.warnings]
