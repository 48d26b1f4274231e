"""Safe parser turning expression text from problem files into sympy objects.

Problem files are shared between people, so their text never reaches
``eval``, ``exec`` or sympy's own string parsers.  The text is parsed with
:func:`ast.parse` and a whitelist of nodes (numbers, names, ``+ - * / **``,
unary signs, parentheses, calls of whitelisted functions) is turned into
sympy objects here.  Everything else is refused with an
:class:`~mmsverify.errors.ExpressionError` naming the construct and column.

Limits (refusals, not silent truncation):

``MAX_TEXT_LENGTH``
    characters of expression text.
``MAX_NODES``, ``MAX_DEPTH``
    syntax-tree size and nesting depth (a chain ``a + b + c`` nests one
    level per operator).
``MAX_INTEGER``, ``MAX_DECIMAL_EXPONENT``
    magnitude of integer literals, and the power of ten in decimal
    literals such as ``6.022e23``.
``MAX_EXPONENT``
    a numeric exponent must satisfy ``|p| <= MAX_EXPONENT``; checked before
    sympy evaluates the power, so ``10**10**10`` fails at once.
``MAX_NUMBER_BITS``
    bits of any exact intermediate number (numerator or denominator).
``MAX_BUILD_SECONDS``
    safety net on the total build time; realistic expressions take
    milliseconds.
"""

import ast
import difflib
import inspect
import time
from decimal import Decimal, InvalidOperation
from types import MappingProxyType
from typing import Callable, Mapping

import sympy

from .errors import ExpressionError

__all__ = [
    "ALLOWED_FUNCTIONS",
    "ExpressionError",
    "MAX_BUILD_SECONDS",
    "MAX_DECIMAL_EXPONENT",
    "MAX_DEPTH",
    "MAX_EXPONENT",
    "MAX_INTEGER",
    "MAX_NODES",
    "MAX_NUMBER_BITS",
    "MAX_TEXT_LENGTH",
    "parse_expression",
]

MAX_TEXT_LENGTH = 10_000
MAX_NODES = 1_000
MAX_DEPTH = 100
MAX_INTEGER = 10**15
MAX_DECIMAL_EXPONENT = 100
MAX_EXPONENT = 64
MAX_NUMBER_BITS = 512
MAX_BUILD_SECONDS = 1.0

#: Functions always available, by name (``atan2(y, x)``; ``log(x, b)`` is base b).
ALLOWED_FUNCTIONS = MappingProxyType({
    "sin": sympy.sin, "cos": sympy.cos, "tan": sympy.tan,
    "exp": sympy.exp, "log": sympy.log, "sqrt": sympy.sqrt,
    "sinh": sympy.sinh, "cosh": sympy.cosh, "tanh": sympy.tanh,
    "asin": sympy.asin, "acos": sympy.acos, "atan": sympy.atan,
    "atan2": sympy.atan2, "abs": sympy.Abs, "min": sympy.Min,
    "max": sympy.Max, "sign": sympy.sign, "erf": sympy.erf,
})
# (least, most) argument counts; None means no upper bound.
_ARITY = {"log": (1, 2), "atan2": (2, 2), "min": (2, None), "max": (2, None)}
_DEFAULT_NAMES = {"pi": sympy.pi, "E": sympy.E}
_BINOPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_REFUSED_OPS = {
    ast.FloorDiv: "floor division '//'", ast.Mod: "modulo '%'",
    ast.MatMult: "matrix product '@'", ast.LShift: "shift '<<'",
    ast.RShift: "shift '>>'", ast.BitOr: "bitwise or '|'",
    ast.BitAnd: "bitwise and '&'", ast.Not: "'not'", ast.Invert: "bitwise not '~'",
}
_CONSTRUCTS = {
    ast.Attribute: "attribute access '.'", ast.Subscript: "subscript '[...]'",
    ast.Lambda: "lambda", ast.ListComp: "list comprehension",
    ast.SetComp: "set comprehension", ast.DictComp: "dict comprehension",
    ast.GeneratorExp: "generator expression", ast.List: "list",
    ast.Tuple: "tuple", ast.Set: "set", ast.Dict: "dict",
    ast.Compare: "comparison", ast.BoolOp: "boolean operator (and/or)",
    ast.IfExp: "conditional expression (if/else)", ast.JoinedStr: "f-string",
    ast.NamedExpr: "assignment expression ':='", ast.Starred: "starred argument '*'",
    ast.Slice: "slice", ast.Await: "await", ast.Yield: "yield",
    ast.YieldFrom: "yield",
}
_BAD = (sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)


class _Ctx:
    """State of one parse: text for column lookup, namespaces, deadline."""

    def __init__(self, original, flat, shift, names, functions, where):
        self.original, self.flat, self.shift = original, flat, shift
        self.names, self.functions, self.where = names, functions, where
        self.deadline = time.monotonic() + MAX_BUILD_SECONDS

    def at(self, node):
        """Human location (1-based) of an AST node in the original text."""
        col = getattr(node, "col_offset", 0)
        pos = len(self.flat.encode()[:col].decode(errors="replace")) + self.shift
        return self.at_char(pos)

    def at_char(self, pos):
        before = self.original[:pos]
        line = before.count("\n") + 1
        col = pos - (before.rfind("\n") + 1) + 1
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
        allowed (treated as spaces); comments are not.
    names : Mapping[str, sympy.Basic]
        Allowed identifiers and their sympy objects (coordinates, constants,
        fields).  ``pi`` and ``E`` are added unless overridden here.
    functions : Mapping[str, Callable], optional
        Extra callables by name (override built-ins of the same name).  They
        receive the sympy arguments and must return a sympy expression; an
        ``ExpressionError`` they raise is reported with location.
    where : str
        Location put at the start of every error message, e.g.
        ``"problems/heat.toml, field 'T'"``.

    Returns
    -------
    sympy.Expr
        The expression, built with sympy's ordinary evaluation; decimal
        literals become exact rationals (``0.1`` is ``1/10``).

    Raises
    ------
    ExpressionError
        For any text outside the allowed language or beyond the limits.

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
    allnames = dict(_DEFAULT_NAMES)
    for key, value in names.items():
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            value = sympy.Integer(value) if isinstance(value, int) else sympy.Float(value)
        if not isinstance(value, sympy.Basic):
            raise TypeError(f"names[{key!r}] must be a sympy object, got {type(value).__name__}")
        allnames[key] = value
    funcs = dict(ALLOWED_FUNCTIONS)
    funcs.update(functions or {})
    flat = text.replace("\r", " ").replace("\n", " ").replace("\t", " ")
    body = flat.strip()
    ctx = _Ctx(text, body, len(flat) - len(flat.lstrip()), allnames, funcs, where)
    if "#" in body:
        raise ExpressionError(f"{where}: comments ('#') are not allowed at "
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
    if result.has(*_BAD):
        raise ExpressionError(f"{where}: expression evaluates to an infinity or undefined "
                              f"value ({result}); check for division by zero")
    return result


def _parse(ctx, text, body):
    try:
        return ast.parse(body, mode="eval")
    except SyntaxError as exc:
        if not exc.offset:
            raise ExpressionError(f"{ctx.where}: syntax error: {exc.msg}") from None
        pos = min(exc.offset - 1, len(body)) + ctx.shift
        line_start = text.rfind("\n", 0, pos) + 1
        line_end = text.find("\n", pos)
        line = text[line_start:len(text) if line_end < 0 else line_end]
        col = pos - line_start
        lo = max(0, col - 60)
        shown = ("..." if lo else "") + line[lo:col + 60]
        caret = " " * (col - lo + (3 if lo else 0)) + "^"
        raise ExpressionError(f"{ctx.where}: syntax error: {exc.msg} at {ctx.at_char(pos)}\n"
                              f"    {shown}\n    {caret}") from None
    except (RecursionError, MemoryError, ValueError) as exc:
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
    if time.monotonic() > ctx.deadline:
        raise ctx.fail(f"expression took longer than {MAX_BUILD_SECONDS} s to build; "
                       "simplify it", node)
    result = _build_node(ctx, node)
    if isinstance(result, sympy.Rational) and max(
            abs(result.p).bit_length(), result.q.bit_length()) > MAX_NUMBER_BITS:
        raise ctx.fail(f"number exceeds {MAX_NUMBER_BITS} bits", node)
    return result


def _build_node(ctx, node):
    if isinstance(node, ast.Constant):
        return _number(ctx, node)
    if isinstance(node, ast.Name):
        return _name(ctx, node)
    if isinstance(node, ast.UnaryOp):
        if isinstance(node.op, (ast.UAdd, ast.USub)):
            operand = _build(ctx, node.operand)
            return -operand if isinstance(node.op, ast.USub) else operand
        raise ctx.fail(f"{_REFUSED_OPS[type(node.op)]} is not allowed", node)
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
    known = ", ".join(sorted(ctx.names))
    close = difflib.get_close_matches(node.id, list(ctx.names), n=1)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    raise ExpressionError(f"{ctx.where}: unknown name '{node.id}' at {ctx.at(node)}{hint}; "
                          f"known names: {known} (define it under [constants] or as a field)")


def _binop(ctx, node):
    if isinstance(node.op, ast.BitXor):
        raise ctx.fail("'^' is not a power here; use ** for powers", _op_node(ctx, node))
    if type(node.op) not in _BINOPS:
        raise ctx.fail(f"{_REFUSED_OPS[type(node.op)]} is not allowed", _op_node(ctx, node))
    left, right = _build(ctx, node.left), _build(ctx, node.right)
    try:
        if isinstance(node.op, ast.Pow):
            return _power(ctx, node, left, right)
        op = type(node.op)
        if op is ast.Add:
            return left + right
        if op is ast.Sub:
            return left - right
        return left * right if op is ast.Mult else left / right
    except ExpressionError:
        raise
    except (TypeError, ValueError, ArithmeticError) as exc:
        raise ctx.fail(f"cannot apply '{_BINOPS[type(node.op)]}' ({exc})", node) from None


def _op_node(ctx, node):
    """A stand-in node whose column is that of the operator of a BinOp."""
    raw = ctx.flat.encode()
    col = node.left.end_col_offset
    while col < node.right.col_offset and raw[col:col + 1] in (b" ", b")"):
        col += 1
    return ast.Constant(value=None, col_offset=col)


def _power(ctx, node, base, exponent):
    if isinstance(exponent, sympy.Number):
        if abs(exponent) > MAX_EXPONENT:
            shown = str(exponent) if len(str(exponent)) < 30 else "of %d digits" % len(
                str(exponent))
            raise ctx.fail(f"exponent {shown} is larger than {MAX_EXPONENT} in "
                           "magnitude", node.right)
        if isinstance(base, sympy.Rational):
            bits = max(abs(base.p).bit_length(), base.q.bit_length())
            if bits * abs(exponent) > MAX_NUMBER_BITS:
                raise ctx.fail(f"power {base}**{exponent} exceeds {MAX_NUMBER_BITS} bits", node)
    return base**exponent


def _call(ctx, node):
    if not isinstance(node.func, ast.Name):
        what = "a call result" if isinstance(node.func, ast.Call) else _CONSTRUCTS.get(
            type(node.func), type(node.func).__name__)
        raise ctx.fail("only calls of a function name such as sin(x) are allowed "
                       f"(here the called thing is {what})", node)
    name = node.func.id
    if name in ctx.names and name not in ctx.functions:
        raise ctx.fail(f"'{name}' is a name, not a function", node)
    if name not in ctx.functions:
        allowed = ", ".join(sorted(ctx.functions))
        raise ctx.fail(f"unknown function '{name}' (allowed functions: {allowed})", node)
    if node.keywords:
        raise ctx.fail(f"keyword arguments are not allowed in {name}(...)", node)
    for arg in node.args:
        if isinstance(arg, ast.Starred):
            raise ctx.fail(f"starred argument '*' is not allowed in {name}(...)", arg)
    func = ctx.functions[name]
    nargs = len(node.args)
    if name in ALLOWED_FUNCTIONS and func is ALLOWED_FUNCTIONS[name]:
        lo, hi = _ARITY.get(name, (1, 1))
        if nargs < lo or (hi is not None and nargs > hi):
            want = (f"{lo}" if lo == hi else f"at least {lo}" if hi is None
                    else f"{lo} to {hi}")
            raise ctx.fail(f"{name}() takes {want} argument{'s' * (want != '1')}, "
                           f"got {nargs}", node)
    else:
        try:
            sig = inspect.signature(func)
        except (TypeError, ValueError):
            sig = None
        if sig is not None:
            try:
                sig.bind(*range(nargs))
            except TypeError:
                raise ctx.fail(f"{name}() got {nargs} argument(s); expected "
                               f"{name}{sig}", node) from None
    args = [_build(ctx, arg) for arg in node.args]
    try:
        return func(*args)
    except ExpressionError as exc:
        raise ctx.fail(f"in {name}(): {exc}", node) from exc
    except (RecursionError, MemoryError):
        raise
    except Exception as exc:  # sympy or an extra function refused its arguments
        raise ctx.fail(f"{name}() failed ({type(exc).__name__}: {exc})", node) from exc
