"""Parameterised families of manufactured fields, written for problem files.

Every family returns a :class:`FieldSet`: the expression text of each field
with *named* constants (offsets, amplitudes, wavenumbers, phases), so a
design can be pasted into a problem file (:meth:`FieldSet.toml`,
:meth:`FieldSet.problem_text`) and its constants tuned later by
:func:`mmsverify.design.balance.balance`.

Scalar families (:data:`SCALAR_FAMILIES`), all with defaults for 1, 2 and 3
space dimensions and, when transient, a time factor that is no polynomial:

``trig``
    ``u_0 + sum_i u_a<i> sin(u_k<i> pi x_i + u_p<i>) + u_ac cos(u_kc pi x y z)``
    (a sum of one mode per direction and a cross mode, as in the fields of
    Roy et al. 2004, Int. J. Numer. Meth. Fluids 44:599).
``exponential``
    ``u_0 + u_a exp(sum_i u_c<i> x_i)``.
``polynomial``
    ``u_0 + sum_i sum_n u_c<i><n> x_i**n`` up to ``degree`` (default 5), plus
    a cross term ``u_cc x y``. A low degree makes the scheme exact; the
    truncation check of :mod:`mmsverify.design.checks` says so.
``trig_exp``
    ``u_0 + u_a sin(sum_i u_k<i> pi x_i + u_p) exp(sum_i u_c<i> x_i)``, a product.

Vector fields: :func:`vector_field` (one scalar family per component, the
components differing in their constants) and :func:`solenoidal_velocity`,
divergence-free by construction from a stream function (2-D) or the curl of
a vector potential (3-D); :func:`is_divergence_free` checks it with sympy.
"""

from dataclasses import dataclass
from types import MappingProxyType

import sympy as sp

from mmsverify.errors import ProblemError
from mmsverify.problem.expr import parse_expression

__all__ = ["FieldSet", "SCALAR_FAMILIES", "scalar_field", "vector_field", "solenoidal_velocity",
           "divergence", "is_divergence_free"]

_AXES = ("x", "y", "z")
# Defaults per direction: distinct, non-integer wavenumbers and non-zero phases, so no
# derivative vanishes on a whole boundary and no two directions mirror each other.
_AMPLITUDE = (0.3, 0.2, 0.15)
_WAVENUMBER = (0.75, 1.25, 0.9)
_PHASE = (0.2, 0.4, 0.1)
_GROWTH = (0.5, -0.3, 0.4)


@dataclass(frozen=True)
class FieldSet:
    """Manufactured fields as expression text with named constants.

    Attributes
    ----------
    fields : dict of str to str
        Expression text per field, in the problem-file language.
    constants : dict of str to float
        Values of the named constants the texts use.
    axes : tuple of str
        Space coordinates (``("x", "y")`` in 2-D).
    transient : bool
        Whether the fields depend on ``t``.
    """

    fields: dict
    constants: dict
    axes: tuple
    transient: bool = False

    def __add__(self, other):
        if self.axes != other.axes:
            raise ProblemError(f"cannot join fields in {self.axes} with fields in {other.axes}")
        clash = (set(self.fields) & set(other.fields)) | (set(self.constants) & set(other.constants))
        if clash:
            raise ProblemError(f"both field sets define {sorted(clash)}; rename one (name=...)")
        return FieldSet({**self.fields, **other.fields}, {**self.constants, **other.constants}, self.axes,
                        self.transient or other.transient)

    def with_constants(self, **values):
        """A copy with some constants changed; unknown names are refused."""
        unknown = set(values) - set(self.constants)
        if unknown:
            raise ProblemError(f"no constant(s) {sorted(unknown)}; constants are {', '.join(self.constants)}")
        return FieldSet(dict(self.fields), {**self.constants, **{k: float(v) for k, v in values.items()}},
                        self.axes, self.transient)

    def symbols(self):
        """Coordinate (and time) symbols, as problem files make them (real)."""
        out = {a: sp.Symbol(a, real=True) for a in self.axes}
        return out | ({"t": sp.Symbol("t", real=True)} if self.transient else {})

    def expressions(self, keep_constants=False, exact=False):
        """The fields as sympy expressions.

        Constants are substituted as a problem file substitutes them (whole
        numbers exact, others floating point), as exact decimals with
        ``exact=True``, or kept as symbols with ``keep_constants=True``.
        """
        def value(v):
            if exact:
                return sp.Rational(repr(float(v)))
            return sp.Integer(int(v)) if int(v) == v else sp.Float(v)

        names = self.symbols()
        names |= {k: sp.Symbol(k, real=True) if keep_constants else value(v) for k, v in self.constants.items()}
        return {k: parse_expression(v, names, where=f"field {k}") for k, v in self.fields.items()}

    def toml(self):
        """``[constants]`` and ``[fields]`` tables for a problem file."""
        lines = ["[constants]"] + [f"{k} = {v!r}" for k, v in self.constants.items()]
        lines += ["", "[fields]"] + [f'{k} = "{v}"' for k, v in self.fields.items()]
        return "\n".join(lines) + "\n"

    def problem_text(self, name, operator, *, domain=None, parameters=None, order=2, extra=""):
        """A complete problem file: unit box (or ``domain``), these fields, the operator and its parameters."""
        domain = domain or {a: (0.0, 1.0) for a in self.axes} | ({"t": (0.0, 1.0)} if self.transient else {})
        lines = [f'name = "{name}"', "", "[domain]"] + [f"{a} = [{lo!r}, {hi!r}]" for a, (lo, hi) in domain.items()]
        lines += ["", self.toml(), "[operator]", f'kind = "{operator}"']
        lines += [f"{k} = {v!r}" if not isinstance(v, str) else f'{k} = "{v}"' for k, v in (parameters or {}).items()]
        lines += ["", "[order]", f"space = {order}", "", extra]
        return "\n".join(lines).rstrip() + "\n"

    def __str__(self):
        return self.toml()


def _axes(dim):
    if dim not in (1, 2, 3):
        raise ProblemError(f"families exist in 1, 2 and 3 space dimensions, not {dim}")
    return _AXES[:dim]


def _time_factor(n, c, transient):
    if not transient:
        return ""
    c[f"{n}_at"], c[f"{n}_w"] = 0.3, 1.1
    return f"*(1 + {n}_at*sin({n}_w*pi*t + 0.3))"


def _trig(n, axes, transient, shift=0):
    c = {f"{n}_0": 1.0}
    modes = []
    for i, a in enumerate(axes):
        j = (i + shift) % 3
        c[f"{n}_a{a}"], c[f"{n}_k{a}"], c[f"{n}_p{a}"] = _AMPLITUDE[j], _WAVENUMBER[j], _PHASE[j]
        modes.append(f"{n}_a{a}*sin({n}_k{a}*pi*{a} + {n}_p{a})")
    if len(axes) > 1:
        c[f"{n}_ac"], c[f"{n}_kc"] = 0.1, 0.6 + 0.1 * shift
        modes.append(f"{n}_ac*cos({n}_kc*pi*{'*'.join(axes)})")
    return f"{n}_0 + ({' + '.join(modes)}){_time_factor(n, c, transient)}", c


def _exponential(n, axes, transient, shift=0):
    c = {f"{n}_0": 1.0, f"{n}_a": 0.5}
    for i, a in enumerate(axes):
        c[f"{n}_c{a}"] = _GROWTH[(i + shift) % 3]
    arg = " + ".join(f"{n}_c{a}*{a}" for a in axes)
    return f"{n}_0 + {n}_a*exp({arg}){_time_factor(n, c, transient)}", c


def _polynomial(n, axes, transient, shift=0, degree=5):
    if int(degree) != degree or degree < 1:
        raise ProblemError(f"polynomial degree must be a whole number of at least 1, got {degree}")
    c = {f"{n}_0": 1.0}
    parts = []
    for i, a in enumerate(axes):
        for k in range(1, int(degree) + 1):
            c[f"{n}_c{a}{k}"] = round((-0.6) ** (k + i + shift) / k, 6)
            parts.append(f"{n}_c{a}{k}*{a}" + (f"**{k}" if k > 1 else ""))
    if len(axes) > 1:
        c[f"{n}_cc"] = 0.25
        parts.append(f"{n}_cc*{'*'.join(axes)}")
    time = ""
    if transient:
        c[f"{n}_b1"], c[f"{n}_b2"], c[f"{n}_b3"] = 0.4, -0.3, 0.2
        time = f"*(1 + {n}_b1*t + {n}_b2*t**2 + {n}_b3*t**3)"
    return f"{n}_0 + ({' + '.join(parts)}){time}", c


def _trig_exp(n, axes, transient, shift=0):
    c = {f"{n}_0": 1.0, f"{n}_a": 0.4, f"{n}_p": _PHASE[shift % 3]}
    for i, a in enumerate(axes):
        c[f"{n}_k{a}"], c[f"{n}_c{a}"] = _WAVENUMBER[(i + shift) % 3], _GROWTH[(i + shift) % 3]
    phase = " + ".join(f"{n}_k{a}*pi*{a}" for a in axes)
    growth = " + ".join(f"{n}_c{a}*{a}" for a in axes)
    return f"{n}_0 + {n}_a*sin({phase} + {n}_p)*exp({growth}){_time_factor(n, c, transient)}", c


#: Scalar families by name: function (field name, axes, transient, shift) -> (text, constants).
SCALAR_FAMILIES = MappingProxyType({"trig": _trig, "exponential": _exponential, "polynomial": _polynomial,
                                    "trig_exp": _trig_exp})


def _family(kind):
    try:
        return SCALAR_FAMILIES[kind]
    except KeyError:
        raise ProblemError(f"unknown field family {kind!r}; families are {', '.join(SCALAR_FAMILIES)}") from None


def _name_ok(name):
    if not name.isidentifier() or name in _AXES or name in ("t", "pi", "E"):
        raise ProblemError(f"field name {name!r} must be a new identifier (not x, y, z, t, pi, E)")


def scalar_field(kind="trig", name="u", dim=2, transient=False, **options):
    """One scalar field of a family with its default constants.

    Parameters
    ----------
    kind : str
        A name in :data:`SCALAR_FAMILIES`.
    name : str
        Field name; constants are named after it (``u_0``, ``u_ax``, ...).
    dim : int
        Space dimensions, 1 to 3.
    transient : bool
        Multiply the variation by a non-polynomial time factor.
    **options
        ``degree`` for ``polynomial``; any other keyword sets a constant by
        name (``u_0=300.0``).

    Examples
    --------
    >>> scalar_field("exponential", "T", dim=1).fields["T"]
    'T_0 + T_a*exp(T_cx*x)'
    """
    _name_ok(name)
    fam = _family(kind)
    extra = {"degree": options.pop("degree")} if "degree" in options and kind == "polynomial" else {}
    text, consts = fam(name, _axes(dim), transient, **extra)
    return FieldSet({name: text}, consts, _axes(dim), transient).with_constants(**options)


def vector_field(kind="trig", names=None, dim=2, transient=False):
    """A vector field: one scalar of the family per component, each with its own constants.

    The components differ (defaults shifted by direction), so no component
    is a copy of another and every cross-derivative is non-zero.
    """
    names = tuple(names or ("u", "v", "w")[:dim])
    if len(names) != dim:
        raise ProblemError(f"a {dim}-D vector field needs {dim} component names, got {names}")
    out = None
    for i, n in enumerate(names):
        _name_ok(n)
        text, consts = _family(kind)(n, _axes(dim), transient, shift=i + 1)
        part = FieldSet({n: text}, consts, _axes(dim), transient)
        out = part if out is None else out + part
    return out


def solenoidal_velocity(dim=2, names=None, transient=False, prefix="psi"):
    """A divergence-free velocity: uniform stream plus the curl of a potential.

    2-D: ``u = U + d(psi)/dy``, ``v = V - d(psi)/dx`` with the stream function
    ``psi = a sin(kx pi x + px) sin(ky pi y + py)``. 3-D: ``u = U + curl(A)``
    with each component of the vector potential ``A`` such a product. The
    field texts are the derivatives written out, with the potential's
    constants named (``psi_a``, ``psi_kx``, ...).
    """
    if dim not in (2, 3):
        raise ProblemError(f"solenoidal velocity fields are built in 2-D and 3-D, not {dim}-D")
    axes = _axes(dim)
    names = tuple(names or ("u", "v", "w")[:dim])
    if len(names) != dim:
        raise ProblemError(f"a {dim}-D velocity needs {dim} component names, got {names}")
    for n in names:
        _name_ok(n)
    X = [sp.Symbol(a, real=True) for a in axes]
    consts, sym = {}, {}

    def const(key, value):
        consts[key] = value
        sym[key] = sp.Symbol(key, real=True)
        return sym[key]

    def potential(tag, shift):
        out = const(f"{prefix}{tag}_a", 0.25 - 0.05 * shift)
        for i, (a, x) in enumerate(zip(axes, X)):
            j = (i + shift) % 3
            out *= sp.sin(const(f"{prefix}{tag}_k{a}", _WAVENUMBER[j]) * sp.pi * x
                          + const(f"{prefix}{tag}_p{a}", _PHASE[j]))
        return out

    if dim == 2:
        psi = potential("", 0)
        curl = [sp.diff(psi, X[1]), -sp.diff(psi, X[0])]
    else:
        A = [potential(str(i + 1), i) for i in range(3)]
        curl = [sp.diff(A[2], X[1]) - sp.diff(A[1], X[2]), sp.diff(A[0], X[2]) - sp.diff(A[2], X[0]),
                sp.diff(A[1], X[0]) - sp.diff(A[0], X[1])]
    speeds = (1.0, 0.5, 0.25)
    texts = {}
    for i, (n, c) in enumerate(zip(names, curl)):
        base = const(f"{n}_0", speeds[i])
        if transient:
            c = c * (1 + const(f"{prefix}_at", 0.3) * sp.sin(const(f"{prefix}_w", 1.1) * sp.pi
                                                              * sp.Symbol("t", real=True) + sp.Rational(3, 10)))
        texts[n] = sp.sstr(base + c)
    return FieldSet(texts, consts, axes, transient)


def divergence(velocity, coords):
    """``sum_i d(v_i)/dx_i`` of sympy expressions (a dict in component order or a sequence)."""
    comps = list(velocity.values()) if isinstance(velocity, dict) else list(velocity)
    if len(comps) != len(coords):
        raise ProblemError(f"divergence needs one component per coordinate; got {len(comps)} for {len(coords)}")
    return sp.Add(*[sp.diff(c, x) for c, x in zip(comps, coords)])


def is_divergence_free(velocity, coords):
    """True when sympy simplifies the divergence to exactly zero (no sampling involved).

    Floating-point coefficients can leave a round-off remainder that is not
    exactly zero; check exact expressions (``FieldSet.expressions(exact=True)``
    or ``keep_constants=True``).
    """
    return sp.simplify(divergence(velocity, coords)) == 0
