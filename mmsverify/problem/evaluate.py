"""Generated NumPy evaluators for derived expressions: CSE, hoisting, blocks.

A sympy expression becomes a :class:`Program`: straight-line Python code
after common-subexpression elimination, in which every subexpression that
depends on fewer coordinates than its parent is hoisted into its own line
(``sin(pi*x)`` inside a term in ``x`` and ``y``). A Program is plain text
and numbers, so it pickles to worker processes.

An :class:`Evaluator` runs a Program on coordinate arrays that broadcast
together:

* Full meshes whose coordinates vary along one axis only (``np.meshgrid``
  output) are reduced to axis arrays first, after an exact check.
* Lines whose inputs make an array much smaller than the result (functions
  of x alone, of t alone, of (x, y) in a 3-D box) are computed once.
* The remaining lines run block by block over the result, ``block``
  elements at a time, and each block is written into the one result array;
  temporaries are deleted after their last use. Peak temporary memory is
  thus the result plus a few blocks, whatever the size of the mesh.
"""

import ast
import functools
import itertools
import math

import numpy as np
import sympy as sp
from sympy.printing.numpy import NumPyPrinter

from mmsverify.errors import ExpressionError

__all__ = ["Program", "Evaluator", "build_program", "BLOCK"]

BLOCK = 1 << 15          # elements per block (256 KiB of float64)
_SMALL = 8               # a line is computed once if it is 1/_SMALL of the result or less


def _ipow(a, n):
    """``a**n`` for a whole number n by repeated multiplication (np.power is slow)."""
    if n < 0:
        return 1.0 / _ipow(a, -n)
    result, square = None, a
    while n:
        if n & 1:
            result = square if result is None else result * square
        n >>= 1
        if n:
            square = square * square
    return result


def _erf(a):
    from scipy.special import erf
    return erf(a)


_NAMESPACE = {"numpy": np, "functools": functools, "_ipow": _ipow, "_erf": _erf}


class _Printer(NumPyPrinter):
    """NumPy code printer: exact float literals, fast whole powers, erf."""

    def __init__(self):
        super().__init__({"fully_qualified_modules": True, "inline": True,
                          "allow_unknown_functions": False, "strict": True})

    def _print_Float(self, expr):
        value = float(expr)
        if not math.isfinite(value):
            raise ExpressionError(f"number {expr} is not finite in double precision")
        return repr(value)

    def _print_Pow(self, expr, rational=False):
        n = expr.exp
        if n.is_Integer and int(n) not in (-1, 0, 1, 2) and abs(int(n)) <= 64:
            return f"_ipow({self._print(expr.base)}, {int(n)})"
        return super()._print_Pow(expr, rational)

    def _print_erf(self, expr):
        return f"_erf({self._print(expr.args[0])})"


class Program:
    """Straight-line code for one expression.

    Attributes
    ----------
    nargs : int
        Number of arguments ``_a0, _a1, ...``.
    lines : tuple of (name, code, mask, uses)
        Assignments in order; ``mask`` has bit i set when the line depends on
        argument i; ``uses`` names the earlier lines it reads.
    result : tuple of (code, mask, uses)
    """

    __slots__ = ("nargs", "lines", "result")

    def __init__(self, nargs, lines, result):
        self.nargs, self.lines, self.result = nargs, tuple(lines), result

    def __getstate__(self):
        return (self.nargs, self.lines, self.result)

    def __setstate__(self, state):
        self.nargs, self.lines, self.result = state

    def __eq__(self, other):
        return isinstance(other, Program) and self.__getstate__() == other.__getstate__()

    def __hash__(self):
        return hash(self.__getstate__())

    def source(self):
        """The whole program as Python text (for reading and debugging)."""
        args = ", ".join(f"_a{i}" for i in range(self.nargs))
        body = [f"    {name} = {code}" for name, code, _, _ in self.lines]
        return "\n".join([f"def _f({args}):", *body, f"    return {self.result[0]}"])


def build_program(expr, args):
    """CSE, hoisting of lower-dimensional subexpressions, and code printing.

    Parameters
    ----------
    expr : sympy.Expr
    args : sequence of sympy.Symbol
        The arguments ``_a0, _a1, ...`` of the program, in order.

    Returns
    -------
    Program

    Raises
    ------
    ExpressionError
        A symbol that is not an argument, a number that is not finite in
        double precision, or an operation with no NumPy counterpart.
    """
    expr = sp.sympify(expr)
    names = [sp.Symbol(f"_a{i}") for i in range(len(args))]
    extra = expr.free_symbols - set(args)
    if extra:
        raise ExpressionError(f"expression {_short(expr)} has symbols {sorted(map(str, extra))} that are "
                              f"not arguments ({', '.join(map(str, args))})")
    expr = expr.xreplace(dict(zip(args, names)))
    fresh = (sp.Symbol(f"_c{i}") for i in itertools.count())
    replacements, (reduced,) = sp.cse(expr, symbols=sp.numbered_symbols("_s"), order="none")
    lines, reduced, mask_of = _hoisted(replacements, reduced, names, fresh, _rebuild_sympy)

    printer = _Printer()
    out = []
    try:
        for sym, rhs in lines:
            out.append((str(sym), printer.doprint(rhs), mask_of(rhs), _uses(rhs)))
        result = (printer.doprint(reduced), mask_of(reduced), _uses(reduced))
    except ExpressionError:
        raise
    except Exception as exc:  # an operation with no NumPy counterpart
        raise ExpressionError(f"cannot generate NumPy code for {_short(expr)}: {exc}") from None
    return Program(len(args), out, result)


def _rebuild_sympy(e, args_):
    try:
        return e.func(*args_, evaluate=False)
    except TypeError:
        return e.func(*args_)


def _hoisted(replacements, reduced, names, fresh, rebuild):
    """Lines ``(symbol, rhs)`` of CSE output with lower-dimensional parts hoisted.

    Every subexpression that depends on fewer of the argument symbols
    ``names`` than its parent gets its own line (symbols from ``fresh``);
    terms of a sum (factors of a product) of the same dependence are gathered
    into one line. Returns the lines, the hoisted result expression and the
    function giving the dependence mask of an expression.
    """
    mask = {n: 1 << i for i, n in enumerate(names)}
    lines = []

    def mask_of(e):
        m = mask.get(e)
        if m is None:
            m = 0
            for a in e.args:
                m |= mask_of(a)
            mask[e] = m
        return m

    def emit(e):
        sym = next(fresh)
        mask[sym] = mask_of(e)
        lines.append((sym, e))
        return sym

    def hoist(e):
        """Lines for parts of e that depend on fewer arguments than e itself."""
        if e.is_Atom or not e.args:
            return e
        m = mask_of(e)
        commutative = e.is_Add or e.is_Mul
        groups, new, changed = {}, [], False
        for a in e.args:
            am = mask_of(a)
            if am not in (0, m) and not a.is_Atom:
                changed = True
                if commutative:          # gather factors (terms) of the same dependence
                    groups.setdefault(am, []).append(a)
                else:
                    new.append(emit(hoist(a)))
            else:
                h = hoist(a)
                changed |= h is not a
                new.append(h)
        for members in groups.values():
            members = [hoist(a) for a in members]
            new.append(emit(members[0] if len(members) == 1 else rebuild(e, members)))
        return rebuild(e, new) if changed else e

    for sym, sub in replacements:
        rhs = hoist(sub)
        mask[sym] = mask_of(rhs)
        lines.append((sym, rhs))
    return lines, hoist(reduced), mask_of


def _short(expr, limit=160):
    text = str(expr)
    return text if len(text) <= limit else text[:limit] + " ..."


def _uses(expr):
    return tuple(sorted(str(s) for s in expr.free_symbols if str(s).startswith(("_c", "_s"))))


def _function(name, params, lines, returns):
    """Compile straight-line code, deleting each temporary after its last use."""
    last = {}
    for i, (_, _, _, uses) in enumerate(lines):
        for u in uses:
            last[u] = i
    keep = set(returns[1]) | set(params)
    body = []
    for i, (target, code, _, _) in enumerate(lines):
        body.append(f"    {target} = {code}")
        dead = [u for u in lines[i][3] if last.get(u) == i and u not in keep]
        if dead:
            body.append(f"    del {', '.join(sorted(set(dead)))}")
    body.append(f"    return {returns[0]}")
    src = f"def {name}({', '.join(params)}):\n" + "\n".join(body) + "\n"
    ns = dict(_NAMESPACE)
    exec(compile(src, f"<mmsverify generated {name}>", "exec"), ns)
    return ns[name]


def _registers(code):
    """Most temporaries alive while evaluating one line of generated code."""
    def need(node):
        if isinstance(node, (ast.Name, ast.Constant, ast.Attribute)):
            return 0
        if isinstance(node, ast.BinOp):
            hold = 0 if isinstance(node.left, (ast.Name, ast.Constant)) else 1
            return max(need(node.left), hold + need(node.right), 1)
        if isinstance(node, ast.UnaryOp):
            return max(need(node.operand), 1)
        children = list(ast.iter_child_nodes(node))
        held, most = 0, 1
        for child in children:
            most = max(most, held + need(child))
            held += 0 if isinstance(child, (ast.Name, ast.Constant, ast.Attribute)) else 1
        return most
    return need(ast.parse(code, mode="eval").body)


def _live_peak(lines, params, result):
    """Most block-sized arrays alive at once in straight-line code (liveness + line temporaries)."""
    last = {}
    for i, (_, _, _, uses) in enumerate(lines):
        for u in uses:
            last[u] = i
    for u in result[2]:
        last[u] = len(lines)
    live, peak = set(), _registers(result[0])
    for i, (target, code, _, uses) in enumerate(lines):
        peak = max(peak, len(live) + _registers(code))
        live.add(target)
        live -= {u for u in uses if last.get(u) == i and u not in params}
        live -= {target} if target not in last else set()
    return max(peak, len(live) + _registers(result[0]))


def _compact(a):
    """An axis array equal to ``a`` broadcast, when ``a`` varies along one axis only."""
    if a.ndim < 2 or a.size <= BLOCK:
        return a
    if 0 in a.strides:  # a broadcast view: the axes it repeats along are dropped for free
        a = a[tuple(slice(0, 1) if s == 0 else slice(None) for s in a.strides)]
        if a.size <= BLOCK:
            return a
    varying = [k for k in range(a.ndim) if a.shape[k] > 1
               and a[tuple(1 if j == k else 0 for j in range(a.ndim))] != a[(0,) * a.ndim]]
    if len(varying) > 1:
        return a
    k = varying[0] if varying else 0
    ref = a[tuple(slice(None) if j == k else slice(0, 1) for j in range(a.ndim))]
    step = max(1, BLOCK * 8 // max(1, a[0].size))
    for i in range(0, a.shape[0], step):
        part = a[i:i + step]
        if not np.array_equal(part, np.broadcast_to(ref[i:i + step] if k == 0 else ref, part.shape)):
            return a
    return np.ascontiguousarray(ref)


def _blocks(shape, block):
    """Index tuples that tile ``shape`` in pieces of about ``block`` elements."""
    nd = len(shape)
    axis = next(a for a in range(nd + 1) if math.prod(shape[a + 1:]) <= block) if nd else 0
    if axis >= nd:
        return [tuple(slice(None) for _ in shape)]
    rows = max(1, block // max(1, math.prod(shape[axis + 1:])))
    out = []
    for outer in np.ndindex(*shape[:axis]):
        head = tuple(slice(i, i + 1) for i in outer)
        for j in range(0, shape[axis], rows):
            out.append(head + (slice(j, j + rows),) + (slice(None),) * (nd - axis - 1))
    return out


def _partition(program, shapes, size):
    """Names of the lines computed once, before the blocks, for these argument shapes."""
    pre, budget = set(), 0
    for name, _, m, uses in program.lines:
        n = math.prod(np.broadcast_shapes(*[s for i, s in enumerate(shapes) if m >> i & 1] or [()]))
        if n * _SMALL <= size and budget + n <= size // 2 and all(u in pre for u in uses):
            pre.add(name)
            budget += n
    return frozenset(pre)


class _Plan:
    """How one Program runs with a given set of lines computed before the blocks."""

    def __init__(self, program, pre):
        params = [f"_a{i}" for i in range(program.nargs)]
        rest = [ln for ln in program.lines if ln[0] not in pre]
        needed = sorted({u for ln in rest for u in ln[3]} | set(program.result[2]))
        handed = [u for u in needed if u in pre]
        self.first = _function("_first", params, [ln for ln in program.lines if ln[0] in pre],
                               ("(" + "".join(f"{h}, " for h in handed) + ")", handed))
        self.block = _function("_block", params + handed, rest, (program.result[0], program.result[2]))
        self.live = _live_peak(rest, set(params + handed), program.result)


class Evaluator:
    """Callable that evaluates a :class:`Program` on broadcasting arrays."""

    def __init__(self, program, block=BLOCK):
        self.program, self.block_size = program, int(block)
        self._whole = None
        self._plans, self._partitions = {}, {}

    def __getstate__(self):
        return {"program": self.program, "block": self.block_size}

    def __setstate__(self, state):
        self.__init__(state["program"], state["block"])

    def _whole_function(self):
        if self._whole is None:
            p = self.program
            self._whole = _function("_whole", [f"_a{i}" for i in range(p.nargs)], p.lines,
                                    (p.result[0], p.result[2]))
        return self._whole

    def __call__(self, *values):
        p = self.program
        if len(values) != p.nargs:
            raise TypeError(f"expected {p.nargs} arguments, got {len(values)}")
        arrays = [np.asarray(v, dtype=float) for v in values]
        shape = np.broadcast_shapes(*(a.shape for a in arrays))
        arrays = [_compact(a) for a in arrays]
        nd = len(shape)
        arrays = [a.reshape((1,) * (nd - a.ndim) + a.shape) for a in arrays]
        used = [a for i, a in enumerate(arrays) if p.result[1] >> i & 1]
        eshape = np.broadcast_shapes(*(a.shape for a in used)) if used else (1,) * nd
        size = math.prod(eshape)
        if size <= self.block_size:
            out = np.asarray(self._whole_function()(*arrays), dtype=float)
        else:
            out = self._blocked(arrays, eshape, size)
        if out.shape != shape:
            out = np.broadcast_to(out, shape).copy()
        return out

    def _blocked(self, arrays, eshape, size):
        shapes = tuple(a.shape for a in arrays)
        pre = self._partitions.get((shapes, size))
        if pre is None:
            if len(self._partitions) > 256:
                self._partitions.clear()
            pre = self._partitions[(shapes, size)] = _partition(self.program, shapes, size)
        plan = self._plans.get(pre)
        if plan is None:
            plan = self._plans[pre] = _Plan(self.program, pre)
        handed = plan.first(*arrays)
        inputs = [a for a in arrays] + [np.asarray(h, dtype=float).reshape(
            (1,) * (len(eshape) - np.ndim(h)) + np.shape(h)) for h in handed]
        out = np.empty(eshape)
        # about two result arrays of temporaries at most
        block = min(self.block_size, max(256, 2 * size // plan.live))
        for index in _blocks(eshape, block):
            parts = [a[tuple(s if n > 1 else slice(None) for s, n in zip(index, a.shape))] for a in inputs]
            out[index] = plan.block(*parts)
        return out
