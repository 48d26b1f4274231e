"""Generated NumPy code for symengine expressions (the fast derivation path).

:func:`build_symengine` is :func:`mmsverify.problem.evaluate.build_program` for a
symengine expression: the same pipeline (arguments renamed, CSE, hoisting
of lower-dimensional parts by :func:`mmsverify.problem.evaluate._hoisted`) with
symengine's CSE and a NumPy printer of our own, so no sympy expression is
ever built. The resulting :class:`~mmsverify.problem.evaluate.Program` is the
same kind of straight-line code the sympy branch writes.
"""

import itertools
import math

from mmsverify.problem.evaluate import Program, _hoisted, _short
from mmsverify._fast import canonical
from mmsverify.errors import ExpressionError

__all__ = ["build_symengine"]


def _rebuild_symengine(e, args_):
    return e.func(*args_)


def build_symengine(expr, args):
    """:func:`build_program` for a symengine expression (no sympy expression is built)."""
    import symengine as se

    index = {str(a): i for i, a in enumerate(args)}
    free = expr.free_symbols
    extra = sorted(str(s) for s in free if str(s) not in index)
    if extra:
        raise ExpressionError(f"expression {_short(expr)} has symbols {extra} that are "
                              f"not arguments ({', '.join(map(str, args))})")
    names = [se.Symbol(f"_a{i}") for i in range(len(args))]
    reduced = expr.xreplace({s: names[index[str(s)]] for s in free}) if free else expr
    replacements, (reduced,) = se.cse([canonical(reduced)[0]])
    # symengine names its replacements x0, x1, ... (no clash: the only other symbols are _a*, _c*);
    # they are printed as _s0, _s1, ..., the names _uses recognises (renaming them in the
    # expressions would cost more than the CSE itself)
    label = {sym: f"_s{i}" for i, (sym, _) in enumerate(replacements)}
    fresh = (se.Symbol(f"_c{i}") for i in itertools.count())
    lines, reduced, mask_of = _hoisted(replacements, reduced, names, fresh, _rebuild_symengine)

    def uses(e):
        found = (label.get(sym) or str(sym) for sym in e.free_symbols)
        return tuple(sorted(n for n in found if n.startswith(("_c", "_s"))))

    printer = _SymenginePrinter(se, label)
    try:
        out = [(label.get(sym) or str(sym), printer.doprint(rhs), mask_of(rhs), uses(rhs)) for sym, rhs in lines]
        result = (printer.doprint(reduced), mask_of(reduced), uses(reduced))
    except ExpressionError:
        raise
    except Exception as exc:  # _Unsupported: an operation with no NumPy counterpart
        raise ExpressionError(f"cannot generate NumPy code for {_short(expr)}: {exc}") from None
    return Program(len(args), out, result)


class _Unsupported(Exception):
    """A symengine node with no NumPy counterpart."""


# Precedence of printed text: the loosest operator at its top level.
_ADD, _MUL, _NEG, _POW, _ATOM = 1, 2, 3, 4, 5

_SE_FUNCTIONS = {
    "sin": "numpy.sin", "cos": "numpy.cos", "tan": "numpy.tan", "log": "numpy.log",
    "sinh": "numpy.sinh", "cosh": "numpy.cosh", "tanh": "numpy.tanh",
    "asin": "numpy.arcsin", "acos": "numpy.arccos", "atan": "numpy.arctan",
    "asinh": "numpy.arcsinh", "acosh": "numpy.arccosh", "atanh": "numpy.arctanh",
    "atan2": "numpy.arctan2", "Abs": "numpy.abs", "sign": "numpy.sign", "erf": "_erf",
}
_SE_FOLDS = {"Max": "numpy.maximum", "Min": "numpy.minimum"}
_SE_CONSTANTS = {"Pi": "numpy.pi", "Exp1": "numpy.e"}


class _SymenginePrinter:
    """NumPy code for symengine expressions: the same code as :class:`_Printer` writes, or equivalent.

    Whole powers up to 64 by :func:`_ipow`, square roots by ``numpy.sqrt``,
    factors with negative powers as a division, exact float literals,
    rationals as ``p/q``; parentheses from the precedence of each part.
    """

    def __init__(self, se, label=None):
        self.se, self.label = se, label or {}

    def doprint(self, e):
        return self._print(e)[0]

    def _print(self, e):
        """``(text, precedence)`` of one node."""
        se = self.se
        if isinstance(e, se.Symbol):
            return self.label.get(e) or str(e), _ATOM
        if isinstance(e, (se.Rational, se.Float)):
            return self._number(e)
        if e.is_Add:
            return self._add(e)
        if e.is_Mul:
            negative, text, prec = self._mul(e)
            return ("-" + text, min(prec, _NEG)) if negative else (text, prec)
        if e.is_Pow:
            return self._power(*e.args)
        name = type(e).__name__
        if name in _SE_CONSTANTS:
            return _SE_CONSTANTS[name], _ATOM
        if name in _SE_FUNCTIONS:
            return f"{_SE_FUNCTIONS[name]}({', '.join(self._print(a)[0] for a in e.args)})", _ATOM
        if name in _SE_FOLDS and e.args:
            text = self._print(e.args[0])[0]
            for a in e.args[1:]:
                text = f"{_SE_FOLDS[name]}({text}, {self._print(a)[0]})"
            return text, _ATOM
        raise _Unsupported(f"{name} ({_short(e, 60)}) has no NumPy counterpart")

    def _number(self, e):
        se = self.se
        if isinstance(e, se.Integer):
            n = int(e)
            return str(n), _ATOM if n >= 0 else _NEG
        if isinstance(e, se.Rational):
            p, q = e.get_num_den()
            return f"{int(p)}/{int(q)}", _MUL
        value = float(e)
        if not math.isfinite(value):
            raise ExpressionError(f"number {_short(e, 40)} is not finite in double precision")
        return repr(value), _NEG if math.copysign(1.0, value) < 0 else _ATOM

    def _negative(self, e):
        return isinstance(e, (self.se.Rational, self.se.Float)) and float(e) < 0

    def _add(self, e):
        parts = []
        for term in e.args:
            if term.is_Mul:
                negative, text, prec = self._mul(term)
            elif self._negative(term):
                negative, (text, prec) = True, self._number(-term)
            else:
                negative, (text, prec) = False, self._print(term)
            text = text if prec > _ADD else f"({text})"
            if parts:
                parts.append((" - " if negative else " + ") + text)
            else:
                parts.append("-" + text if negative else text)
        return "".join(parts), _ADD

    def _mul(self, e):
        """``(negative, text, precedence)``: a product printed without its sign."""
        se = self.se
        coeff, numer, denom = None, [], []
        for f in e.args:
            if isinstance(f, (se.Rational, se.Float)):
                coeff = f if coeff is None else coeff * f
            elif (f.is_Pow and isinstance(f.args[1], se.Rational) and f.args[1] < 0
                  and type(f.args[0]).__name__ != "Exp1"):
                denom.append(self._power(f.args[0], -f.args[1]))
            else:
                numer.append(self._print(f))
        negative = coeff is not None and self._negative(coeff)
        texts = []
        if coeff is not None and coeff != (-1 if negative else 1):
            text, prec = self._number(-coeff if negative else coeff)
            texts.append((text, prec) if prec > _MUL else (f"({text})", _ATOM))
        texts += [(t, p) if p >= _POW else (f"({t})", _ATOM) for t, p in numer]
        if len(texts) == 1:
            body, prec = texts[0]
        else:
            body, prec = "*".join(t for t, _ in texts) or "1", _MUL if texts else _ATOM
        if not denom:
            return negative, body, prec
        factors = [t if p >= _POW else f"({t})" for t, p in denom]
        under = factors[0] if len(factors) == 1 else "(" + "*".join(factors) + ")"
        return negative, f"{body}/{under}", _MUL

    def _power(self, base, exp):
        """``(text, precedence)`` of ``base**exp``."""
        se = self.se
        if type(base).__name__ == "Exp1":
            return f"numpy.exp({self._print(exp)[0]})", _ATOM
        b, bp = self._print(base)
        bb = b if bp > _POW else f"({b})"
        if isinstance(exp, se.Integer):
            n = int(exp)
            if n == 1:
                return b, bp
            if n == 2:
                return f"{bb}**2", _POW
            if n == -1:
                return f"1/{b if bp >= _POW else f'({b})'}", _MUL
            if n == -2:
                return f"1/{bb}**2", _MUL
            if 2 < abs(n) <= 64:
                return f"_ipow({b}, {n})", _ATOM
        if isinstance(exp, se.Rational) and not isinstance(exp, se.Integer):
            p, q = (int(v) for v in exp.get_num_den())
            if (p, q) == (1, 2):
                return f"numpy.sqrt({b})", _ATOM
            if (p, q) == (-1, 2):
                return f"1/numpy.sqrt({b})", _MUL
        x, xp = self._print(exp) if not isinstance(exp, se.Rational) else self._exponent(exp)
        return f"{bb}**{x if xp == _ATOM else f'({x})'}", _POW

    def _exponent(self, exp):
        """A rational exponent as a float literal (an integer one as it is)."""
        if isinstance(exp, self.se.Integer):
            return self._number(exp)
        num, den = exp.get_num_den()
        value = int(num) / int(den)
        return repr(value), _NEG if value < 0 else _ATOM
