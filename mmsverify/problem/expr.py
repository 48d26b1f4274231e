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
* ``MAX_BUILD_SECONDS``: safety net (sympy's root extraction on products of
  large radicals is slow; realistic expressions take milliseconds).  A hard
  limit by ``SIGALRM`` is used in the main thread when no timer is running;
  otherwise the clock is checked between syntax nodes only.  The limit nests
  inside a longer one of this module (the whole-file budget of
  :mod:`mmsverify.problem.record`) and never outlasts it.
* Results are real: the imaginary unit and constants that are not real
  (``sqrt(-1)``, ``asin(2)``, ``(-8)**(1/3)``) are refused, since the
  evaluators compute in real floating point.
"""

import ast
import contextlib
import difflib
import inspect
import signal
import threading
import time
import warnings
from decimal import Decimal, InvalidOperation
from types import MappingProxyType
from typing import Callable, Mapping

import sympy

from mmsverify.errors import ExpressionError

__all__ = [
    "ALLOWED_FUNCTIONS", "ExpressionError", "MAX_BUILD_SECONDS", "MAX_DECIMAL_EXPONENT",
    "MAX_DEPTH", "MAX_EXPONENT", "MAX_INTEGER", "MAX_NODES", "MAX_NUMBER_BITS",
    "MAX_TEXT_LENGTH", "parse_expression",
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


class _Timeout(BaseException):
    """Raised when the build time is up; a BaseException so no except clause hides it."""


class _Ctx:
    """State of one parse: text for locating nodes, namespaces, deadline."""

    def __init__(self, original, flat, shift, names, functions, where):
        self.original, self.flat, self.shift = original, flat, shift
        self.names, self.functions, self.where = names, functions, where
        self.deadline = time.monotonic() + MAX_BUILD_SECONDS

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
        with _time_limit(MAX_BUILD_SECONDS):
            result = _build(ctx, tree.body)
    except (RecursionError, MemoryError):
        raise ExpressionError(f"{where}: expression is too complex to build") from None
    except _Timeout:
        if _outer_expired():
            raise  # the budget of an enclosing limit is spent: that limit reports it
        raise ExpressionError(f"{where}: expression took longer than {MAX_BUILD_SECONDS} s "
                              "to build; simplify it or split it into named constants") from None
    if not isinstance(result, sympy.Expr):
        raise ExpressionError(f"{where}: result is a {type(result).__name__}, not an expression")
    if result.has(*_BAD):
        raise ExpressionError(f"{where}: expression evaluates to an infinite or undefined "
                              f"value ({str(result)[:80]}); check for division by zero")
    complex_part = sympy.I if result.has(sympy.I) else next(
        (a for a in result.atoms(sympy.Function, sympy.Pow) if a.is_number and a.is_real is False), None)
    if complex_part is not None:
        raise ExpressionError(f"{where}: expression has the value {str(complex_part)[:60]}, which is not a "
                              "real number (check square roots, logarithms and inverse functions of "
                              "constants); fields and coefficients must be real")
    return result


# Deadlines (time.monotonic) of the hard limits armed now in the main thread, outermost first.
_ARMED = []


# Seconds between repeated alarms once a limit is due, should code under the limit swallow the first.
_REPEAT = 0.05


def _raise_timeout(signum, frame):
    # Raise only when the innermost limit is due: an alarm handled late, after its limit was left,
    # does nothing, and one that comes early waits for the rest. A due limit keeps ringing every
    # _REPEAT s, so an exception swallowed on the way (an `except BaseException` somewhere, a
    # callback whose errors are only printed) cannot let the work run on unbounded.
    if not _ARMED:
        return
    if time.monotonic() < _ARMED[-1]:
        _arm(_ARMED[-1])
        return
    signal.setitimer(signal.ITIMER_REAL, _REPEAT)
    raise _Timeout


def _outer_expired():
    """True when an enclosing hard limit has run out (after the inner one was left)."""
    return bool(_ARMED) and time.monotonic() >= _ARMED[-1]


def _arm(deadline):
    signal.setitimer(signal.ITIMER_REAL, max(deadline - time.monotonic(), 1e-4))


@contextlib.contextmanager
def _time_limit(seconds):
    """Hard time limit through SIGALRM where that disturbs nobody; else a no-op.

    Raises :class:`_Timeout` in the main thread when ``seconds`` have passed.
    Limits nest: an inner limit ends no later than the enclosing one, and on
    leaving it the enclosing limit is armed again (an expired one fires at
    once). A timer or SIGALRM handler that is not this module's is left alone.
    """
    if not (hasattr(signal, "setitimer") and threading.current_thread() is threading.main_thread()):
        yield
        return
    nested = bool(_ARMED) and signal.getsignal(signal.SIGALRM) is _raise_timeout
    if not nested and not (signal.getsignal(signal.SIGALRM) == signal.SIG_DFL
                           and signal.getitimer(signal.ITIMER_REAL) == (0.0, 0.0)):
        yield
        return
    deadline = time.monotonic() + seconds
    if nested:
        deadline = min(deadline, _ARMED[-1])
        old = None
    else:
        old = signal.signal(signal.SIGALRM, _raise_timeout)
    _ARMED.append(deadline)
    try:
        _arm(deadline)
        yield
    finally:
        # First, without a call (a pending alarm is handled at calls): leave the limit, so an alarm
        # handled from here on finds it gone and cannot cut this clean-up short.
        del _ARMED[-1]
        signal.setitimer(signal.ITIMER_REAL, 0)
        if nested:
            _arm(_ARMED[-1])
        else:
            signal.signal(signal.SIGALRM, old)


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
    if time.monotonic() > ctx.deadline:
        raise _Timeout
    result = _build_node(ctx, node)
    if isinstance(result, sympy.Rational) and _bits(result) > MAX_NUMBER_BITS:
        raise ctx.fail(f"number exceeds {MAX_NUMBER_BITS} bits", node)
    return result


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
