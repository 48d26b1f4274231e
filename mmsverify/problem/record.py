"""Manufactured problems: the record, the file format, the bundled set.

A problem file is TOML (read with the standard library). Expressions are
strings read by the safe parser in :mod:`mmsverify.problem.expr`; nothing in a file
is ever executed. The format, with every table but ``[fields]`` optional::

    name = "plate-trig"                 # defaults to the file name
    description = "..."

    [domain]                            # 1 to 3 of x, y, z; t makes it transient
    x = [0.0, 1.0]
    y = [0.0, 1.0]

    [constants]                         # numbers usable in every expression
    a = 0.75

    [fields]                            # the manufactured solution
    u = "sin(pi*x)*cos(a*pi*y)"

    [operator]
    kind = "diffusion"                  # see `mmsverify list`
    k = "1 + x*y/2"                     # parameters: numbers or expressions
    # kind = "custom" with a sub-table of equations, one per field:
    # [operator.equations]
    # u = "-d(k*d(u, x), x) + u**3"

    [boundaries]                        # dirichlet or neumann per side
    default = "dirichlet"
    x_max = "neumann"                   # or per field: {u = "neumann"}

    [order]
    space = 2                           # formal order the scheme is built for
    time = 1                            # for transient problems
    tolerance = 0.1                     # allowed |observed - formal|, below half the order

    [order.by]                          # rules of single fields, norms, quantities
    drag = {at_least = true}            # any order from formal - tolerance up
    "u Linf" = {tolerance = 0.3}        # also space, time (see mmsverify.problem.rules)

    [quantities]                        # functionals a solver may report too
    total_heat = {integral = "u"}       # integral over the domain
    wall_flux = {flux = "u", side = "x_max"}   # integral of the outward normal flux over a side
    centre = {point = "u", at = [0.5, 0.5]}    # a point value

    [bounds]                            # physical admissibility (`mmsverify audit`)
    u = {min = 0}                       # a field or operator parameter: min and/or max
    k = [0.1, 10]                       # or [min, max]; limits are inclusive
    Pe = {expr = "0.1*abs(u)/k", max = 2}   # a derived quantity: any expression of
                                        # coordinates, t, constants, fields, parameters

    [study]                             # defaults for `mmsverify run`
    levels = 4
    base_cells = 8                      # or one count per direction, [8, 16]
    ratio = 2
    base_steps = 8                      # time steps of the coarsest level

Limits (each a :class:`~mmsverify.errors.ProblemError` naming the file and
the place, never a hang): files of at most ``MAX_FILE_CHARS`` characters;
the whole load (TOML, expressions, derivation of the source terms) within
``MAX_LOAD_SECONDS`` where a hard limit is possible (the main thread, see
:mod:`mmsverify.problem.expr`); at most ``MAX_EQUATION_NODES`` nodes in the
expression tree of each derived source term or flux, everywhere. Numbers
are finite; orders are whole numbers from 1 to ``MAX_ORDER``.
"""

import copy
import importlib.resources
from dataclasses import dataclass, field
import hashlib
import json
import math
from pathlib import Path
import pickle
import re
import tomllib

import sympy as sp

from mmsverify import _diskcache
from mmsverify import _fast
from mmsverify import fileio
from mmsverify.errors import ProblemError, MMSError
from mmsverify.problem.expr import _Timeout, _time_limit
from mmsverify.problem.operators import OPERATORS, get_operator, derivative_functions

__all__ = ["Problem", "load_problem", "problem_from_text", "bundled_problems", "get_problem",
           "SIDES", "PROBLEM_DIR", "MAX_FILE_CHARS", "MAX_LOAD_SECONDS", "MAX_EQUATION_NODES", "MAX_ORDER"]

#: The bundled problem files, shipped as package data.
PROBLEM_DIR = Path(str(importlib.resources.files("mmsverify.problem") / "bundled"))
SPACE = ("x", "y", "z")
SIDES = ("x_min", "x_max", "y_min", "y_max", "z_min", "z_max")
_KINDS = ("dirichlet", "neumann")
#: Longest problem file read (characters); real ones are a few thousand.
MAX_FILE_CHARS = 1_000_000
#: Seconds allowed for reading, parsing and deriving one file (main thread only).
MAX_LOAD_SECONDS = 10.0
#: Largest expression tree (nodes) of one derived source term or flux;
#: the 3-D compressible Navier-Stokes energy equation has about 8 000.
MAX_EQUATION_NODES = 100_000
#: Largest formal order accepted in [order].
MAX_ORDER = 20
_STUDY_KEYS = {"levels": (2, 30), "base_cells": (1, 10**9), "ratio": None, "base_steps": (1, 10**9)}
_TOP_KEYS = {"name", "description", "domain", "constants", "fields", "operator", "boundaries", "order", "study",
             "quantities", "bounds"}


@dataclass(frozen=True)
class Problem:
    """A manufactured problem, ready for derivation.

    Attributes
    ----------
    name, description : str
    coords : tuple of sympy.Symbol
        Space coordinates in order (x, y, z as needed).
    t : sympy.Symbol or None
        Time, for transient problems.
    lower, upper : tuple of float
        Box corners.
    t_range : tuple of float or None
    constants : dict of str to float
    fields : dict of str to sympy.Expr
        The manufactured exact solution, one entry per unknown.
    operator : str
        Operator name, or ``"custom"``.
    parameters : dict of str to sympy.Expr
        Operator parameters, with fields substituted by their exact values.
    equations : dict of str to sympy.Expr
        Residual ``L(q_exact)`` of each equation (the source terms).
    fluxes : dict of str to list of sympy.Expr
        Flux vector per field for Neumann data (may be empty).
    boundaries : dict of (field, side) to str
        ``"dirichlet"`` or ``"neumann"``.
    space_order, time_order : int or None
    tolerance : float
    study : dict
    quantities : dict of str to tuple
        Functionals with exact values, each ``(kind, expr, where, text)``:
        ``("integral", expr, None, text)``, ``("flux", expr, side, field)``
        (expr is the outward normal flux on that side) or
        ``("point", expr, (x, ...), text)``; ``text`` is what the file says.
    source : str
        Where it came from (file path or ``"<python>"``).
    bounds : dict of str to tuple
        Physical admissibility limits from ``[bounds]``, each
        ``(expr, min or None, max or None)``; expr has the fields substituted.
    equation_text : dict of str to str
        The equations of a custom operator as written in the file (empty for
        built-in operators), so their top-level terms can be examined.
    order_rules : tuple of (str, OrderRule)
        The ``[order.by]`` rules of single fields, norms and quantities
        (see :mod:`mmsverify.problem.rules`).
    order_given : tuple of str or None
        The axes (``"space"``, ``"time"``) whose formal order the file's
        ``[order]`` states; the others hold defaults. None (a problem made in
        Python) counts every order as given.
    """

    name: str
    description: str
    coords: tuple
    t: object
    lower: tuple
    upper: tuple
    t_range: tuple
    constants: dict
    fields: dict
    operator: str
    parameters: dict
    equations: dict
    fluxes: dict
    boundaries: dict
    space_order: int = 2
    time_order: int = None
    tolerance: float = 0.1
    study: dict = field(default_factory=dict)
    source: str = "<python>"
    quantities: dict = field(default_factory=dict)
    bounds: dict = field(default_factory=dict)
    equation_text: dict = field(default_factory=dict)
    order_given: tuple = None
    order_rules: tuple = ()

    # The tables of sympy expressions. A problem read back from the derivation
    # cache holds them pickled and builds them on first use: a study whose
    # evaluator code is cached too never needs them, and building sympy sums
    # (with sympy's deferred imports) is most of the time of a warm start.
    _SYMBOLIC = ("fields", "parameters", "equations", "fluxes", "quantities", "bounds")

    #
    # A problem read by the fast engine (mmsverify._fast) holds symengine tables for code
    # generation instead, and builds its sympy tables from the file text when first asked.

    def __getattr__(self, name):
        # Called only when normal lookup fails: a symbolic table not yet built.
        if name not in Problem._SYMBOLIC:
            raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")
        blob = self.__dict__.get("_symbolic")
        if blob is not None:
            tables = pickle.loads(blob)
        elif "_text" in self.__dict__:
            tables = _sympy_tables(self.__dict__["_text"], self.source)
        else:
            raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")
        for key, value in tables.items():
            object.__setattr__(self, key, value)
        self.__dict__.pop("_symbolic", None)
        return object.__getattribute__(self, name)

    def _fast_tables(self):
        """The symengine tables of a problem read by the fast engine, else None."""
        d = self.__dict__
        if "_fast" not in d and "_fast_blob" in d:
            object.__setattr__(self, "_fast", pickle.loads(d["_fast_blob"]))
        return d.get("_fast")

    def _tables(self):
        """The tables code and hashes are made from: symengine ones when the fast engine read it."""
        fast = self._fast_tables()
        return fast if fast is not None else {k: getattr(self, k) for k in Problem._SYMBOLIC}

    def code_table(self, table):
        """One table as evaluator code is generated from it (symengine or sympy expressions)."""
        return self._tables()[table]

    def code_symbols(self):
        """Space coordinates and time (None when steady) as symbols of the :meth:`code_table` expressions."""
        if self._fast_tables() is None:
            return self.coords, self.t
        from symengine import Symbol
        return tuple(Symbol(str(c)) for c in self.coords), (Symbol("t") if self.t is not None else None)

    def names(self, table):
        """Keys of one symbolic table (``"fields"``, ``"equations"``, ...), without building it."""
        known = self.__dict__.get("_names")
        return known[table] if known is not None else tuple(getattr(self, table))

    def quantity_info(self, name):
        """``(kind, where, text)`` of a declared quantity, without building its expression."""
        known = self.__dict__.get("_quantity_info")
        if known is not None:
            return known[name]
        kind, _, where, text = self.quantities[name]
        return kind, where, text

    def _parameter_table(self):
        memo = self.__dict__.get("_parameter_info")
        if memo is None:
            memo = {}
            for key, expr in self._tables()["parameters"].items():
                expr = expr if _fast.is_fast(expr) else sp.sympify(expr)
                free = tuple(sorted(str(s) for s in expr.free_symbols))
                memo[key] = (None if free else float(expr), free)
            object.__setattr__(self, "_parameter_info", memo)
        return memo

    def parameter_constant(self, name, default=None):
        """An operator parameter as a float when it is a constant, None when it varies.

        ``default`` when the operator has no parameter of that name. Answers
        without building the symbolic tables (see :meth:`parameter_symbols`).
        """
        found = self._parameter_table().get(name)
        return default if found is None else found[0]

    def parameter_symbols(self, name):
        """Names of the coordinates (and ``t``) a parameter depends on; empty when constant or absent."""
        found = self._parameter_table().get(name)
        return () if found is None else found[1]

    def _packed(self):
        """A copy for the derivation cache whose symbolic tables are built on first use."""
        self.content_hash()
        self.parameters_hash()
        self.bounds_hash()
        self._parameter_table()
        tables = self._tables()
        out = self._without_tables(tables)
        blob = pickle.dumps(tables, protocol=pickle.HIGHEST_PROTOCOL)
        if self._fast_tables() is not None:
            out.__dict__.pop("_fast", None)
            out.__dict__["_fast_blob"] = blob
        else:
            out.__dict__["_symbolic"] = blob
        return out

    def _fast_form(self, text):
        """This problem (read by the fast engine) as kept: symengine tables aside, sympy ones on demand."""
        tables = {k: self.__dict__[k] for k in Problem._SYMBOLIC}
        out = self._without_tables(tables)
        out.__dict__["_fast"] = tables
        out.__dict__["_text"] = text
        return out

    def _without_tables(self, tables):
        """A copy without the symbolic tables, with what is known of them without building them."""
        out = copy.copy(self)
        for k in Problem._SYMBOLIC:
            out.__dict__.pop(k, None)
        out.__dict__["_names"] = {k: tuple(v) for k, v in tables.items()}
        out.__dict__["_quantity_info"] = {k: (q[0], q[2], q[3]) for k, q in tables["quantities"].items()}
        return out

    def renamed(self, name, source):
        """The same problem under another name and source (memos and lazy tables kept)."""
        return self.with_changes(name=name, source=source)

    #: Fields :meth:`with_changes` may change: none of them enters the content hash or a derived table.
    _PLAIN = ("name", "description", "source", "space_order", "time_order", "tolerance", "study", "order_given",
             "order_rules")

    def with_changes(self, **changes):
        """A copy with some plain fields changed (orders, tolerance, study defaults, name, source).

        Unlike :func:`dataclasses.replace`, the copy keeps the derived tables
        as they are held (lazy, or from the fast engine) and the memoized
        hashes, which none of these fields enters.
        """
        bad = sorted(set(changes) - set(Problem._PLAIN))
        if bad:
            raise TypeError(f"with_changes() changes only {', '.join(Problem._PLAIN)}; got {', '.join(bad)}")
        out = copy.copy(self)
        for key, value in changes.items():
            object.__setattr__(out, key, value)
        return out

    @property
    def dim(self):
        return len(self.coords)

    @property
    def transient(self):
        return self.t is not None

    @property
    def field_names(self):
        return self.names("fields")

    def content_hash(self):
        """SHA-256 of everything that defines the mathematics (not the name).

        Computed once per instance (printing large source terms takes a
        while) and kept with the problem in the derivation cache.
        """
        memo = self.__dict__.get("_content_hash")
        if memo is not None:
            return memo
        tab, srepr = self._tables(), _fast.srepr
        blob = json.dumps({
            "coords": [str(c) for c in self.coords], "t": str(self.t),
            "box": [self.lower, self.upper, self.t_range],
            "fields": {k: srepr(v) for k, v in tab["fields"].items()},
            "equations": {k: srepr(v) for k, v in tab["equations"].items()},
            "fluxes": {k: [srepr(c) for c in v] for k, v in tab["fluxes"].items()},
            "boundaries": sorted(f"{f}:{s}:{k}" for (f, s), k in self.boundaries.items()),
            "quantities": {k: [q[0], srepr(q[1]), str(q[2])] for k, q in tab["quantities"].items()},
            "parameters": {k: srepr(v) for k, v in tab["parameters"].items()},
        }, sort_keys=True)
        memo = hashlib.sha256(blob.encode()).hexdigest()
        object.__setattr__(self, "_content_hash", memo)
        return memo

    def parameters_hash(self):
        """Short hash of the operator parameters (keys generated programs of them); kept once computed."""
        memo = self.__dict__.get("_parameters_hash")
        if memo is None:
            text = repr(sorted((k, _fast.srepr(v)) for k, v in self._tables()["parameters"].items()))
            memo = hashlib.sha256(text.encode()).hexdigest()[:16]
            object.__setattr__(self, "_parameters_hash", memo)
        return memo

    def bounds_hash(self):
        """Short hash of the ``[bounds]`` table (not part of the content hash); kept once computed."""
        memo = self.__dict__.get("_bounds_hash")
        if memo is None:
            text = repr(sorted((k, _fast.srepr(e), lo, hi) for k, (e, lo, hi) in self._tables()["bounds"].items()))
            memo = hashlib.sha256(text.encode()).hexdigest()[:16]
            object.__setattr__(self, "_bounds_hash", memo)
        return memo

    def boundary_kind(self, field_name, side):
        return self.boundaries[(field_name, side)]


def _line_of(text, section, key):
    """Best-effort line number of ``key =`` inside ``[section]`` of TOML text."""
    current = ""
    for i, line in enumerate(text.splitlines(), 1):
        s = line.strip()
        m = re.match(r"^\[([^\]]+)\]", s)
        if m:
            current = m.group(1).strip()
        elif current == section and re.match(rf"^\"?{re.escape(key)}\"?\s*=", s):
            return i
    return None


class _Reader:
    """Turns a parsed TOML dict into a :class:`Problem`, naming the place of every error."""

    def __init__(self, data, text, source, engine=_fast.SYMPY):
        self.data, self.text, self.source, self.engine = data, text, source, engine
        self.stage = None  # (section, key) being read, named when the time budget runs out

    def where(self, section, key=None):
        line = _line_of(self.text, section, key) if key else None
        loc = f"{self.source}" + (f", line {line}" if line else "")
        return f"{loc}, [{section}]" + (f" {key}" if key else "")

    def fail(self, section, key, message):
        raise ProblemError(f"{self.where(section, key)}: {message}")

    def table(self, name, required=False):
        value = self.data.get(name, {})
        if required and name not in self.data:
            raise ProblemError(f"{self.source}: missing [{name}] table; add it (see `mmsverify list --format`)")
        if not isinstance(value, dict):
            raise ProblemError(f"{self.source}: [{name}] must be a table of key = value lines")
        return value

    def known_keys(self, section, table, allowed):
        unknown = sorted(set(table) - set(allowed))
        if unknown:
            self.fail(section, unknown[0], f"unknown entry; [{section}] takes {', '.join(allowed)}")

    def number(self, section, key, value, kind=float):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(section, key, f"expected a number, got {value!r:.60}")
        if not (math.isfinite(value) if isinstance(value, float) else abs(value) < 1e300):
            self.fail(section, key, f"expected a finite number, got {value!r:.60}")
        if kind is int and int(value) != value:
            self.fail(section, key, f"expected a whole number, got {value!r}")
        return kind(value)

    def expression(self, section, key, value, names, functions=None):
        self.stage = (section, key)
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            self.fail(section, key, f"expected an expression in quotes or a number, got {value!r:.60}")
        if isinstance(value, (int, float)):
            self.number(section, key, value)
            return self.engine.number(value)
        try:
            return self.engine.parse(value, names, functions=functions, where=self.where(section, key))
        except MMSError:
            raise
        except Exception as exc:  # sympy may fail on a legal but meaningless expression
            raise ProblemError(f"{self.where(section, key)}: cannot build {value!r}: {exc}") from None

    def read(self):
        unknown = set(self.data) - _TOP_KEYS
        if unknown:
            raise ProblemError(f"{self.source}: unknown top-level entries {sorted(unknown)}; "
                               f"allowed: {', '.join(sorted(_TOP_KEYS))}")
        name = self.data.get("name", Path(self.source).stem)
        description = self.data.get("description", "")
        if not isinstance(name, str) or not isinstance(description, str):
            raise ProblemError(f"{self.source}: name and description must be text in quotes")
        # both reach terminals, reports and exported code: no control characters (escape sequences)
        if not name.strip() or not name.isprintable() or len(name) > 200:
            raise ProblemError(f"{self.source}: the name must be one line of printable text of at most 200 "
                               f"characters, got {name[:60]!r}")
        if not description.replace("\n", " ").replace("\t", " ").isprintable():
            raise ProblemError(f"{self.source}: the description holds control characters (such as terminal escape "
                               "sequences); use plain text")

        domain = self.table("domain", required=True)
        bad = set(domain) - set(SPACE) - {"t"}
        if bad:
            self.fail("domain", sorted(bad)[0], "domain entries are x, y, z (space) and t (time)")
        axes = [a for a in SPACE if a in domain]
        if not axes or axes != list(SPACE[: len(axes)]):
            raise ProblemError(f"{self.where('domain')}: give x, or x and y, or x, y and z; got {sorted(domain)}")
        box = {}
        for a in axes + (["t"] if "t" in domain else []):
            v = domain[a]
            if not (isinstance(v, list) and len(v) == 2):
                self.fail("domain", a, f"expected [lower, upper], got {v!r}")
            lo, hi = (self.number("domain", a, e) for e in v)
            if not hi > lo:
                self.fail("domain", a, f"upper bound {hi} must exceed lower bound {lo}")
            box[a] = (lo, hi)
        # symbols of the engine's expressions; the Problem holds sympy symbols of the same names
        coords = tuple(self.engine.symbol(a) for a in axes)
        t = self.engine.symbol("t") if "t" in box else None

        names = {str(c): c for c in coords}
        if t is not None:
            names["t"] = t
        constants = {}
        for k, v in self.table("constants").items():
            if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", k) or k in names or k in ("pi", "E"):
                self.fail("constants", k, "a constant needs a new identifier (not x, y, z, t, pi, E)")
            constants[k] = self.number("constants", k, v)
        const_syms = {k: self.engine.number(v if int(v) != v else int(v)) for k, v in constants.items()}
        names.update(const_syms)

        fields_tab = self.table("fields", required=True)
        if not fields_tab:
            raise ProblemError(f"{self.where('fields')}: give at least one manufactured field, e.g. u = \"sin(pi*x)\"")
        _check_reserved_names(self, "fields", fields_tab)
        fields = {}
        for k, v in fields_tab.items():
            if k in names or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", k):
                self.fail("fields", k, "a field needs a new identifier (not a coordinate or constant)")
            try:
                fields[k] = self.expression("fields", k, v, names)
            except ProblemError as exc:
                if t is None and "'t'" in str(exc):
                    raise ProblemError(f"{exc}; a transient problem needs a time interval: add t = [t0, t1] "
                                       "to [domain]") from None
                raise

        op_tab = dict(self.table("operator"))
        kind = op_tab.pop("kind", "poisson")
        if not isinstance(kind, str):
            self.fail("operator", "kind", f"expected an operator name in quotes, got {kind!r:.60}")
        with_fields = {**names, **fields}
        equations, fluxes, parameters = {}, {}, {}
        if kind == "custom":
            eqs = op_tab.pop("equations", None)
            if not isinstance(eqs, dict) or not eqs:
                raise ProblemError(f"{self.where('operator')}: a custom operator needs an [operator.equations] "
                                   "table with one equation per field, e.g. u = \"-lap(u)\"")
            _check_reserved_names(self, "operator", op_tab)
            for k, v in op_tab.items():
                parameters[k] = self.expression("operator", k, v, with_fields)
            fns = derivative_functions(coords, t)
            for k, v in eqs.items():
                if k not in fields:
                    self.fail("operator.equations", k, f"names no field; fields are {', '.join(fields)}")
                equations[k] = self.expression("operator.equations", k, v, {**with_fields, **parameters}, fns)
            missing = set(fields) - set(equations)
            if missing:
                raise ProblemError(f"{self.where('operator.equations')}: no equation for field(s) "
                                   f"{sorted(missing)}; write one per field")
        else:
            try:
                op = get_operator(kind)
            except ProblemError as exc:
                raise ProblemError(f"{self.where('operator', 'kind')}: {exc}") from None
            if len(coords) not in op.dims:
                self.fail("operator", "kind", f"{kind} works in {op.dims} dimensions; [domain] has {len(coords)}")
            needed = op.required_fields(len(coords))
            if needed is None and len(fields) != 1:
                raise ProblemError(f"{self.where('fields')}: operator {kind} takes one scalar field, got {list(fields)}")
            if needed is not None and set(needed) != set(fields):
                raise ProblemError(f"{self.where('fields')}: operator {kind} needs fields {', '.join(needed)} "
                                   f"in {len(coords)}-D; got {', '.join(fields)}")
            unknown = set(op_tab) - set(op.parameters)
            if unknown:
                self.fail("operator", sorted(unknown)[0],
                          f"not a parameter of {kind}; its parameters are {', '.join(op.parameters)}")
            for k, default in op.parameters.items():
                parameters[k] = self.expression("operator", k, op_tab.get(k, default), with_fields)
            self.stage = ("operator", "kind")
            equations = op.residuals(fields, coords, t, parameters)
            fluxes = op.fluxes(fields, coords, parameters)
        for k, e in equations.items():
            self.check_size("operator.equations" if kind == "custom" else "operator", k if kind == "custom"
                            else "kind", e, f"the source term of equation {k!r}")
            _check_differentiable(self, "fields", k if k in fields else next(iter(fields)), e,
                                  f"the source term of equation {k!r}")
        for k, vec in fluxes.items():
            for c, e in zip(coords, vec):
                self.check_size("operator", "kind", e, f"the {c}-flux of field {k!r}")
                _check_differentiable(self, "fields", k, e, f"the {c}-flux of field {k!r}")

        self.stage = None
        boundaries = self._boundaries(fields, axes)
        order = self.table("order")
        self.known_keys("order", order, ("space", "time", "tolerance", "by"))
        space_order = self.number("order", "space", order.get("space", 2), int)
        time_order = self.number("order", "time", order["time"], int) if "time" in order else (1 if t is not None else None)
        tolerance = self.number("order", "tolerance", order.get("tolerance", 0.1))
        if not 1 <= space_order <= MAX_ORDER or not 1 <= (time_order or 1) <= MAX_ORDER or not tolerance > 0:
            raise ProblemError(f"{self.where('order')}: orders must be whole numbers from 1 to {MAX_ORDER} and the "
                               "tolerance positive")
        order_rules = self._order_rules(order, space_order, time_order, tolerance)
        study = self._study(len(axes))
        quantities = self._quantities(with_fields, fields, fluxes, coords, box, axes)
        bounds = self._bounds({**with_fields, **parameters}, fields, parameters)
        equation_text = {k: str(v) for k, v in eqs.items()} if kind == "custom" else {}
        if self.engine is not _fast.SYMPY:
            coords = tuple(sp.Symbol(str(c), real=True) for c in coords)
            t = sp.Symbol("t", real=True) if t is not None else None
        return Problem(bounds=bounds, equation_text=equation_text, quantities=quantities, name=name,
                       description=description, coords=coords, t=t,
                       lower=tuple(box[a][0] for a in axes), upper=tuple(box[a][1] for a in axes),
                       t_range=box.get("t"), constants=constants, fields=fields, operator=kind,
                       parameters=parameters, equations=equations, fluxes=fluxes, boundaries=boundaries,
                       space_order=space_order, time_order=time_order, tolerance=tolerance, study=study,
                       source=self.source, order_given=tuple(a for a in ("space", "time") if a in order),
                       order_rules=order_rules)

    def _order_rules(self, order, space_order, time_order, tolerance):
        """The [order.by] rules, and every tolerance below half its order (mmsverify.problem.rules)."""
        from mmsverify.errors import AnalysisError
        from mmsverify.problem.rules import check_rule, parse_rules, rule_for
        try:
            rules = parse_rules(order.get("by", {}), f"{self.where('order')}.by")
            for axis, p in (("space", space_order), ("time", time_order)):
                if p is None:
                    continue
                check_rule(p, tolerance, f"{self.where('order', 'tolerance')} ({axis} order {p})")
                for sel, _ in rules:
                    for norm in (sel, "value") if " " not in sel else (sel.split(" ", 1)[1],):
                        q, t, _ = rule_for(rules, sel.split(" ", 1)[0], norm, p, tolerance, axis)
                        check_rule(q, t, f"{self.where('order')}.by {sel!r} ({axis})")
        except AnalysisError as exc:
            raise ProblemError(str(exc)) from None
        return rules

    def check_size(self, section, key, expr, what):
        """Refuse a derived expression whose tree has more than MAX_EQUATION_NODES nodes."""
        if self.engine.nodes(expr, MAX_EQUATION_NODES) > MAX_EQUATION_NODES:
            self.fail(section, key, f"{what} has more than {MAX_EQUATION_NODES} terms and factors after "
                                    "differentiation; use fewer or simpler terms in the fields (each factor "
                                    "of a product multiplies the size of every derivative)")

    def _study(self, dim):
        """The [study] table: levels, base_cells, ratio and base_steps, checked."""
        study = dict(self.table("study"))
        unknown = set(study) - set(_STUDY_KEYS)
        if unknown:
            self.fail("study", sorted(unknown)[0], f"unknown entry; [study] takes {', '.join(_STUDY_KEYS)}")
        for key, value in study.items():
            if key == "ratio":
                if not 1 < self.number("study", key, value) <= 16:
                    self.fail("study", key, f"the refinement ratio must exceed 1 (and be at most 16), got {value}")
                continue
            lo, hi = _STUDY_KEYS[key]
            items = value if key == "base_cells" and isinstance(value, list) else [value]
            if key == "base_cells" and isinstance(value, list) and len(value) != dim:
                self.fail("study", key, f"give one number of cells or {dim} (one per direction), got {value!r:.60}")
            for v in items:
                if not lo <= self.number("study", key, v, int) <= hi:
                    self.fail("study", key, f"expected a whole number from {lo} to {hi}, got {v!r:.60}")
        return study

    def _bounds(self, names, fields, parameters):
        """The [bounds] table: name -> (expression, min or None, max or None)."""
        out = {}
        for key, spec in self.table("bounds").items():
            if isinstance(spec, list):
                if len(spec) != 2:
                    self.fail("bounds", key, f"expected [min, max] or {{min = ..., max = ...}}, got {spec!r}")
                spec = {"min": spec[0], "max": spec[1]}
            if not isinstance(spec, dict):
                self.fail("bounds", key, f"expected [min, max] or {{min = ..., max = ...}}, got {spec!r}")
            extra = set(spec) - {"expr", "min", "max"}
            if extra:
                self.fail("bounds", key, f"unknown entries {sorted(extra)}; use expr, min and max")
            lo, hi = (self.number("bounds", key, spec[s]) if s in spec else None for s in ("min", "max"))
            if lo is None and hi is None:
                self.fail("bounds", key, "give min, max or both")
            if lo is not None and hi is not None and not hi > lo:
                self.fail("bounds", key, f"max {hi} must exceed min {lo}")
            if "expr" in spec:
                if key in fields or key in parameters or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", key):
                    self.fail("bounds", key, "a derived quantity needs a new identifier (not a field or parameter)")
                expr = self.expression("bounds", key, spec["expr"], names)
            elif key in fields or key in parameters:
                expr = fields[key] if key in fields else parameters[key]
            else:
                self.fail("bounds", key, f"names no field or operator parameter; add expr = \"...\" to bound a "
                                         f"derived quantity (fields: {', '.join(fields)})")
            out[key] = (expr, lo, hi)
        return out

    def _quantities(self, names, fields, fluxes, coords, box, axes):
        out = {}
        sides = [s for s in SIDES if s[0] in axes]
        for name, spec in self.table("quantities").items():
            if not isinstance(spec, dict) or len(set(spec) & {"integral", "flux", "point"}) != 1:
                self.fail("quantities", name, 'give one of {integral = "expr"}, {flux = "field", side = "x_max"} '
                                              'or {point = "expr", at = [x, ...]}')
            extra = set(spec) - {"integral", "flux", "point", "side", "at"}
            if extra:
                self.fail("quantities", name, f"unknown key(s) {sorted(extra)}")
            if "integral" in spec:
                out[name] = ("integral", self.expression("quantities", name, spec["integral"], names), None,
                             str(spec["integral"]))
            elif "flux" in spec:
                f, side = spec["flux"], spec.get("side")
                if f not in fields:
                    self.fail("quantities", name, f"flux needs a field name; fields are {', '.join(fields)}")
                if side not in sides:
                    self.fail("quantities", name, f"flux needs side = one of {', '.join(sides)}")
                axis, sign = SPACE.index(side[0]), (1 if side.endswith("max") else -1)
                vec = fluxes.get(f) or [fields[f].diff(c) for c in coords]
                out[name] = ("flux", self.engine.at(sign * vec[axis], coords[axis], box[side[0]][side.endswith("max")]),
                             side, f)
            else:
                at = spec.get("at")
                if not (isinstance(at, list) and len(at) == len(coords)):
                    self.fail("quantities", name, f"point needs at = [{', '.join(axes)}]")
                at = tuple(self.number("quantities", name, v) for v in at)
                if any(not box[a][0] <= v <= box[a][1] for a, v in zip(axes, at)):
                    self.fail("quantities", name, f"point {at} lies outside the domain")
                out[name] = ("point", self.expression("quantities", name, spec["point"], names), at, str(spec["point"]))
        return out

    def _boundaries(self, fields, axes):
        tab = dict(self.table("boundaries"))
        default = tab.pop("default", "dirichlet")
        sides = [s for s in SIDES if s[0] in axes]
        out = {(f, s): default for f in fields for s in sides}
        for side, spec in tab.items():
            if side not in sides:
                self.fail("boundaries", side, f"unknown side; sides are {', '.join(sides)} and default")
            per_field = spec if isinstance(spec, dict) else {f: spec for f in fields}
            for f, k in per_field.items():
                if f not in fields:
                    self.fail("boundaries", side, f"names no field {f!r}; fields are {', '.join(fields)}")
                out[(f, side)] = k
        for (f, s), k in out.items():
            if k not in _KINDS:
                self.fail("boundaries", s if s in tab else "default", f"kind must be one of {_KINDS}, got {k!r}")
        return out


#: Names every expression reads as constants; a field or parameter of the same name would replace them silently.
_RESERVED_NAMES = {"pi": "the number pi", "E": "Euler's number e"}
#: What a derivation leaves where a derivative does not exist everywhere (a kink of abs, min, max; a jump).
_NOT_DIFFERENTIABLE = frozenset({"DiracDelta", "Heaviside", "Derivative", "Subs"})


def _check_reserved_names(reader, section, names):
    """Refuse ``pi`` and ``E`` as names of fields or parameters."""
    for k in names:
        if k in _RESERVED_NAMES:
            reader.fail(section, k, f"{k} is {_RESERVED_NAMES[k]} in every expression; give the {section} entry "
                                    "another name")


def _check_differentiable(reader, section, key, expr, what):
    """Refuse a derived term holding a derivative that does not exist everywhere (``abs`` twice differentiated
    gives a Dirac delta): nothing could evaluate it, and a solution with a kink converges at no design order."""
    stack, seen = [expr], 0
    while stack and seen <= MAX_EQUATION_NODES:
        e = stack.pop()
        seen += 1
        name = type(e).__name__
        if name in _NOT_DIFFERENTIABLE:
            reader.fail(section, key, f"{what} needs a derivative that does not exist everywhere ({name} "
                                      "appears): abs, min, max and sign have kinks or jumps; manufactured fields "
                                      "must be smooth in the box, e.g. sqrt((x - 0.5)**2 + 0.01) rather "
                                      "than abs(x - 0.5)")
        stack.extend(e.args)


def problem_from_text(text, source="<text>"):
    """Read a problem from TOML text; ``source`` names it in error messages.

    Raises
    ------
    ProblemError
        For anything that is not a valid problem, including files beyond the
        limits of size and time (see the module documentation).
    """
    if not isinstance(text, str):
        raise ProblemError(f"{source}: expected the text of a TOML file, got {type(text).__name__}")
    if len(text) > MAX_FILE_CHARS:
        raise ProblemError(f"{source}: the file has {len(text)} characters; problem files are limited to "
                           f"{MAX_FILE_CHARS} (define long expressions with fewer terms)")
    reader = None
    try:
        with _time_limit(MAX_LOAD_SECONDS):
            try:
                data = tomllib.loads(text)
            except tomllib.TOMLDecodeError as exc:
                raise ProblemError(f"{source}: not valid TOML ({exc}); check quotes and brackets") from None
            except (RecursionError, MemoryError):
                raise ProblemError(f"{source}: nested too deeply to read") from None
            # Derivation cache (mmsverify._diskcache): the same text gives the same
            # problem; only the name default and the source depend on where it is.
            key = _diskcache.make_key("problem", text)
            cached = _diskcache.load("problem", key)
            if isinstance(cached, Problem):
                name = data.get("name", Path(source).stem)
                if (name, source) != (cached.name, cached.source):
                    cached = cached.renamed(name, source)
                return cached
            problem = _read_fast(data, text, source)
            if problem is None:
                reader = _Reader(data, text, source)
                problem = reader.read()
                reader.stage = ("operator", "kind")  # the hash prints every derived term
            problem.content_hash()
    except _Timeout:
        section, entry = (reader.stage if reader is not None and reader.stage else (None, None))
        where = reader.where(section, entry) if section else source
        if reader is None:
            doing = "reading the TOML; split deeply nested or very long tables"
        elif section is None:
            doing = "checking the tables"
        else:
            doing = ("deriving the source terms" if (section, entry) == ("operator", "kind") else
                     "reading this entry") + ("; use fewer or simpler terms (each factor of a product "
                                              "multiplies the size of every derivative)")
        raise ProblemError(f"{where}: loading took longer than {MAX_LOAD_SECONDS:g} s and was stopped while "
                           f"{doing}") from None
    except RecursionError:
        raise ProblemError(f"{source}: an expression is nested too deeply to differentiate") from None
    _diskcache.store("problem", key, problem._packed())
    return problem


def _read_fast(data, text, source):
    """The problem read by the fast engine (see :mod:`mmsverify._fast`), or None where it steps aside."""
    operator = data.get("operator")
    if (operator.get("kind", "poisson") if isinstance(operator, dict) else "poisson") not in _fast.FAST_OPERATORS:
        return None   # before loading symengine
    engine = _fast.fast_engine()
    if engine is None:
        return None
    try:
        problem = _Reader(data, text, source, engine).read()
    except Exception:  # anything at all: the sympy reader decides and explains
        return None
    return problem._fast_form(text)


def _sympy_tables(text, source):
    """The sympy tables of a problem read by the fast engine: its text read again with sympy."""
    try:
        with _time_limit(MAX_LOAD_SECONDS):
            problem = _Reader(tomllib.loads(text), text, source).read()
    except _Timeout:
        raise ProblemError(f"{source}: building the sympy form of the problem took longer than "
                           f"{MAX_LOAD_SECONDS:g} s") from None
    return {k: getattr(problem, k) for k in Problem._SYMBOLIC}


def load_problem(path):
    """Read a problem file (or a bundled problem's name, see :func:`bundled_problems`)."""
    p = Path(path)
    if not p.exists() and not p.suffix:
        candidate = PROBLEM_DIR / f"{path}.toml"
        if candidate.exists():
            p = candidate
        else:
            raise ProblemError(f"no problem file {str(path)!r} and no bundled problem of that name; "
                               f"bundled problems: {', '.join(bundled_problems())}")
    return problem_from_text(_read_problem_file(p), str(p))


def _read_problem_file(p):
    """The text of a problem file: a regular file (devices and pipes are refused before they are opened),
    at most 4 bytes per allowed character, UTF-8 with an optional byte-order mark."""
    try:
        return fileio.read_text(p, "problem file", 4 * MAX_FILE_CHARS)
    except MMSError as exc:
        raise ProblemError(str(exc)) from None


def bundled_problems():
    """Names of the problem files shipped in ``problems/``."""
    return sorted(p.stem for p in PROBLEM_DIR.glob("*.toml"))


def get_problem(problem):
    """Accept a :class:`Problem`, a path or a bundled name; return a Problem."""
    return problem if isinstance(problem, Problem) else load_problem(problem)
