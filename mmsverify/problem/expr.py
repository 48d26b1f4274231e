"""Safe parser turning expression text from problem files into sympy objects.

Problem files are shared between people, so their text never reaches
``eval``, ``exec`` or sympy's own string parsers.  It is parsed with
:func:`ast.parse` and a whitelist of nodes (numbers, names, ``+ - * / **``,
unary signs, parentheses, calls of whitelisted functions) is turned into
sympy objects here; anything else is refused with an
:class:`~mmsverify.errors.ExpressionError` naming the construct and column.

Limits (each a refusal, never a silent truncation):

* ``MAX_TEXT_LENGTH`` characters; ``MAX_NODES`` syntax nodes; ``MAX_DEPTH``
  nesting levels (a chain ``a + b + c`` nests one level per operator).
* ``MAX_INTEGER``: magnitude of integer literals; ``MAX_DECIMAL_EXPONENT``:
  power of ten of decimal literals such as ``6.022e23``.
* ``MAX_EXPONENT``: numeric exponents satisfy ``|p| <= MAX_EXPONENT``, checked
  before sympy evaluates the power, so ``10**10**10`` fails at once.
* ``MAX_NUMBER_BITS``: bits of exact numbers, and of ``b**|numerator|`` for a
  rational power of a number (sympy computes it to extract roots).
* Results are real: the imaginary unit and constants that are not real
  (``sqrt(-1)``, ``asin(2)``, ``(-8)**(1/3)``) are refused, since the
  evaluators compute in real floating point.
"""

import ast
import math
import difflib
import inspect
import warnings
from decimal import Decimal, InvalidOperation
from types import MappingProxyType
from typing import Callable, Mapping

import sympy

from mmsverify.errors import ExpressionError

__all__ = [
    "ALLOWED_FUNCTIONS", "ExpressionError", "MAX_DECIMAL_EXPONENT",
    "MAX_DEPTH", "MAX_EXPONENT", "MAX_INTEGER", "MAX_NODES", "MAX_NUMBER_BITS",
    "MAX_TEXT_LENGTH", "parse_expression", "canonical_form", "check_real",
]

MAX_TEXT_LENGTH = 10_000
MAX_NODES = 1_000
MAX_DEPTH = 100
MAX_INTEGER = 10**15
MAX_DECIMAL_EXPONENT = 100
MAX_EXPONENT = 64
MAX_NUMBER_BITS = 512

#: Functions always available, by name (``atan2(y, x)``; ``log(x, b)`` is base b).
ALLOWED_FUNCTIONS = MappingProxyType({
    "sin": sympy.sin, "cos": sympy.cos, "tan": sympy.tan, "exp": sympy.exp,
    "log": sympy.log, "sqrt": sympy.sqrt, "sinh": sympy.sinh, "cosh": sympy.cosh,
    "tanh": sympy.tanh, "asin": sympy.asin, "acos": sympy.acos, "atan": sympy.atan,
    "atan2": sympy.atan2, "abs": sympy.Abs, "min": sympy.Min, "max": sympy.Max,
    "sign": sympy.sign, "erf": sympy.erf,
})
_ARITY = {"log": (1, 2), "atan2": (2, 2), "min": (2, None), "max": (2, None)}  # else (1, 1)
_DEFAULT_NAMES = {"pi": sympy.pi, "E": sympy.E}
_BINOPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_REFUSED_OPS = {
    ast.FloorDiv: "floor division '//'", ast.Mod: "modulo '%'", ast.MatMult: "'@'",
    ast.LShift: "shift '<<'", ast.RShift: "shift '>>'", ast.BitOr: "bitwise or '|'",
    ast.BitAnd: "bitwise and '&'", ast.Not: "'not'", ast.Invert: "bitwise not '~'",
}
_CONSTRUCTS = {
    ast.Attribute: "attribute access '.'", ast.Subscript: "subscript '[...]'",
    ast.Lambda: "lambda", ast.ListComp: "list comprehension", ast.SetComp: "set comprehension",
    ast.DictComp: "dict comprehension", ast.GeneratorExp: "generator expression",
    ast.List: "list", ast.Tuple: "tuple", ast.Set: "set", ast.Dict: "dict",
    ast.Compare: "comparison", ast.BoolOp: "boolean operator (and/or)",
    ast.IfExp: "conditional expression (if/else)", ast.JoinedStr: "f-string",
    ast.NamedExpr: "assignment expression ':='", ast.Slice: "slice",
}
_BAD = (sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)


class _Ctx:
    """State of one parse: text for locating nodes, namespaces, deadline."""

    def __init__(self, original, flat, shift, names, functions, where):
        self.original, self.flat, self.shift = original, flat, shift
        self.names, self.functions, self.where = names, functions, where

    def at(self, node):
        """1-based location of an AST node (byte column) in the original text."""
        col = getattr(node, "col_offset", 0)
        return self.at_char(len(self.flat.encode()[:col].decode(errors="replace")) + self.shift)

    def at_char(self, pos):
        before = self.original[:pos]
        line, col = before.count("\n") + 1, pos - before.rfind("\n")
        return f"line {line}, column {col}" if "\n" in self.original else f"column {col}"

    def fail(self, message, node=None):
        loc = f" at {self.at(node)}" if node is not None else ""
        return ExpressionError(f"{self.where}: {message}{loc}")


def parse_expression(text: str, names: Mapping[str, sympy.Basic], *,
                     functions: Mapping[str, Callable] | None = None,
                     where: str = "expression") -> sympy.Expr:
    """Turn expression text into a sympy expression, safely.

    Parameters
    ----------
    text : str
        Expression such as ``"sin(pi*x)*exp(-t) + 0.1*x**2"``.  Newlines are
        allowed (read as spaces); comments are not.
    names : Mapping[str, sympy.Basic]
        Allowed identifiers and their sympy objects (coordinates, constants,
        fields).  ``pi`` and ``E`` are added unless overridden here.
    functions : Mapping[str, Callable], optional
        Extra callables by name, overriding built-ins of the same name.  They
        receive the sympy arguments and return a sympy expression; an
        ``ExpressionError`` they raise is re-raised with the location.
    where : str
        Start of every error message, e.g. ``"mmsverify/problem/bundled/heat.toml, field 'T'"``.

    Returns
    -------
    sympy.Expr
        Built with sympy's ordinary evaluation; decimal literals are exact
        rationals (``0.1`` is ``1/10``).

    Raises
    ------
    ExpressionError
        For text outside the allowed language or beyond the limits.

    Examples
    --------
    >>> x = sympy.Symbol("x")
    >>> parse_expression("-x**2 + 0.5", {"x": x})
    1/2 - x**2
    """
    if not isinstance(text, str):
        raise ExpressionError(f"{where}: expected expression text, got {type(text).__name__}")
    if len(text) > MAX_TEXT_LENGTH:
        raise ExpressionError(f"{where}: expression has {len(text)} characters; the limit "
                              f"is {MAX_TEXT_LENGTH} (split it into named constants)")
    allnames = {**_DEFAULT_NAMES, **names}
    bad = [key for key, value in allnames.items() if not isinstance(value, sympy.Basic)]
    if bad:
        raise TypeError(f"names {bad} must map to sympy objects")
    flat = text.replace("\r", " ").replace("\n", " ").replace("\t", " ")
    body = flat.strip()
    ctx = _Ctx(text, body, len(flat) - len(flat.lstrip()), allnames,
               {**ALLOWED_FUNCTIONS, **(functions or {})}, where)
    if "#" in body:
        raise ExpressionError(f"{where}: comments ('#') are not allowed, found at "
                              f"{ctx.at_char(text.index('#'))}")
    if not body:
        raise ExpressionError(f"{where}: expression is empty")
    tree = _parse(ctx, text, body)
    _check_size(ctx, tree)
    try:
        result = _build(ctx, tree.body)
    except (RecursionError, MemoryError):
        raise ExpressionError(f"{where}: expression is too complex to build") from None
    if not isinstance(result, sympy.Expr):
        raise ExpressionError(f"{where}: result is a {type(result).__name__}, not an expression")
    return check_real(result, where)


def check_real(expr, where):
    """``expr`` itself, refused when it holds an infinite, undefined or non-real constant.

    The evaluators compute in real floating point. :func:`parse_expression`
    checks every expression it builds; the derivation checks what
    differentiation makes of the equations a problem file writes itself.
    """
    if expr.has(*_BAD):
        raise ExpressionError(f"{where}: expression evaluates to an infinite or undefined "
                              f"value ({str(expr)[:80]}); check for division by zero")
    complex_part = sympy.I if expr.has(sympy.I) else next(
        (a for a in expr.atoms(sympy.Function, sympy.Pow) if a.is_number and not _real_number(a, where)), None)
    if complex_part is not None:
        raise ExpressionError(f"{where}: expression has the value {str(complex_part)[:60]}, which is not a "
                              "real number (check square roots, logarithms and inverse functions of "
                              "constants); fields and coefficients must be real")
    return expr


def _float_value(e):
    """A constant's value in Python floating point (complex where a power leaves the reals), or None
    where it holds a function this small evaluator does not know."""
    if e.is_Number or e in (sympy.pi, sympy.E):
        return float(e)
    if e.is_Add or e.is_Mul:
        parts = [_float_value(a) for a in e.args]
        if any(v is None for v in parts):
            return None
        out = parts[0]
        for v in parts[1:]:
            out = out + v if e.is_Add else out * v
        return out
    if e.is_Pow:
        base, power = _float_value(e.base), _float_value(e.exp)
        return None if base is None or power is None else base ** power
    fn = getattr(math, type(e).__name__, None)
    if fn is None or len(e.args) != 1:
        return None
    arg = _float_value(e.args[0])
    return None if arg is None else fn(arg)


def _real_number(value, where):
    """Whether a constant subexpression is a real number, decided in floating point.

    Asking sympy (``is_real``) may evaluate nested exponentials to exact
    precision, which for ``exp(exp(exp(exp(exp(100)))))`` never ends; in
    floating point it overflows at once, and a constant beyond floating
    point cannot be evaluated by the solver's evaluators either.
    """
    try:
        number = _float_value(value)
    except OverflowError:
        raise ExpressionError(f"{where}: the constant {str(value)[:60]} is beyond floating point "
                              "(about 1.8e308); use smaller constants") from None
    except (ValueError, ZeroDivisionError, TypeError):  # a math domain error: asin(2), log(-1), sqrt(-1)
        return False
    if number is None:  # a function the small evaluator does not know: ask sympy
        return value.is_real is not False
    return not isinstance(number, complex)


def parse_quietly(body):
    """``ast.parse(body, mode="eval")`` with the compiler's warnings about the text silenced.

    Python 3.12+ warns on stderr of text such as ``1if`` (invalid decimal
    literal) while parsing it; the safe parser says what is wrong in its own
    words, so the warning would only be noise ahead of the message.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SyntaxWarning)
        warnings.simplefilter("ignore", DeprecationWarning)
        return ast.parse(body, mode="eval")


def _parse(ctx, text, body):
    try:
        return parse_quietly(body)
    except SyntaxError as exc:
        if not exc.offset:
            raise ExpressionError(f"{ctx.where}: syntax error: {exc.msg}") from None
        pos = min(exc.offset - 1, len(body)) + ctx.shift
        start = text.rfind("\n", 0, pos) + 1
        end = text.find("\n", pos) if "\n" in text[pos:] else len(text)
        col = pos - start
        lo = max(0, col - 60)
        shown = ("..." if lo else "") + text[start:end][lo:col + 60]
        caret = " " * (col - lo + (3 if lo else 0)) + "^"
        raise ExpressionError(f"{ctx.where}: syntax error: {exc.msg} at {ctx.at_char(pos)}\n"
                              f"    {shown}\n    {caret}") from None
    except ValueError as exc:
        raise ExpressionError(f"{ctx.where}: expression cannot be parsed ({exc})") from None
    except (RecursionError, MemoryError) as exc:
        raise ExpressionError(f"{ctx.where}: expression is nested too deeply or is too "
                              f"complex for the parser ({type(exc).__name__})") from None


def _check_size(ctx, tree):
    count, stack = 0, [(tree, 0)]
    while stack:
        node, depth = stack.pop()
        count += 1
        if count > MAX_NODES:
            raise ctx.fail(f"expression has more than {MAX_NODES} syntax nodes; "
                           "split it into named constants")
        if depth > MAX_DEPTH:
            raise ctx.fail(f"expression is nested more than {MAX_DEPTH} levels deep "
                           "(each operator in a chain counts); simplify or split it", node)
        stack.extend((child, depth + 1) for child in ast.iter_child_nodes(node)
                     if isinstance(child, (ast.expr, ast.keyword)))


def _build(ctx, node):
    result = _build_node(ctx, node)
    if _largest_number(result) > MAX_NUMBER_BITS:
        raise ctx.fail(f"number exceeds {MAX_NUMBER_BITS} bits", node)
    return result


def _largest_number(expr):
    """Bits of the largest exact number at the top of ``expr``: itself, or the base of a power, in a product.

    sympy combines powers of numbers in a product (``a**(1/64) * b**(1/64)``
    becomes ``(a*b)**(1/64)``) and extracts roots of the result, which takes
    ever longer as the numbers grow; refusing a base beyond the limit at
    every node keeps each step small.
    """
    parts = expr.args if isinstance(expr, sympy.Mul) else (expr,)
    most = 0
    for part in parts:
        base = part.base if isinstance(part, sympy.Pow) else part
        if isinstance(base, sympy.Rational):
            most = max(most, _bits(base))
    return most


def _bits(rational):
    return max(abs(rational.p).bit_length(), rational.q.bit_length())


def _build_node(ctx, node):
    if isinstance(node, ast.Constant):
        return _number(ctx, node)
    if isinstance(node, ast.Name):
        return _name(ctx, node)
    if isinstance(node, ast.UnaryOp):
        if not isinstance(node.op, (ast.UAdd, ast.USub)):
            raise ctx.fail(f"{_REFUSED_OPS[type(node.op)]} is not allowed", node)
        operand = _build(ctx, node.operand)
        return -operand if isinstance(node.op, ast.USub) else operand
    if isinstance(node, ast.BinOp):
        return _binop(ctx, node)
    if isinstance(node, ast.Call):
        return _call(ctx, node)
    label = _CONSTRUCTS.get(type(node), f"Python construct '{type(node).__name__}'")
    raise ctx.fail(f"{label} is not allowed in expressions", node)


def _number(ctx, node):
    value = node.value
    if isinstance(value, bool) or value is None or value is Ellipsis:
        raise ctx.fail(f"'{value}' is not allowed in expressions", node)
    if isinstance(value, int):
        if abs(value) > MAX_INTEGER:
            raise ctx.fail(f"integer literal exceeds {MAX_INTEGER:.0e} in magnitude; "
                           "write it in decimal exponent form such as 1.5e20", node)
        return sympy.Integer(value)
    if isinstance(value, float):
        literal = (ast.get_source_segment(ctx.flat, node) or "").replace("_", "")
        try:
            dec = Decimal(literal)
        except InvalidOperation:
            raise ctx.fail(f"cannot read number {literal!r}", node) from None
        if dec and abs(dec.adjusted()) > MAX_DECIMAL_EXPONENT:
            raise ctx.fail(f"number {literal} is outside 1e-{MAX_DECIMAL_EXPONENT}.."
                           f"1e{MAX_DECIMAL_EXPONENT} in magnitude", node)
        return sympy.Rational(*dec.as_integer_ratio())
    if isinstance(value, complex):
        raise ctx.fail("imaginary numbers are not supported", node)
    raise ctx.fail(f"{type(value).__name__} literal {value!r:.40} is not allowed "
                   "(expressions are numbers, names and operators)", node)


def _name(ctx, node):
    if node.id in ctx.names:
        return ctx.names[node.id]
    if node.id in ctx.functions:
        raise ctx.fail(f"'{node.id}' is a function; call it as {node.id}(...)", node)
    close = difflib.get_close_matches(node.id, list(ctx.names), n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    raise ExpressionError(f"{ctx.where}: unknown name '{node.id}' at {ctx.at(node)}{hint}; "
                          f"known names: {', '.join(sorted(ctx.names))} "
                          "(define it under [constants] or as a field)")


def _binop(ctx, node):
    if type(node.op) not in _BINOPS:
        # point at the operator: skip spaces and ')' after the left operand
        col, raw = node.left.end_col_offset, ctx.flat.encode()
        while col < node.right.col_offset and raw[col:col + 1] in (b" ", b")"):
            col += 1
        where_op = ast.Constant(value=None, col_offset=col)
        if isinstance(node.op, ast.BitXor):
            raise ctx.fail("'^' is not a power here; use ** for powers", where_op)
        raise ctx.fail(f"{_REFUSED_OPS[type(node.op)]} is not allowed", where_op)
    left, right = _build(ctx, node.left), _build(ctx, node.right)
    op = type(node.op)
    try:
        if op is ast.Pow:
            return _power(ctx, node, left, right)
        if op is ast.Add:
            return left + right
        if op is ast.Sub:
            return left - right
        return left * right if op is ast.Mult else left / right
    except (TypeError, ValueError, ArithmeticError) as exc:
        raise ctx.fail(f"cannot apply '{_BINOPS[op]}' ({exc})", node) from None


def _power(ctx, node, base, exponent):
    if isinstance(exponent, sympy.Number):
        if abs(exponent) > MAX_EXPONENT:
            shown = f"{exponent}" if len(str(exponent)) < 30 else "of %d digits" % len(
                str(exponent))
            raise ctx.fail(f"exponent {shown} is larger than {MAX_EXPONENT} in magnitude",
                           node.right)
        if isinstance(base, sympy.Rational) and isinstance(exponent, sympy.Rational) \
                and _bits(base) * abs(exponent.p) > MAX_NUMBER_BITS:
            raise ctx.fail(f"power {str(base)[:30]}**{exponent} exceeds {MAX_NUMBER_BITS} "
                           "bits", node)
    return base**exponent


def _call(ctx, node):
    if not isinstance(node.func, ast.Name):
        what = "a call result" if isinstance(node.func, ast.Call) else _CONSTRUCTS.get(
            type(node.func), type(node.func).__name__)
        raise ctx.fail("only calls of a function name such as sin(x) are allowed "
                       f"(here the called thing is {what})", node)
    name, nargs = node.func.id, len(node.args)
    if name not in ctx.functions:
        if name in ctx.names:
            raise ctx.fail(f"'{name}' is a name, not a function", node)
        raise ctx.fail(f"unknown function '{name}' (allowed functions: "
                       f"{', '.join(sorted(ctx.functions))})", node)
    if node.keywords:
        raise ctx.fail(f"keyword arguments are not allowed in {name}(...)", node)
    for arg in node.args:
        if isinstance(arg, ast.Starred):
            raise ctx.fail(f"starred argument '*' is not allowed in {name}(...)", arg)
    func = ctx.functions[name]
    if func is ALLOWED_FUNCTIONS.get(name):
        lo, hi = _ARITY.get(name, (1, 1))
        if nargs < lo or (hi is not None and nargs > hi):
            want = f"{lo}" if lo == hi else f"at least {lo}" if hi is None else f"{lo} to {hi}"
            raise ctx.fail(f"{name}() takes {want} argument{'s' * (want != '1')}, "
                           f"got {nargs}", node)
    else:
        try:
            sig = inspect.signature(func)
        except (TypeError, ValueError):  # no signature available: let the call decide
            sig = None
        try:
            if sig is not None:
                sig.bind(*range(nargs))
        except TypeError:
            raise ctx.fail(f"{name}() got {nargs} argument(s); expected {name}{sig}",
                           node) from None
    args = [_build(ctx, arg) for arg in node.args]
    try:
        return func(*args)
    except ExpressionError as exc:
        raise ctx.fail(f"in {name}(): {exc}", node) from exc
    except (RecursionError, MemoryError):
        raise
    except Exception as exc:  # sympy or an extra function refused its arguments
        raise ctx.fail(f"{name}() failed ({type(exc).__name__}: {exc})", node) from exc


def canonical_form(value):
    """A number or expression text as a plain nested list, the same for every spelling of one syntax tree.

    Written from the syntax tree by the rules of this module, not by sympy,
    so it depends neither on sympy's version nor on how sympy orders or
    simplifies terms: names stay names, numbers become exact decimal text
    (``"0.70"`` and ``"7e-1"`` are both ``"7/10"``), spaces, parentheses and
    unary plus leave no trace. Only text that :func:`parse_expression`
    accepted is given here. Keys content hashes of problems
    (:meth:`mmsverify.problem.record.Problem.content_hash`).

    Examples
    --------
    >>> canonical_form("sin(0.70*pi*x) + -y")
    ['+', ['call', 'sin', ['*', ['*', '7/10', ['name', 'pi']], ['name', 'x']]], ['neg', ['name', 'y']]]
    >>> canonical_form(2.5)
    '2.5'
    """
    if isinstance(value, bool):
        raise TypeError("a truth value is not a number")
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)      # the shortest text that reads back as this double
    flat = value.replace("\r", " ").replace("\n", " ").replace("\t", " ").strip()
    return _canonical_node(parse_quietly(flat).body, flat)


_CANONICAL_OPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}


def _canonical_node(node, flat):
    if isinstance(node, ast.Constant):
        if isinstance(node.value, int):
            return str(node.value)
        literal = (ast.get_source_segment(flat, node) or repr(node.value)).replace("_", "")
        p, q = Decimal(literal).as_integer_ratio()
        return str(p) if q == 1 else f"{p}/{q}"
    if isinstance(node, ast.Name):
        return ["name", node.id]
    if isinstance(node, ast.UnaryOp):
        inner = _canonical_node(node.operand, flat)
        return ["neg", inner] if isinstance(node.op, ast.USub) else inner
    if isinstance(node, ast.BinOp):
        return [_CANONICAL_OPS[type(node.op)], _canonical_node(node.left, flat), _canonical_node(node.right, flat)]
    if isinstance(node, ast.Call):
        return ["call", node.func.id, *(_canonical_node(a, flat) for a in node.args)]
    raise ExpressionError(f"no canonical form for {type(node).__name__}")  # refused by parse_expression first
