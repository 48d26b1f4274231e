"""Manufactured problems: the record, the file format, the bundled set.

This module reads problem text into a :class:`Problem`, the parsed input,
and differentiates nothing: the source terms, fluxes and exact values of
functionals are made from a Problem by :mod:`mmsverify.problem.derive`,
which also holds the functions that load a problem file
(:func:`~mmsverify.problem.derive.load_problem`,
:func:`~mmsverify.problem.derive.problem_from_text`) and refuse a file
whose derivation fails at load time.

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

    [boundaries]                        # dirichlet, neumann, robin or periodic per side
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
    # cells = [6, 10, 17, 29]           # or a list of resolutions, one level each (any ratios)
    ratio = 2
    base_steps = 8                      # time steps of the coarsest level

Limits (each a :class:`~mmsverify.errors.ProblemError` naming the file and
the place, never a hang): files of at most ``MAX_FILE_CHARS`` characters,
keys of at most ``MAX_KEY_PARTS`` dotted parts and tables of at most
``MAX_TABLE_ENTRIES`` entries; the limits of the expression parser
(:mod:`mmsverify.problem.expr`); and the limits on the size of the
derived terms (:mod:`mmsverify.problem.derive`). All of them are counts, so the same file gets the same answer
on every machine. Numbers are finite; orders are whole numbers from 1 to
``MAX_ORDER``.
"""

import dataclasses
import importlib.resources
from dataclasses import dataclass, field
import hashlib
import json
import math
from pathlib import Path
import re
import tomllib

import sympy as sp

from mmsverify import fileio
from mmsverify.errors import ProblemError, MMSError
from mmsverify.problem.boundary import robin_coefficients
from mmsverify.problem.expr import canonical_form, parse_expression
from mmsverify.problem.operators import derivative_functions, get_operator

__all__ = ["Problem", "parse_problem", "read_problem_text", "place", "bundled_problems", "SIDES",
           "PROBLEM_DIR", "MAX_FILE_CHARS", "MAX_KEY_PARTS", "MAX_TABLE_ENTRIES", "MAX_ORDER"]

#: The bundled problem files, shipped as package data.
PROBLEM_DIR = Path(str(importlib.resources.files("mmsverify.problem") / "bundled"))
SPACE = ("x", "y", "z")
SIDES = ("x_min", "x_max", "y_min", "y_max", "z_min", "z_max")
_KINDS = ("dirichlet", "neumann", "robin", "periodic")   # see mmsverify.problem.boundary
#: Longest problem file read (characters); real ones are a few thousand.
MAX_FILE_CHARS = 1_000_000
#: Most dotted parts of one key or table name (``[operator.equations]`` has two).
MAX_KEY_PARTS = 16
#: Most entries in one table ([constants], [fields], [quantities], ...).
MAX_TABLE_ENTRIES = 200
#: Largest formal order accepted in [order].
MAX_ORDER = 20
_STUDY_KEYS = {"levels": (2, 30), "base_cells": (1, 10**9), "ratio": None, "base_steps": (1, 10**9),
               "cells": (1, 10**9)}
_TOP_KEYS = {"name", "description", "domain", "constants", "fields", "operator", "boundaries", "order", "study",
             "quantities", "bounds"}


@dataclass(frozen=True)
class Problem:
    """A manufactured problem as read from its file, ready for derivation.

    A plain record of the parsed input: nothing in it is differentiated.
    The source terms and fluxes come from
    :func:`mmsverify.problem.derive.derive_equations`.

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
    boundaries : dict of (field, side) to str
        ``"dirichlet"``, ``"neumann"``, ``"robin"`` or ``"periodic"``.
    robin : dict of side to float
        The coefficient alpha of each Robin side (see :mod:`mmsverify.problem.boundary`).
    space_order, time_order : int or None
    tolerance : float
    study : dict
    quantities : dict of str to tuple
        Functionals, each ``(kind, expr, where, text)``:
        ``("integral", expr, None, text)``, ``("flux", None, side, field)``
        (the outward normal flux on that side is derived, see
        :class:`mmsverify.problem.derive.Derivation`) or
        ``("point", expr, (x, ...), text)``; ``text`` is what the file says.
    source : str
        Where it came from (file path or ``"<python>"``).
    bounds : dict of str to tuple
        Physical admissibility limits from ``[bounds]``, each
        ``(expr, min or None, max or None)``; expr has the fields substituted.
    equation_text : dict of str to str
        The equations of a custom operator as written in the file (empty for
        built-in operators), so their top-level terms can be examined.
    operator_equations : dict of str to sympy.Expr
        The equations of a custom operator as parsed, fields and parameters
        substituted, with every ``d(...)`` and ``lap(...)`` held as an
        unevaluated :class:`sympy.Derivative` (empty for built-in operators).
    order_rules : tuple of (str, OrderRule)
        The ``[order.by]`` rules of single fields, norms and quantities
        (see :mod:`mmsverify.problem.rules`).
    order_given : tuple of str or None
        The axes (``"space"``, ``"time"``) whose formal order the file's
        ``[order]`` states; the others hold defaults. None (a problem made in
        Python) counts every order as given.
    digest : str
        SHA-256 of the canonical parsed input (see :meth:`content_hash`).
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
    boundaries: dict
    space_order: int = 2
    time_order: int = None
    tolerance: float = 0.1
    study: dict = field(default_factory=dict)
    source: str = "<python>"
    quantities: dict = field(default_factory=dict)
    bounds: dict = field(default_factory=dict)
    equation_text: dict = field(default_factory=dict)
    operator_equations: dict = field(default_factory=dict)
    order_given: tuple = None
    robin: dict = field(default_factory=dict)
    order_rules: tuple = ()
    digest: str = ""

    #: Fields :meth:`with_changes` may change: none of them enters the content hash or a derived table.
    _PLAIN = ("name", "description", "source", "space_order", "time_order", "tolerance", "study", "order_given",
              "order_rules")

    def with_changes(self, **changes):
        """A copy with some plain fields changed (orders, tolerance, study defaults, name, source).

        Only fields that enter neither the content hash nor a derived table
        may change, so the copy keeps a true hash.
        """
        bad = sorted(set(changes) - set(Problem._PLAIN))
        if bad:
            raise TypeError(f"with_changes() changes only {', '.join(Problem._PLAIN)}; got {', '.join(bad)}")
        return dataclasses.replace(self, **changes)

    @property
    def dim(self):
        return len(self.coords)

    @property
    def transient(self):
        return self.t is not None

    @property
    def field_names(self):
        return tuple(self.fields)

    def names(self, table):
        """Keys of one table (``"fields"``, ``"parameters"``, ``"quantities"``, ...)."""
        return tuple(getattr(self, table))

    def quantity_info(self, name):
        """``(kind, where, text)`` of a declared quantity."""
        kind, _, where, text = self.quantities[name]
        return kind, where, text

    def parameter_constant(self, name, default=None):
        """An operator parameter as a float when it is a constant, None when it varies.

        ``default`` when the operator has no parameter of that name.
        """
        expr = self.parameters.get(name)
        if expr is None:
            return default
        return None if expr.free_symbols else float(expr)

    def parameter_symbols(self, name):
        """Names of the coordinates (and ``t``) a parameter depends on; empty when constant or absent."""
        expr = self.parameters.get(name)
        return () if expr is None else tuple(sorted(str(s) for s in expr.free_symbols))

    def content_hash(self):
        """SHA-256 of the canonical parsed input: everything that defines the mathematics.

        Made by the reader from the file's tables, with every expression
        written from the safe parser's syntax tree
        (:func:`mmsverify.problem.expr.canonical_form`) and keys sorted, so it does
        not depend on sympy's version, on how sympy prints, or on the
        spelling of the file (spaces, comments, order of entries). The name,
        description, orders, tolerance, ``[study]`` and ``[bounds]`` are left
        out: they change no derived term.
        """
        if not self.digest:
            raise ValueError(f"{self.name}: a Problem made without a reader has no content hash; read it with "
                             "problem_from_text, load_problem or parse_problem")
        return self.digest

    def boundary_kind(self, field_name, side):
        return self.boundaries[(field_name, side)]


def place(text, source, section, key=None):
    """Where an entry of a problem file is: ``"file, line 7, [operator] kind"``.

    The line is left out when the text does not spell the key (a default).
    """
    line = _line_of(text, section, key) if key else None
    loc = f"{source}" + (f", line {line}" if line else "")
    return f"{loc}, [{section}]" + (f" {key}" if key else "")


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

    def __init__(self, data, text, source):
        self.data, self.text, self.source = data, text, source

    def where(self, section, key=None):
        return place(self.text, self.source, section, key)

    def fail(self, section, key, message):
        raise ProblemError(f"{self.where(section, key)}: {message}")

    def table(self, name, required=False):
        value = self.data.get(name, {})
        if required and name not in self.data:
            raise ProblemError(f"{self.source}: missing [{name}] table; add it (see `mmsverify list --format`)")
        if not isinstance(value, dict):
            raise ProblemError(f"{self.source}: [{name}] must be a table of key = value lines")
        if len(value) > MAX_TABLE_ENTRIES:
            raise ProblemError(f"{self.source}: [{name}] has {len(value)} entries; a problem file holds at most "
                               f"{MAX_TABLE_ENTRIES} per table")
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
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            self.fail(section, key, f"expected an expression in quotes or a number, got {value!r:.60}")
        if isinstance(value, (int, float)):
            self.number(section, key, value)
            return _number(value)
        try:
            return parse_expression(value, names, functions=functions, where=self.where(section, key))
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
        coords = tuple(sp.Symbol(a, real=True) for a in axes)
        t = sp.Symbol("t", real=True) if "t" in box else None

        names = {str(c): c for c in coords}
        if t is not None:
            names["t"] = t
        constants = {}
        for k, v in self.table("constants").items():
            if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", k) or k in names or k in ("pi", "E"):
                self.fail("constants", k, "a constant needs a new identifier (not x, y, z, t, pi, E)")
            constants[k] = self.number("constants", k, v)
        const_syms = {k: _number(v if int(v) != v else int(v)) for k, v in constants.items()}
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
        equations, parameters = {}, {}
        if kind == "custom":
            eqs = op_tab.pop("equations", None)
            if isinstance(eqs, dict) and len(eqs) > MAX_TABLE_ENTRIES:
                raise ProblemError(f"{self.source}: [operator.equations] has {len(eqs)} entries; a problem file "
                                   f"holds at most {MAX_TABLE_ENTRIES} per table")
            if not isinstance(eqs, dict) or not eqs:
                raise ProblemError(f"{self.where('operator')}: a custom operator needs an [operator.equations] "
                                   "table with one equation per field, e.g. u = \"-lap(u)\"")
            _check_reserved_names(self, "operator", op_tab)
            for k, v in op_tab.items():
                parameters[k] = self.expression("operator", k, v, with_fields)
            fns = derivative_functions(coords, t, evaluate=False)   # differentiated by mmsverify.problem.derive
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
        quantities = self._quantities(with_fields, fields, coords, box, axes)
        bounds = self._bounds({**with_fields, **parameters}, fields, parameters)
        equation_text = {k: str(v) for k, v in eqs.items()} if kind == "custom" else {}
        given = {k: v for k, v in op_tab.items() if k != "equations"}
        if kind != "custom":
            given = {k: op_tab.get(k, default) for k, default in get_operator(kind).parameters.items()}
        digest = _digest(self.data, kind, given, boundaries)
        return Problem(bounds=bounds, equation_text=equation_text, quantities=quantities, name=name, digest=digest,
                       description=description, coords=coords, t=t,
                       lower=tuple(box[a][0] for a in axes), upper=tuple(box[a][1] for a in axes),
                       t_range=box.get("t"), constants=constants, fields=fields, operator=kind,
                       parameters=parameters, operator_equations=equations, boundaries=boundaries,
                       space_order=space_order, time_order=time_order, tolerance=tolerance, study=study,
                       source=self.source, order_given=tuple(a for a in ("space", "time") if a in order),
                       order_rules=order_rules, robin=self.robin)

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
            items = value if key in ("base_cells", "cells") and isinstance(value, list) else [value]
            if key == "cells" and not (isinstance(value, list) and len(value) >= 2):
                self.fail("study", key, f"give a list of at least 2 resolutions, coarse to fine, e.g. [6, 10, 17, 29]; "
                                        f"got {value!r:.60}")
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

    def _quantities(self, names, fields, coords, box, axes):
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
                out[name] = ("flux", None, side, f)   # the outward normal flux is derived
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
        robin = tab.pop("robin", None)
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
        self.robin = robin_coefficients(out, robin, lambda key, message: self.fail("boundaries", key, message))
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



def parse_problem(text, source="<text>"):
    """Read a problem from TOML text, without deriving it; ``source`` names it in error messages.

    :func:`mmsverify.problem.derive.problem_from_text` reads and derives,
    so that a file whose derivation fails is refused at once.

    Raises
    ------
    ProblemError
        For anything that is not a valid problem text, including files
        beyond the limits of size (see the module documentation).
    """
    if not isinstance(text, str):
        raise ProblemError(f"{source}: expected the text of a TOML file, got {type(text).__name__}")
    if len(text) > MAX_FILE_CHARS:
        raise ProblemError(f"{source}: the file has {len(text)} characters; problem files are limited to "
                           f"{MAX_FILE_CHARS} (define long expressions with fewer terms)")
    for number, line in enumerate(text.splitlines(), 1):
        if line.split("=", 1)[0].count(".") > MAX_KEY_PARTS:    # the TOML reader is slow on such keys
            raise ProblemError(f"{source}, line {number}: a key of more than {MAX_KEY_PARTS} dotted parts; problem "
                               "files use tables at most two levels deep, such as [operator.equations]")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ProblemError(f"{source}: not valid TOML ({exc}); check quotes and brackets") from None
    except (RecursionError, MemoryError):
        raise ProblemError(f"{source}: nested too deeply to read") from None
    try:
        return _Reader(data, text, source).read()
    except RecursionError:
        raise ProblemError(f"{source}: an expression is nested too deeply to read") from None


def _number(value):
    return sp.nsimplify(value) if isinstance(value, int) else sp.Float(value)


def _digest(data, kind, parameters, boundaries):
    """SHA-256 of the canonical parsed input (see :meth:`Problem.content_hash`).

    ``parameters`` holds each operator parameter as the file gives it or as
    the operator's default, so a changed default changes the hash.
    """
    def table(name):
        value = data.get(name, {})
        return value if isinstance(value, dict) else {}

    def quantity(spec):
        return {k: ([canonical_form(v) for v in spec[k]] if k == "at" else
                    spec[k] if k in ("flux", "side") else canonical_form(spec[k])) for k in sorted(spec)}

    operator = table("operator")
    canonical = {
        "format": 1,
        "domain": {a: [canonical_form(v) for v in box] for a, box in table("domain").items()},
        "constants": {k: canonical_form(v) for k, v in table("constants").items()},
        "fields": {k: canonical_form(v) for k, v in table("fields").items()},
        "operator": {"kind": kind, "parameters": {k: canonical_form(v) for k, v in parameters.items()},
                     "equations": {k: canonical_form(v) for k, v in operator.get("equations", {}).items()}},
        "boundaries": sorted(f"{f}:{side}:{k}" for (f, side), k in boundaries.items()),
        "quantities": {k: quantity(v) for k, v in table("quantities").items()},
    }
    if "robin" in table("boundaries"):      # only when given, so the hashes of other problems stay
        canonical["robin"] = table("boundaries")["robin"]
    return hashlib.sha256(json.dumps(canonical, sort_keys=True, separators=(",", ":")).encode()).hexdigest()


def read_problem_text(path):
    """The text of a problem file (or of a bundled problem, by name) and the path naming it in messages.

    Returns ``(text, source)``; :func:`parse_problem` reads the text.
    """
    p = Path(path)
    if not p.exists() and not p.suffix:
        candidate = PROBLEM_DIR / f"{path}.toml"
        if candidate.exists():
            p = candidate
        else:
            raise ProblemError(f"no problem file {str(path)!r} and no bundled problem of that name; "
                               f"bundled problems: {', '.join(bundled_problems())}")
    return _read_problem_file(p), str(p)


def _read_problem_file(p):
    """The text of a problem file: a regular file (devices and pipes are refused before they are opened),
    at most 4 bytes per allowed character, UTF-8 with an optional byte-order mark."""
    try:
        return fileio.read_text(p, "problem file", 4 * MAX_FILE_CHARS)
    except MMSError as exc:
        raise ProblemError(str(exc)) from None


def bundled_problems():
    """Names of the bundled problem files (in :data:`PROBLEM_DIR`)."""
    return sorted(p.stem for p in PROBLEM_DIR.glob("*.toml"))

