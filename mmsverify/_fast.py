"""Derivation engines: sympy (complete) and symengine (fast, for the common cases).

Reading a problem file parses its expressions and differentiates them. With
sympy that takes about 0.1 s the first time in a process (sympy imports
parts of itself on the first sum it builds and its assumption system is
slow on new expressions), which is most of what a short study spends
outside the solver. symengine, a C++ symbolic core made by the sympy
project, parses and differentiates the same expressions in well under a
millisecond. So a problem is read twice over, in the cheap order:

1. with the symengine engine (:func:`fast_engine`) when the file keeps to what it covers: built-in
   operators other than the compressible one, the functions in
   :data:`FAST_FUNCTIONS`, expressions whose constant parts are plainly
   real. Any doubt (an unusual construct, an error of any kind) raises
   :class:`Unsupported`, and the problem is read with sympy instead, which
   gives the messages users see. The outcome never depends on the engine.
2. with :data:`SYMPY` otherwise, and whenever code asks a problem read the
   fast way for its sympy tables (design checks, export, reports): the file
   text is read again with sympy then, once.

The engine objects below carry what the file reader needs: symbols,
numbers, expression parsing, node counts and a printed form for the
content hash.
"""

import ast
import hashlib
from decimal import Decimal, InvalidOperation

import sympy as sp

from mmsverify.problem import expr as _expr
from mmsverify.errors import ExpressionError

__all__ = ["Unsupported", "SYMPY", "FAST_FUNCTIONS", "FAST_OPERATORS", "fast_engine", "is_fast", "srepr", "canonical"]

#: Functions the fast engine reads (one argument each); others make it step aside.
FAST_FUNCTIONS = ("sin", "cos", "tan", "exp", "log", "sqrt", "sinh", "cosh", "tanh", "asin", "acos", "atan")


class Unsupported(Exception):
    """The fast engine steps aside; the problem is read with sympy."""


class _Sympy:
    """The complete engine: sympy, with the safe parser of :mod:`mmsverify.problem.expr`."""

    name = "sympy"

    @staticmethod
    def symbol(name):
        return sp.Symbol(name, real=True)

    @staticmethod
    def number(value):
        return sp.nsimplify(value) if isinstance(value, int) else sp.Float(value)

    @staticmethod
    def parse(text, names, functions=None, where="expression"):
        return _expr.parse_expression(text, names, functions=functions, where=where)

    @staticmethod
    def nodes(expr, limit):
        """Number of nodes of the expression tree, counting stops past ``limit``."""
        n = 0
        for n, _ in enumerate(sp.preorder_traversal(expr), 1):
            if n > limit:
                break
        return n

    @staticmethod
    def at(expr, symbol, value):
        return expr.subs(symbol, value)


SYMPY = _Sympy()


class _Symengine:
    """The fast engine: symengine objects, parsed by the same rules, stepping aside when unsure."""

    name = "symengine"

    def __init__(self):
        import symengine as se
        self.se = se
        self.functions = {name: getattr(se, name) for name in FAST_FUNCTIONS}
        self.constants = {"pi": se.pi, "E": se.E}
        # constant values that are not real finite numbers
        self.bad = (se.zoo, se.nan, se.oo, -se.oo, se.I)

    def symbol(self, name):
        return self.se.Symbol(name)

    def number(self, value):
        return self.se.Integer(value) if isinstance(value, int) else self.se.RealDouble(value)

    def parse(self, text, names, functions=None, where="expression"):
        if functions or not isinstance(text, str) or len(text) > _expr.MAX_TEXT_LENGTH:
            raise Unsupported(where)
        body = text.replace("\r", " ").replace("\n", " ").replace("\t", " ").strip()
        if not body or "#" in body:
            raise Unsupported(where)
        try:
            tree = _expr.parse_quietly(body)
        except (SyntaxError, ValueError, RecursionError, MemoryError):
            raise Unsupported(where) from None
        ctx = _expr._Ctx(text, body, 0, names, {}, where)
        try:
            _expr._check_size(ctx, tree)
        except ExpressionError:
            raise Unsupported(where) from None
        result = self._build(tree.body, {**self.constants, **names}, body)
        self._check(result, where)
        return result

    def _build(self, node, names, body):
        se = self.se
        if isinstance(node, ast.Constant):
            value = node.value
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise Unsupported("literal")
            if isinstance(value, int):
                if abs(value) > _expr.MAX_INTEGER:
                    raise Unsupported("integer")
                return se.Integer(value)
            literal = (ast.get_source_segment(body, node) or "").replace("_", "")
            try:
                dec = Decimal(literal)
            except InvalidOperation:
                raise Unsupported("number") from None
            if dec and abs(dec.adjusted()) > _expr.MAX_DECIMAL_EXPONENT:
                raise Unsupported("number")
            p, q = dec.as_integer_ratio()
            if max(abs(p).bit_length(), q.bit_length()) > _expr.MAX_NUMBER_BITS:
                raise Unsupported("number")
            return se.Rational(p, q)       # exact, as the sympy parser reads decimals
        if isinstance(node, ast.Name):
            if node.id not in names:
                raise Unsupported("name")
            return names[node.id]
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.UAdd, ast.USub)):
            operand = self._build(node.operand, names, body)
            return -operand if isinstance(node.op, ast.USub) else operand
        if isinstance(node, ast.BinOp) and type(node.op) in (ast.Add, ast.Sub, ast.Mult, ast.Div, ast.Pow):
            left, right = self._build(node.left, names, body), self._build(node.right, names, body)
            if isinstance(node.op, ast.Add):
                return left + right
            if isinstance(node.op, ast.Sub):
                return left - right
            if isinstance(node.op, ast.Mult):
                return left * right
            if isinstance(node.op, ast.Div):
                return left / right
            # powers: small numeric exponents only, and no huge exact numbers
            if not right.is_Number or abs(float(right)) > _expr.MAX_EXPONENT:
                raise Unsupported("power")
            if left.is_Number and not (left.is_Integer and right.is_Integer and abs(int(left)) <= 2 ** 16):
                raise Unsupported("power of a number")
            return left ** right
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in self.functions \
                and len(node.args) == 1 and not node.keywords and node.func.id not in names:
            arg = self._build(node.args[0], names, body)
            if arg.is_Number:
                raise Unsupported("function of a number")   # sympy checks that its value is real
            return self.functions[node.func.id](arg)
        raise Unsupported(type(node).__name__)

    def _check(self, result, where):
        """Step aside unless every constant in the expression is a plain real number."""
        stack = [result]
        while stack:
            e = stack.pop()
            if e in self.bad:
                raise Unsupported(where)
            if e.is_Number:
                if not (e.is_Integer or e.is_Rational or isinstance(e, self.se.RealDouble)):
                    raise Unsupported(where)
                continue
            if e.is_Function and not e.free_symbols:
                raise Unsupported(where)
            if e.is_Pow and not e.free_symbols:
                base, exp = e.args
                positive = base in (self.se.pi, self.se.E) or (base.is_Number and float(base) > 0)
                if not positive and not (exp.is_Integer and base.is_Number):
                    raise Unsupported(where)
            stack.extend(e.args)

    def nodes(self, expr, limit):
        n, stack = 0, [expr]
        while stack and n <= limit:
            e = stack.pop()
            n += 1
            stack.extend(e.args)
        return n

    def at(self, expr, symbol, value):
        return expr.subs({symbol: self.number(value)})


_FAST = []


def fast_engine():
    """The symengine engine, or None when symengine cannot be imported."""
    if not _FAST:
        try:
            _FAST.append(_Symengine())
        except ImportError:
            _FAST.append(None)
    return _FAST[0]


def is_fast(expr):
    """True for a symengine expression."""
    return type(expr).__module__.startswith("symengine")


def srepr(expr):
    """Exact printed form of an expression of either engine, for hashes.

    sympy expressions print with :func:`sympy.srepr`; symengine expressions
    as the content key of :func:`canonical`, which does not depend on the
    order symengine keeps the terms of a sum in.
    """
    return canonical(expr, rebuild=False)[1] if is_fast(expr) else sp.srepr(expr)


def canonical(e, memo=None, rebuild=True):
    """``(expression, key)`` of a symengine expression: sums and products in a fixed order.

    symengine keeps the terms of a sum in the order of its hash table, which
    depends on how the expression was built: the same expression derived
    afresh and read back from a pickle can print its terms in different
    orders, and floating-point sums in a different order differ in the last
    bits. The key is a digest of the content with the terms of sums and
    products sorted (floats in full); with ``rebuild`` the expression is
    built again bottom-up with its terms inserted in key order, so the code
    generated from it is the same however it came to be (else the
    expression is returned as it is).
    """
    memo = {} if memo is None else memo
    found = memo.get(e)
    if found is not None:
        return found
    if not e.args:
        exact = not e.is_Number or e.is_Integer or e.is_Rational or not e.is_real
        out = (e, f"{type(e).__name__}:{e if exact else repr(float(e))}")
    else:
        kids = [canonical(a, memo, rebuild) for a in e.args]
        if e.is_Add or e.is_Mul:
            kids.sort(key=lambda k: k[1])
        digest = hashlib.blake2b(type(e).__name__.encode(), digest_size=16)
        for _, key in kids:
            digest.update(key.encode() + b"\0")
        rebuilt = e
        if rebuild:
            try:
                rebuilt = e.func(*[k for k, _ in kids])
            except (AttributeError, TypeError, RuntimeError):   # a node the code printer refuses anyway
                pass
        out = (rebuilt, digest.hexdigest())
    memo[e] = out
    return out


#: Built-in operators the fast engine derives (the compressible one builds sympy functions; custom
#: equations use d(...) and lap(...)): the others are read with sympy.
FAST_OPERATORS = ("poisson", "diffusion", "advection_diffusion", "burgers", "navier_stokes")
