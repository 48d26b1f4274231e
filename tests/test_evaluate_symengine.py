"""Generated NumPy code from symengine expressions (the fast derivation path).

Each expression is built in sympy and in symengine; the two Programs must
agree with each other and with values computed directly with NumPy.
"""

import pickle
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import symengine as se
import sympy as sp

from mmsverify.problem.evaluate import BLOCK, Evaluator, Program, build_program
from mmsverify.errors import ExpressionError

x, y, z, t = (sp.Symbol(n, real=True) for n in "xyzt")
RTOL = 1e-13


def _close(a, b, rtol=RTOL):
    """Equal to ``rtol``; near a zero of a sum of terms the two may differ by rounding of the terms,
    so an absolute tolerance of ``rtol`` times the largest magnitude is allowed too (# common practice)."""
    np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * np.max(np.abs(b)))

# (name, args, sympy expression, NumPy reference of the same arrays)
# reference library: numpy (every reference below is the expression written with NumPy ufuncs)
CASES = [
    ("1d-trig-exp-log", (x,),
     sp.sin(sp.pi * x) * sp.exp(-x) + x**5 / 3 - sp.Float(0.7) * x**-2 + sp.log(1 + x),
     lambda x: np.sin(np.pi * x) * np.exp(-x) + x**5 / 3 - 0.7 / x**2 + np.log(1 + x)),
    ("1d-sqrt-tanh-atan-abs", (x,),
     sp.sqrt(x) * sp.tanh(4 * x - 2) + sp.atan(x) + sp.Abs(x - sp.Rational(1, 2)) + 1 / x,
     lambda x: np.sqrt(x) * np.tanh(4 * x - 2) + np.arctan(x) + np.abs(x - 0.5) + 1 / x),
    ("2d-separable", (x, y),
     sp.sin(sp.pi * x) * sp.cos(sp.pi * y) * sp.exp(x * y) / (1 + x**2 + y**2) + x**3 * y**4 + 2 * sp.pi * sp.E,
     lambda x, y: (np.sin(np.pi * x) * np.cos(np.pi * y) * np.exp(x * y) / (1 + x**2 + y**2)
                   + x**3 * y**4 + 2 * np.pi * np.e)),
    ("2d-powers-division", (x, y),
     (x - y)**2 / (x * y) + sp.sqrt(x**2 + y**2) + sp.sinh(x) * sp.cosh(y) - x**-3 * y**sp.Rational(3, 2)
     + sp.Rational(-2, 3) * x / (y * (1 + x)) + sp.Float(1.25e-3) * y**-4,
     lambda x, y: ((x - y)**2 / (x * y) + np.sqrt(x**2 + y**2) + np.sinh(x) * np.cosh(y) - y**1.5 / x**3
                   - 2 / 3 * x / (y * (1 + x)) + 1.25e-3 / y**4)),
    ("3d", (x, y, z),
     sp.sin(x) * sp.sin(2 * y) * sp.sin(3 * z) + x * y * z + sp.exp(-(x + y + z)) + sp.Rational(3, 7) * x**4 * z,
     lambda x, y, z: (np.sin(x) * np.sin(2 * y) * np.sin(3 * z) + x * y * z + np.exp(-(x + y + z))
                      + 3 / 7 * x**4 * z)),
    ("3d-transient", (x, y, z, t),
     sp.exp(-t) * sp.cos(x) * sp.cos(y) * sp.cos(z) + t**2 * x + sp.asin(x / 2) * sp.acos(y / 2) / (1 + t)
     + sp.tan(z / 2) * sp.log(2 + t),
     lambda x, y, z, t: (np.exp(-t) * np.cos(x) * np.cos(y) * np.cos(z) + t**2 * x
                         + np.arcsin(x / 2) * np.arccos(y / 2) / (1 + t) + np.tan(z / 2) * np.log(2 + t))),
    ("1d-transient", (x, t),
     sp.exp(-2 * t) * sp.sin(sp.pi * x)**5 - sp.Float(0.3) * x * t**-1 + sp.Rational(1, 3) * sp.cos(t) / x,
     lambda x, t: np.exp(-2 * t) * np.sin(np.pi * x)**5 - 0.3 * x / t + np.cos(t) / (3 * x)),
    ("2d-more-functions", (x, y),
     sp.asinh(x) + sp.acosh(1 + x) + sp.atanh(x / 2) + sp.erf(y) + sp.atan2(y, x + 1) + sp.sign(x - y)
     + sp.Max(x, y) + sp.Min(x, y, sp.Float(0.3)),
     lambda x, y: (np.arcsinh(x) + np.arccosh(1 + x) + np.arctanh(x / 2) + _erf(y) + np.arctan2(y, x + 1)
                   + np.sign(x - y) + np.maximum(x, y) + np.minimum(np.minimum(x, y), 0.3))),
    ("1d-precedence", (x,),
     sp.sin(x) / (x * (1 + x)**2) - 1 / (x**3 * (2 - x)) + x / (sp.sqrt(1 + x) * (3 + x)) + x**(-x)
     + (x**x)**2 + x**(x**2) - sp.Rational(5, 2) / (x * sp.exp(x)) + (1 - x)**sp.Rational(-5, 2),
     lambda x: (np.sin(x) / (x * (1 + x)**2) - 1 / (x**3 * (2 - x)) + x / (np.sqrt(1 + x) * (3 + x)) + x**(-x)
                + (x**x)**2 + x**(x**2) - 2.5 / (x * np.exp(x)) + (1 - x)**-2.5)),
    ("2d-precedence", (x, y),
     (-x)**2 - x**2 * y + 1 / (x * y) + (x + y)**-1 - (x - y)**3 + 2**x + (x + 1)**y + x**(y**2)
     + x**sp.Rational(-1, 2) + x**sp.Rational(-1, 3) + x**sp.Float(2.5) + sp.exp(x)**2
     + (sp.sin(x) + 2)**-2 - (x + y)**-3 + sp.Rational(1, 2)**x + (-y)**5 + x**sp.Rational(2, 3),
     lambda x, y: ((-x)**2 - x**2 * y + 1 / (x * y) + 1 / (x + y) - (x - y)**3 + 2**x + (x + 1)**y + x**(y**2)
                   + 1 / np.sqrt(x) + x**(-1 / 3) + x**2.5 + np.exp(2 * x) + (np.sin(x) + 2)**-2.0
                   - (x + y)**-3.0 + 0.5**x + (-y)**5 + x**(2 / 3))),
]
IDS = [c[0] for c in CASES]


def _erf(a):
    from scipy.special import erf  # reference library: scipy
    return erf(a)


def _programs(args, expr):
    return build_program(expr, args), build_program(se.sympify(expr), args)


@pytest.mark.parametrize("name, args, expr, reference", CASES, ids=IDS)
def test_random_points_agree_with_sympy_program_and_numpy(name, args, expr, reference):
    fast, slow = _programs(args, expr)
    assert isinstance(fast, Program) and fast.nargs == len(args)
    points = np.random.default_rng(7).uniform(0.1, 0.9, size=(len(args), 500))
    got = Evaluator(fast)(*points)
    _close(got, Evaluator(slow)(*points))
    _close(got, reference(*points), rtol=1e-12)


@pytest.mark.parametrize("name, args, expr, reference", CASES, ids=IDS)
def test_blocked_broadcast_axis_arrays(name, args, expr, reference):
    fast, slow = _programs(args, expr)
    sizes = {1: [40000], 2: [181, 211], 3: [37, 41, 29], 4: [37, 41, 29, 1]}[len(args)]
    assert np.prod(sizes) > BLOCK
    axes = [np.linspace(0.11, 0.89, n).reshape([n if k == j else 1 for k in range(len(args))])
            for j, n in enumerate(sizes)]
    got = Evaluator(fast)(*axes)
    assert got.shape == tuple(sizes)
    _close(got, Evaluator(slow)(*axes))
    _close(got, reference(*axes), rtol=1e-12)
    # the same on full meshes (reduced to axis arrays by the evaluator) and on two threads
    meshes = np.meshgrid(*[a.ravel() for a in axes], indexing="ij")
    np.testing.assert_array_equal(Evaluator(fast, threads=2)(*meshes), got)


def test_symbols_matched_by_name_and_program_pickles():
    sx, sy = se.symbols("x y")  # plain symengine symbols; the arguments carry sympy assumptions
    prog = build_program(se.sin(sx) * sy**3 - sy / sx, (x, y))
    again = pickle.loads(pickle.dumps(prog))
    assert again == prog
    a, b = np.array([0.3, 0.7]), np.array([1.5, -2.0])
    # reference library: numpy
    np.testing.assert_allclose(Evaluator(again)(a, b), np.sin(a) * b**3 - b / a, rtol=RTOL)
    # arguments the expression does not use are allowed, in any order
    prog = build_program(sx**2 + 1, (t, y, x))
    assert prog.nargs == 3 and prog.result[1] == 0b100
    np.testing.assert_allclose(Evaluator(prog)(0.0, 0.0, a), a**2 + 1, rtol=RTOL)


def test_negative_number_base():
    n = se.Symbol("x")
    prog = build_program(se.Pow(se.Integer(-2), n) + se.Pow(se.Rational(-1, 2), n) * se.Pow(se.RealDouble(-1.5), n), (x,))
    a = np.array([0.0, 1.0, 2.0, 3.0, -3.0])
    # reference library: numpy
    np.testing.assert_allclose(Evaluator(prog)(a), (-2.0)**a + (-0.5)**a * (-1.5)**a, rtol=RTOL)


def test_constant_expression_has_the_broadcast_shape():
    prog = build_program(se.pi * se.Rational(1, 3) + se.sqrt(se.Integer(2)), (x, y))
    out = Evaluator(prog)(np.zeros((3, 1)), np.zeros((1, 4)))
    assert out.shape == (3, 4)
    np.testing.assert_allclose(out, np.pi / 3 + np.sqrt(2), rtol=RTOL)  # reference library: numpy


def test_lower_dimensional_parts_are_hoisted():
    sx, sy, st = se.symbols("x y t")
    expr = se.sin(se.pi * sx) * se.log(1 + sx) * se.cos(se.pi * sy) / (1 + sy**2) * se.exp(-st) + sx * sy * st
    prog = build_program(expr, (x, y, t))
    full = prog.result[1]
    assert full == 0b111
    masks = {m for _, _, m, _ in prog.lines}
    # a line in x alone, one in y alone and one in t alone, each a strict subset of the result's
    assert {0b001, 0b010, 0b100} <= masks
    assert all(m & full == m and m != full for m in masks)
    # the x-only factors are gathered into one line
    assert any("sin" in code and "log" in code and m == 0b001 for _, code, m, _ in prog.lines)
    # uses name the earlier lines read, so temporaries can be freed
    names = [n for n, _, _, _ in prog.lines]
    for i, (_, _, _, uses) in enumerate(prog.lines):
        assert set(uses) <= set(names[:i])
    assert set(prog.result[2]) <= set(names) and prog.result[2]


def test_common_subexpressions_become_lines():
    sx, sy = se.symbols("x y")
    inner = se.sin(sx * sy)
    prog = build_program(inner**2 + se.cos(inner) + se.exp(inner) * sx, (x, y))
    code = prog.source()
    assert code.count("numpy.sin(") == 1
    assert any(n.startswith("_s") for n, _, _, _ in prog.lines)
    a, b = np.array([0.2, 0.9]), np.array([0.4, 1.3])
    s = np.sin(a * b)  # reference library: numpy
    np.testing.assert_allclose(Evaluator(prog)(a, b), s**2 + np.cos(s) + np.exp(s) * a, rtol=RTOL)


def test_symbol_that_is_not_an_argument_is_refused():
    sx, sk = se.symbols("x k")
    with pytest.raises(ExpressionError, match=r"has symbols \['k'\] that are not arguments \(x, y\)"):
        build_program(sx * sk + 1, (x, y))


@pytest.mark.parametrize("number", [se.RealDouble(float("inf")), se.RealDouble(float("nan")),
                                    se.sympify(sp.Float("1e400"))], ids=["inf", "nan", "1e400"])
def test_non_finite_number_is_refused(number):
    with pytest.raises(ExpressionError, match="not finite in double precision"):
        build_program(number * se.Symbol("x") + 1, (x,))


@pytest.mark.parametrize("make", [lambda s: se.gamma(s), lambda s: se.floor(s) + 1, lambda s: s + se.I,
                                  lambda s: se.oo * s], ids=["gamma", "floor", "imaginary", "infinity"])
def test_operation_without_numpy_counterpart_is_refused(make):
    with pytest.raises(ExpressionError, match="cannot generate NumPy code for"):
        build_program(make(se.Symbol("x")), (x,))


def test_no_sympy_expression_is_built():
    # building a sympy sum imports sympy.tensor.tensor (slow); the symengine path must not
    code = textwrap.dedent("""
        import sys
        import numpy as np
        import sympy as sp
        import symengine as se
        import mmsverify.problem.evaluate as ev
        X, Y, T = sp.Symbol("x", real=True), sp.Symbol("y", real=True), sp.Symbol("t", real=True)
        x, y, t = se.symbols("x y t")
        e = (se.sin(se.pi * x) * se.exp(-t) * y**5 / (1 + x**2) + se.sqrt(x * y) - se.Rational(1, 3) / y
             + 0.25 * se.atan(x) * se.tanh(y) + abs(x - y))
        f = ev.Evaluator(ev.build_program(e, [X, Y, T]))
        v = f(np.linspace(0.1, 1, 300)[:, None], np.linspace(0.1, 1, 200)[None, :], 0.5)
        assert v.shape == (300, 200) and np.isfinite(v).all()
        print("sympy.tensor.tensor" in sys.modules)
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "False"
