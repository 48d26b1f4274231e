"""Export a manufactured problem as source code: NumPy, C99, Fortran 90, LaTeX.

Codes that need verifying are mostly compiled programs. They need the
manufactured source terms, boundary data and exact solution in their own
language; this module writes them, with common subexpressions eliminated
(:func:`sympy.cse`) and printed by sympy's code printers.

Every generated file starts with a header naming the problem and its
content hash (:meth:`~mmsverify.problem.record.Problem.content_hash`), so a
program can report which mathematics it was built against and a stale
file is easy to spot.

The functions are the entries of
:meth:`~mmsverify.problem.derive.Manufactured.expressions`, keyed like
``exact_u``, ``source_u``, ``dudn_u_x_max`` and ``flux_u_x_max``; each takes
the space coordinates and, for transient problems, ``t`` as its last
argument. The C file is a header of ``static inline`` functions named
``mms_<key>``, plus dispatchers by field number (``mms_exact(i, ...)``,
``mms_source(i, ...)``, ``mms_dudn(i, side, ...)``) and boundary kinds
(``mms_is_neumann(i, side)``, sides numbered x_min, x_max, y_min, y_max,
z_min, z_max from 0), so a program can be written once for any problem
with the same unknowns. The Fortran file is a module of ``elemental``
functions of the same names.

Examples
--------
>>> from mmsverify.problem.derive import problem_from_text
>>> p = problem_from_text('[domain]\\nx = [0, 1]\\n[fields]\\nu = "x**3"', "cube")
>>> print(export_code(p, "c").split("static inline double mms_source_u")[1].splitlines()[2])
    return -6*x;
"""

from functools import lru_cache
import keyword
from pathlib import Path
import os
import re
import tempfile
import textwrap

import sympy as sp
from sympy.printing.c import C99CodePrinter
from sympy.printing.fortran import FCodePrinter
from sympy.printing.numpy import SciPyPrinter

from mmsverify.problem.derive import derive, get_problem
from mmsverify.errors import MMSError
from mmsverify.problem.record import SIDES

__all__ = ["LANGUAGES", "SUFFIXES", "ExportError", "export_code", "write_export", "function_names"]

#: Languages :func:`export_code` writes.
LANGUAGES = ("python", "c", "fortran", "latex")
#: File suffix per language.
SUFFIXES = {"python": ".py", "c": ".h", "fortran": ".f90", "latex": ".tex"}
_FORTRAN_NAME_MAX = 31  # Fortran 90 limit on identifier length
# The <math.h> constants sympy's C printer may use; strict C99 does not define them.
_C_MACROS = {"M_E": sp.E, "M_LOG2E": 1 / sp.log(2), "M_LOG10E": 1 / sp.log(10), "M_LN2": sp.log(2),
             "M_LN10": sp.log(10), "M_PI": sp.pi, "M_PI_2": sp.pi / 2, "M_PI_4": sp.pi / 4, "M_1_PI": 1 / sp.pi,
             "M_2_PI": 2 / sp.pi, "M_2_SQRTPI": 2 / sp.sqrt(sp.pi), "M_SQRT2": sp.sqrt(2),
             "M_SQRT1_2": 1 / sp.sqrt(2)}


class ExportError(MMSError):
    """A problem cannot be written in the requested language."""


class _C(C99CodePrinter):
    """sympy's C printer with floating-point constants in shortest round-trip form (``repr`` of the double).

    The stock printer writes 17 significant digits (``0.69999999999999996``
    for 0.7): the same double, but noise to a reader of the header.
    """

    def _print_Float(self, flt):
        text = repr(float(flt))
        return text if any(c in text for c in ".eEni") else text + ".0"


class _Fortran(FCodePrinter):
    """sympy's Fortran printer with a real-valued ``sign`` (the stock one goes through complex numbers)."""

    def _print_sign(self, expr):
        arg = self._print(expr.args[0])
        return f"merge(0.0d0, sign(1.0d0, {arg}), {arg} == 0.0d0)"


def _problem_and_expressions(problem, keys):
    problem = get_problem(problem)
    exprs = derive(problem).expressions()
    if keys is not None:
        unknown = [k for k in keys if k not in exprs]
        if unknown:
            raise ExportError(f"{problem.name}: no expression(s) {unknown}; known: {', '.join(exprs)}")
        exprs = {k: exprs[k] for k in keys}
    return problem, exprs


def _args(problem):
    return tuple(problem.coords) + ((problem.t,) if problem.t is not None else ())


def function_names(problem, language, keys=None):
    """Name of the generated function for every expression key.

    Python keeps the key; C prefixes ``mms_``; Fortran prefixes ``mms_`` and
    makes the names unique without regard to case and at most 31
    characters long, appending a number where needed.
    """
    problem, exprs = _problem_and_expressions(problem, keys)
    if language not in LANGUAGES:
        raise ExportError(f"unknown language {language!r}; choose one of {', '.join(LANGUAGES)}")
    if language in ("python", "latex"):
        return {k: (f"{k}_" if keyword.iskeyword(k) else k) for k in exprs}
    if language == "c":
        return {k: f"mms_{k}" for k in exprs}
    names, seen = {}, set()
    for i, k in enumerate(exprs):
        name = f"mms_{k}"
        if len(name) > _FORTRAN_NAME_MAX or name.lower() in seen:
            name = f"{name[:_FORTRAN_NAME_MAX - 5]}_{i:04d}"
        seen.add(name.lower())
        names[k] = name
    return names


@lru_cache(maxsize=256)
def _cse(expr):
    return sp.cse(expr, symbols=sp.numbered_symbols("cse"))


def _inert(text):
    """Text of a problem file made inert in a comment or docstring of every output language.

    Names and descriptions come from files people share: line breaks would end
    a ``#``, ``!`` or ``%`` comment, ``*/`` a C comment, three quotes or a
    backslash a Python docstring, ``??`` starts C trigraphs.
    """
    text = "".join(ch if ch.isprintable() else " " for ch in str(text))
    for bad, good in (("\\", "/"), ("*/", "* /"), ("/*", "/ *")):
        text = text.replace(bad, good)
    return re.sub(r'([?"])(?=\1)', r"\1 ", text)  # no two quotes or question marks in a row


def _header_lines(problem, language):
    from mmsverify import __version__
    about = _inert(f"Generated by mmsverify {__version__} from problem {problem.name!r}: {problem.description}")
    return textwrap.wrap(about.rstrip(": "), 96, break_on_hyphens=False) + [
        f"content hash sha256:{problem.content_hash()}",
        _inert(f"Do not edit; regenerate with: mmsverify export {problem.name} --lang {language}"),
    ]


def _side_number(side):
    return SIDES.index(side)


# -- Python ---------------------------------------------------------------
def _python(problem, exprs):
    names = function_names(problem, "python", list(exprs))
    printer = SciPyPrinter({"fully_qualified_modules": True})
    args = ", ".join(str(a) for a in _args(problem))
    bodies = []
    for key, expr in exprs.items():
        repl, (reduced,) = _cse(expr)
        lines = [f"def {names[key]}({args}):", f'    """{key} of {_inert(problem.name)}."""']
        lines += [f"    {s} = {printer.doprint(e)}" for s, e in repl]
        lines.append(f"    return _full({printer.doprint(reduced)}, {args})")
        bodies.append("\n".join(lines))
    imports = sorted(printer.module_imports) + ["numpy"]
    head = "\n".join(f"# {line}" for line in _header_lines(problem, "python"))
    table = ",\n".join(f"    {k!r}: {names[k]}" for k in exprs)
    return (f"{head}\n\n" + "".join(f"import {m}\n" for m in sorted(set(imports))) +
            f"\nCONTENT_HASH = {problem.content_hash()!r}\n\n\n"
            "def _full(value, *args):\n"
            "    shape = numpy.broadcast(*args).shape\n"
            "    return numpy.broadcast_to(numpy.asarray(value, dtype=float), shape).copy()\n\n\n" +
            "\n\n\n".join(bodies) + f"\n\n\nFUNCTIONS = {{\n{table},\n}}\n")


# -- C99 ------------------------------------------------------------------
def _c(problem, exprs):
    names = function_names(problem, "c", list(exprs))
    printer = _C({"human": False})

    def code(e):
        _, unsupported, text = printer.doprint(e)
        if unsupported:
            raise ExportError(f"{problem.name}: C cannot express {sorted(map(str, unsupported))}; rewrite the "
                              "manufactured solution with other functions")
        return text
    sig = ", ".join(f"double {a}" for a in _args(problem))
    call = ", ".join(str(a) for a in _args(problem))
    guard = "MMS_" + re.sub(r"\W", "_", problem.name).upper() + "_H"
    out = ["/*"] + [f" * {line}" for line in _header_lines(problem, "c")] + [" */",
           f"#ifndef {guard}", f"#define {guard}", "", "#include <math.h>", ""]
    macros_at = len(out)
    out += [f'#define MMS_CONTENT_HASH "{problem.content_hash()}"',
           f"#define MMS_DIM {problem.dim}", f"#define MMS_TRANSIENT {int(problem.transient)}",
           f"#define MMS_NFIELDS {len(problem.fields)}", ""]
    for key, expr in exprs.items():
        repl, (reduced,) = _cse(expr)
        out.append(f"/* {key} */")
        out.append(f"static inline double {names[key]}({sig})")
        out.append("{")
        out += [f"    const double {s} = {code(e)};" for s, e in repl]
        out.append(f"    return {code(reduced)};")
        out += ["}", ""]
    fields = list(problem.fields)
    out += ["/* field names, numbered from 0 */", "static inline const char *mms_field_name(int field)", "{"]
    out += [f'    if (field == {i}) return "{f}";' for i, f in enumerate(fields)]
    out += ["    return 0;", "}", ""]
    out += ["/* 1 when a side (0 x_min, 1 x_max, 2 y_min, 3 y_max, 4 z_min, 5 z_max) is Neumann */",
            "static inline int mms_is_neumann(int field, int side)", "{"]
    for i, f in enumerate(fields):
        for side in SIDES[:2 * problem.dim]:
            if problem.boundaries[(f, side)] == "neumann":
                out.append(f"    if (field == {i} && side == {_side_number(side)}) return 1;")
    out += ["    (void)field; (void)side;", "    return 0;", "}", ""]
    for kind in ("exact", "source"):
        out += [f"static inline double mms_{kind}(int field, {sig})", "{"]
        out += [f"    if (field == {i}) return {names[f'{kind}_{f}']}({call});"
                for i, f in enumerate(fields) if f"{kind}_{f}" in exprs]
        out += ["    return NAN;", "}", ""]
    out += ["/* outward normal derivative on a Neumann side; NAN elsewhere */",
            f"static inline double mms_dudn(int field, int side, {sig})", "{"]
    for i, f in enumerate(fields):
        for side in SIDES[:2 * problem.dim]:
            key = f"dudn_{f}_{side}"
            if key in exprs:
                out.append(f"    if (field == {i} && side == {_side_number(side)}) return {names[key]}({call});")
    out += ["    (void)field; (void)side;" + "".join(f" (void){a};" for a in _args(problem)),
            "    return NAN;", "}", "", f"#endif /* {guard} */", ""]
    used = sorted(set(re.findall(r"\bM_[A-Z0-9_]+\b", "\n".join(out[macros_at:]))) & set(_C_MACROS))
    out[macros_at:macros_at] = [line for m in used for line in
                                (f"#ifndef {m}", f"#define {m} {float(_C_MACROS[m])!r}", "#endif")] + [""] * bool(used)
    return "\n".join(out)


# -- Fortran 90 -----------------------------------------------------------
def _fortran(problem, exprs):
    names = function_names(problem, "fortran", list(exprs))
    printer = _Fortran({"source_format": "free", "standard": 95, "human": False})
    args = [str(a) for a in _args(problem)]
    module = ("mms_" + re.sub(r"\W", "_", problem.name).lower())[:_FORTRAN_NAME_MAX]
    constants, bodies = {}, []
    for key, expr in exprs.items():
        repl, (reduced,) = _cse(expr)
        body = [f"  elemental function {names[key]}({', '.join(args)}) result(r)",
                f"    ! {key}", f"    real(dp), intent(in) :: {', '.join(args)}", "    real(dp) :: r"]
        temps = [str(s) for s, _ in repl]
        body += ["    real(dp) :: " + ", ".join(temps[i:i + 10]) for i in range(0, len(temps), 10)]
        code = []
        for target, e in list(repl) + [(sp.Symbol("r"), reduced)]:
            consts, unsupported, text = printer.doprint(e, assign_to=target)
            if unsupported:
                raise ExportError(f"{problem.name}, {key}: Fortran cannot express {sorted(map(str, unsupported))}; "
                                  "rewrite the manufactured solution with other functions")
            constants.update({str(c): v for c, v in consts})
            code += ["    " + line.strip() if not line.startswith(" ") else "      " + line.strip()
                     for line in text.splitlines()]
        bodies.append("\n".join(body + code + [f"  end function {names[key]}"]))
    lines = [f"! {line}" for line in _header_lines(problem, "fortran")]
    lines += [f"module {module}", "  implicit none", "  private",
              "  integer, parameter :: dp = kind(1.0d0)",
              f"  character(len=*), parameter, public :: mms_content_hash = '{problem.content_hash()}'"]
    lines += [f"  real(dp), parameter :: {c} = {v}" for c, v in sorted(constants.items())]
    lines += [f"  public :: {n}" for n in names.values()]
    lines += ["contains", "", "\n\n".join(bodies), "", f"end module {module}", ""]
    return "\n".join(lines)


# -- LaTeX ----------------------------------------------------------------
def _latex(problem, exprs):
    args = ", ".join(sp.latex(a) for a in _args(problem))
    lines = [f"% {line}" for line in _header_lines(problem, "latex")]
    lines += [r"\begin{align*}"]
    rows = []
    for key, expr in exprs.items():
        label = key.replace("_", r"\_")
        rows.append(rf"  \mathrm{{{label}}}({args}) &= {sp.latex(expr)}")
    lines.append(" \\\\\n".join(rows))
    lines += [r"\end{align*}", ""]
    return "\n".join(lines)


_WRITERS = {"python": _python, "c": _c, "fortran": _fortran, "latex": _latex}


def export_code(problem, language, keys=None):
    """Source text of a problem's manufactured expressions in one language.

    Parameters
    ----------
    problem : Problem, path or bundled name
    language : {"python", "c", "fortran", "latex"}
    keys : sequence of str, optional
        Expression keys to include (default: all of
        :meth:`~mmsverify.problem.derive.Manufactured.expressions`).

    Returns
    -------
    str
    """
    if language not in _WRITERS:
        raise ExportError(f"unknown language {language!r}; choose one of {', '.join(LANGUAGES)}")
    problem, exprs = _problem_and_expressions(problem, keys)
    return _WRITERS[language](problem, exprs)


def write_export(problem, language, path, keys=None):
    """Write :func:`export_code` to ``path`` atomically; returns the path.

    A directory as ``path`` receives ``mms_<problem><suffix>``.
    """
    problem = get_problem(problem)
    text = export_code(problem, language, keys)
    path = Path(path)
    if path.is_dir():
        path = path / (re.sub(r"\W", "_", f"mms_{problem.name}") + SUFFIXES[language])
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
