"""Tests of the safe expression parser (mmsverify.problem.expr)."""

import ast
import pathlib
import string
import time

import pytest
import sympy
from hypothesis import example, given, settings
from hypothesis import strategies as st
from sympy.parsing.sympy_parser import parse_expr, standard_transformations

import mmsverify.problem.expr as expr_module
from mmsverify.errors import ExpressionError, ProblemError
from mmsverify.problem.expr import ALLOWED_FUNCTIONS, MAX_EXPONENT, parse_expression

x, y, z, t = sympy.symbols("x y z t")
k, T0 = sympy.symbols("k T0")
NAMES = {"x": x, "y": y, "z": z, "t": t, "k": k, "T0": T0}
WHERE = "mmsverify/problem/bundled/heat.toml, field 'T'"
pi, E = sympy.pi, sympy.E
R = sympy.Rational


def parse(text, **kw):
    return parse_expression(text, NAMES, **kw)


def refuse(text, *fragments, names=NAMES, **kw):
    """Parse text expecting refusal; check the message and that it came quickly."""
    start = time.perf_counter()
    with pytest.raises(ExpressionError) as info:
        parse_expression(text, names, where=WHERE, **kw)
    elapsed = time.perf_counter() - start
    assert elapsed < 2.0, f"refusal took {elapsed:.2f} s"
    message = str(info.value)
    assert message.startswith(WHERE + ": "), message
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in {message!r}"
    return message


# --- typical manufactured solutions; reference: sympy built by hand -----------------------

# Fields of the kind found in mmsverify/problem/bundled/*.toml.  reference: sympy
FIELDS = [
    ("sin(pi*x)*exp(-t)", sympy.sin(pi * x) * sympy.exp(-t)),
    ("1 + exp(-0.8*t) * sin(1.3*pi*x + 0.4) + 0.2*x*cos(2*t)",
     1 + sympy.exp(-R(4, 5) * t) * sympy.sin(R(13, 10) * pi * x + R(2, 5))
     + R(1, 5) * x * sympy.cos(2 * t)),
    ("T0 + sin(1.5*pi*x) * cos(2*pi*y) + 0.3*exp(x - y)",
     T0 + sympy.sin(R(3, 2) * pi * x) * sympy.cos(2 * pi * y) + R(3, 10) * sympy.exp(x - y)),
    ("0.5 - 0.4*tanh((x - 0.3*t)/0.4) + 0.05*sin(pi*x)*exp(-t)",
     R(1, 2) - R(2, 5) * sympy.tanh((x - R(3, 10) * t) / R(2, 5))
     + R(1, 20) * sympy.sin(pi * x) * sympy.exp(-t)),
    ("u0 + ux*sin(5/3*pi*x)".replace("u0", "k").replace("ux", "T0"),
     k + T0 * sympy.sin(R(5, 3) * pi * x)),
    ("x**2*(1 - x)**2*y**2*(1 - y)**2", x**2 * (1 - x)**2 * y**2 * (1 - y)**2),
    ("sqrt(x**2 + y**2 + z**2)", sympy.sqrt(x**2 + y**2 + z**2)),
    ("atan2(y, x) + log(1 + x) + log(x, 10)",
     sympy.atan2(y, x) + sympy.log(1 + x) + sympy.log(x) / sympy.log(10)),
    ("abs(x - 0.5) + max(x, y, 0) - min(x, y) + sign(y) + erf(x/2)",
     sympy.Abs(x - R(1, 2)) + sympy.Max(x, y, 0) - sympy.Min(x, y) + sympy.sign(y)
     + sympy.erf(x / 2)),
    ("sinh(x)*cosh(y)/(1 + tan(z)**2) + asin(x/2) + acos(y/3) + atan(z)",
     sympy.sinh(x) * sympy.cosh(y) / (1 + sympy.tan(z)**2) + sympy.asin(x / 2)
     + sympy.acos(y / 3) + sympy.atan(z)),
    ("E**(-k*t) * cos(pi*z)", sympy.exp(-k * t) * sympy.cos(pi * z)),
    ("p0 + 0.2e5*cos(0.4*pi*x)".replace("p0", "k"), k + 20000 * sympy.cos(R(2, 5) * pi * x)),
]


@pytest.mark.parametrize("text, expected", FIELDS)
def test_typical_fields_equal_hand_built_sympy(text, expected):
    # reference: sympy
    result = parse(text)
    assert isinstance(result, sympy.Expr)
    assert result == expected
    assert sympy.simplify(result - expected) == 0


def test_fields_written_differently_simplify_to_same():
    # reference: sympy (difference simplifies to zero)
    pairs = [
        ("(1 - x)**2 * exp(-t)", sympy.expand((1 - x)**2) * sympy.exp(-t)),
        ("sin(2*pi*x)", 2 * sympy.sin(pi * x) * sympy.cos(pi * x)),
        ("exp(-k*t)*exp(-t)", sympy.exp(-(k + 1) * t)),
        ("cosh(x)**2 - sinh(x)**2 + y", 1 + y),
    ]
    for text, other in pairs:
        assert sympy.simplify(parse(text) - other) == 0, text


def test_multiline_text_from_toml_triple_quotes():
    text = "k + 0.15*sin(0.75*pi*x)\n         + 0.05*sin(0.75*pi*x*z)"
    # reference: sympy
    assert parse(text) == k + R(3, 20) * sympy.sin(R(3, 4) * pi * x) \
        + R(1, 20) * sympy.sin(R(3, 4) * pi * x * z)
    assert parse("  x + 1  ") == x + 1


def test_decimal_literals_are_exact_rationals():
    # reference: sympy (exact rationals)
    assert parse("0.1") == R(1, 10)
    assert parse("0.1") != sympy.Float(0.1)
    assert parse("0.1 + 0.2") == R(3, 10)
    assert parse("1e-3") == R(1, 1000)
    assert parse("2.") == 2 and parse(".5") == R(1, 2) and parse("1E3") == 1000
    assert parse("1_000.5") == R(2001, 2)
    assert parse("6.02214076e23") == sympy.Integer(602214076) * 10**15
    assert parse("1.380649e-23") == R(1380649, 10**29)
    assert parse("0x10 + 0b11 + 0o7 + 1_000") == 16 + 3 + 7 + 1000
    assert isinstance(parse("3"), sympy.Integer)


def test_pi_and_E_defaults_and_override():
    assert parse("pi + E") == sympy.pi + sympy.E
    e_sym = sympy.Symbol("e_user")
    assert parse_expression("E + 1", {"E": e_sym}) == e_sym + 1


def test_precedence_and_associativity():
    # Python language reference, operator precedence
    assert parse("-x**2") == -(x**2)
    assert parse("-2**2") == -4
    assert parse("(-2)**2") == 4
    assert parse("2**-1") == R(1, 2)
    assert parse("x**-y") == x**(-y)
    assert parse("x**y**2") == x**(y**2)
    assert parse("2**3**2") == 512
    assert parse("x/y/2") == (x / y) / 2
    assert parse("x - y - 1") == (x - y) - 1
    assert parse("1 + 2*x**3") == 1 + 2 * x**3
    assert parse("-x*y") == (-x) * y
    assert parse("+x") == x and parse("--x") == x and parse("-+-x") == x
    assert parse("2*-x") == -2 * x
    assert parse("x/2*y") == (x / 2) * y


# --- refusals, each with its message -------------------------------------------------------

@pytest.mark.parametrize("text, fragments", [
    ("__import__('os').system('echo hi')", ["attribute access", "column 1"]),
    ("x.__class__", ["attribute access '.'", "column 1"]),
    ("(lambda: 1)()", ["lambda"]),
    ("lambda: 1", ["lambda", "column 1"]),
    ("[x for x in y]", ["list comprehension"]),
    ("{x for x in y}", ["set comprehension"]),
    ("sum(x for x in y)", ["unknown function 'sum'"]),
    ("open('f')", ["unknown function 'open'", "allowed functions: abs, acos, asin"]),
    ("eval('1')", ["unknown function 'eval'", "atan2", "sqrt"]),
    ("exec('1')", ["unknown function 'exec'"]),
    ("sin('1')", ["str literal"]),
    ('"a"', ["str literal", "column 1"]),
    ("b'a'", ["bytes literal"]),
    ("x[0]", ["subscript '[...]'", "column 1"]),
    ("x if y else z", ["conditional expression", "column 1"]),
    ("x < y", ["comparison"]),
    ("x and y", ["boolean operator"]),
    ("not x", ["'not'"]),
    ("~x", ["bitwise not"]),
    ("x // 2", ["floor division", "column 3"]),
    ("x % 2", ["modulo", "column 3"]),
    ("x | y", ["bitwise or"]),
    ("x << 2", ["shift"]),
    ("f'{x}'", ["f-string"]),
    ("(y := 1)", ["assignment expression", "column 2"]),
    ("sin(x=1)", ["keyword arguments", "sin(...)"]),
    ("sin(*x)", ["starred argument", "column 5"]),
    ("sin(x)(y)", ["a call result"]),
    ("(1, 2)", ["tuple"]),
    ("{x: 1}", ["dict"]),
    ("[x]", ["list"]),
    ("1j", ["imaginary"]),
    ("True", ["'True'"]),
    ("None", ["'None'"]),
    ("...", ["'Ellipsis'"]),
    ("x ^ 2", ["use ** for powers", "column 3"]),
    ("(x + 1) ^ 2", ["use ** for powers", "column 9"]),
    ("sin", ["'sin' is a function", "sin(...)"]),
    ("x(2)", ["'x' is a name, not a function"]),
    ("x # note", ["comments", "column 3"]),
    ("", ["empty"]),
    ("   \n ", ["empty"]),
    ("1/(x - x)", ["division by zero"]),
    ("0**-1", ["division by zero"]),
    ("1e101", ["outside 1e-100..1e100"]),
    ("1e-101", ["outside"]),
    ("1000000000000001", ["integer literal exceeds"]),
    ("1" * 5000, []),  # Python >= 3.11 refuses it in the parser, 3.10 reaches our limit
    ("x\x00", ["null bytes"]),
])
def test_refused_constructs_are_named(text, fragments):
    refuse(text, *fragments)


def test_injection_payload_has_no_side_effect(tmp_path):
    target = tmp_path / "pwned"
    refuse(f"__import__('os').system('touch {target}')", "attribute access")
    refuse(f"open('{target}', 'w')", "unknown function 'open'")
    assert not target.exists()


def test_unknown_name_message_lists_known_names():
    names = {"T": sympy.Symbol("T"), "k": k, "x": x, "y": y}
    message = refuse("T + q", names=names)
    assert message == (f"{WHERE}: unknown name 'q' at column 5; known names: E, T, k, pi, x, y "
                       "(define it under [constants] or as a field)")
    assert "did you mean 'x'?" in refuse("xx", names=names)


def test_locations_count_characters_lines_and_offsets():
    # columns count characters, not UTF-8 bytes
    assert "column 5" in refuse("é + q", names={**NAMES, "é": y})
    assert "column 7" in refuse("ééé + q", names={"ééé": y})
    assert "line 2, column 3" in refuse("x +\n  q")
    assert "column 3" in refuse("  q")


def test_wrong_argument_counts_say_expected_count():
    refuse("atan2(x)", "atan2() takes 2 arguments, got 1")
    refuse("sin(x, y)", "sin() takes 1 argument, got 2")
    refuse("log(x, 2, 3)", "log() takes 1 to 2 arguments, got 3")
    refuse("max(x)", "max() takes at least 2 arguments, got 1")

    def d(f, v, n=1):
        return sympy.diff(f, v, n)
    refuse("d(x)", "d() got 1 argument(s); expected d(f, v, n=1)", functions={"d": d})
    # reference: sympy
    assert parse("d(x**3, x, 2) + d(sin(x), x)", functions={"d": d}) == 6 * x + sympy.cos(x)


def test_extra_functions_errors_are_located():
    def lap(f):
        raise ExpressionError("lap() needs a field")

    def broken(f):
        raise ValueError("boom")
    refuse("1 + lap(x)", "in lap(): lap() needs a field", "column 5", functions={"lap": lap})
    refuse("broken(x)", "broken() failed (ValueError: boom)", functions={"broken": broken})
    refuse("tup(x)", "not an expression", functions={"tup": lambda f: (f, f)})
    assert issubclass(ExpressionError, ProblemError)


def test_syntax_error_shows_text_and_caret():
    message = refuse("x + ) * 2", "syntax error", "column 5")
    lines = message.split("\n")
    assert lines[1] == "    x + ) * 2"
    assert lines[2] == "    " + " " * 4 + "^"
    long_text = "x" * 100 + " + ) + " + "y" * 100
    lines = refuse(long_text, "column 104").split("\n")
    assert lines[1][lines[2].index("^")] == ")"


def test_allowed_functions_is_read_only_and_complete():
    assert sorted(ALLOWED_FUNCTIONS) == sorted(
        "sin cos tan exp log sqrt sinh cosh tanh asin acos atan atan2 abs min max sign erf"
        .split())
    with pytest.raises(TypeError):
        ALLOWED_FUNCTIONS["eval"] = eval  # type: ignore[index]
    assert "factorial" not in ALLOWED_FUNCTIONS


# --- resource limits: refused quickly --------------------------------------------------------

@pytest.mark.parametrize("text, fragment", [
    ("10**10**10", "exponent"),
    ("2**64**64", "exponent"),
    ("9**9**9**9", "exponent"),
    ("(x + 1)**1000", "exponent 1000 is larger than 64"),
    (f"x**{MAX_EXPONENT + 1}", "larger than"),
    (f"x**-{MAX_EXPONENT + 1}", "larger than"),
    ("((((2**60)**60)**60)**60)**60", "bits"),
    ("(1e99 + 8)**(63/64)", "bits"),
    ("(" * 5000 + "x" + ")" * 5000, "characters"),
    ("(" * 4000 + "x" + ")" * 4000, "too many nested parentheses"),
    ("-" * 100000 + "x", "characters"),
    ("-" * 9000 + "x", "nested"),
    ("-" * 150 + "x", "nested more than 100 levels"),
    ("x+" * 4999 + "x", "nested"),
    ("+".join(["x"] * 200), "nested more than 100 levels"),
    ("*".join(["1e99"] * 200), "nested"),
    ("sin(" * 150 + "x" + ")" * 150, "nested more than 100 levels"),
    ("(" * 250 + "x" + ")" * 250, "too many nested parentheses"),
])
def test_explosive_inputs_end_quickly(text, fragment):
    refuse(text, fragment)


def test_balanced_huge_tree_refused_by_node_count():
    def balanced(depth, counter=[0]):
        if depth == 0:
            counter[0] += 1
            return f"x**{counter[0] % 60}*sin({counter[0]}*y)"
        return f"({balanced(depth - 1)}+{balanced(depth - 1)})"
    refuse(balanced(8), "syntax nodes")


def test_slow_radical_products_are_refused_by_their_size():
    # 64th roots of large numbers combine into ever larger ones inside sympy
    leaves = [f"exp(log(1e99+{2 * i + 1})/64)" for i in range(64)]

    def join(items):
        if len(items) == 1:
            return items[0]
        half = len(items) // 2
        return f"({join(items[:half])}*{join(items[half:])})"
    start = time.perf_counter()
    refuse(join(leaves), "exceeds 512 bits")
    assert time.perf_counter() - start < 1.0      # a count, checked at every node, stops it early


def test_realistic_size_expressions_are_accepted():
    text = " + ".join(f"{i}*sin({i}*pi*x)*cos({i}*pi*y)" for i in range(1, 40))
    # reference: sympy
    expected = sum(i * sympy.sin(i * pi * x) * sympy.cos(i * pi * y) for i in range(1, 40))
    assert parse(text) == expected
    assert parse(f"x**{MAX_EXPONENT}") == x**64


# --- the module never hands text to an evaluator ------------------------------------------

def test_source_uses_no_evaluator():
    source = pathlib.Path(expr_module.__file__).read_text()
    banned = {"eval", "exec", "compile", "sympify", "parse_expr", "S", "__import__",
              "import_module", "lambdify"}
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Name):
            assert node.id not in banned, f"{node.id} at line {node.lineno}"
        if isinstance(node, ast.Attribute):
            assert node.attr not in banned, f"{node.attr} at line {node.lineno}"
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            modules = [getattr(node, "module", None) or ""] + [a.name for a in node.names]
            assert not any("parsing" in m for m in modules), modules


# --- properties ------------------------------------------------------------------------------

def _outcome_is_clean(text):
    start = time.perf_counter()
    try:
        result = parse_expression(text, NAMES, where=WHERE)
    except ExpressionError as exc:
        assert str(exc).startswith(WHERE + ": ")
    else:
        assert isinstance(result, sympy.Expr)
    elapsed = time.perf_counter() - start
    assert elapsed < 2.0, f"{text!r} took {elapsed:.2f} s"


@pytest.mark.slow
@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=string.printable, max_size=200))
def test_random_printable_text_only_raises_expression_error(text):
    _outcome_is_clean(text)


TOKENS = ["x", "y", "t", "k", "q", "1", "2", "0.5", "1e99", "64", "+", "-", "*", "/", "**",
          "^", "(", ")", "sin(", "max(", "atan2(", "sqrt(", ",", "pi", "E", ".", " ", "[",
          "]", "lambda", ":", " if ", " else ", "'", "_", "__class__", "=", "<", "j", "\n"]


@pytest.mark.slow
@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(TOKENS), max_size=60).map("".join))
def test_random_token_soup_only_raises_expression_error(text):
    _outcome_is_clean(text)


def _expressions():
    leaves = st.sampled_from(["x", "y", "t", "1", "2", "3", "7", "pi"])

    def extend(inner):
        return st.one_of(
            st.tuples(inner, st.sampled_from(["+", "-", "*", "/"]), inner, st.booleans())
            .map(lambda p: f"({p[0]} {p[1]} {p[2]})" if p[3] else f"{p[0]}{p[1]}{p[2]}"),
            st.tuples(inner, st.sampled_from(["0", "1", "2", "3", "-1", "-2"]))
            .map(lambda p: f"{p[0]}**{p[1]}"),
            inner.map(lambda s: "-" + s),
            st.tuples(st.sampled_from(["sin", "cos", "exp"]), inner)
            .map(lambda p: f"{p[0]}({p[1]})"),
        )
    return st.recursive(leaves, extend, max_leaves=12)


@pytest.mark.slow
@settings(max_examples=300, deadline=None)
@given(_expressions())
@example("-exp(exp(7))")  # exp(1097): a constant beyond floating point, refused (found by this test in CI)
def test_grammar_expressions_match_sympy_reference_parser(text):
    # reference: sympy's own parser (trusted, test-generated text), Python precedence
    reference = parse_expr(text, local_dict=dict(NAMES), transformations=standard_transformations)
    if reference.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
        with pytest.raises(ExpressionError):
            parse(text)
        return
    try:
        got = parse(text)
    except ExpressionError as exc:  # refused only for a constant that floating point cannot hold
        assert "beyond floating point" in str(exc) and _overflows(reference), (text, str(exc))
        return
    assert got == reference, text


def _overflows(expr):
    """Whether a constant part of ``expr`` is beyond floating point (evaluated in floats, as the parser does)."""
    import math
    for sub in sympy.preorder_traversal(expr):
        if sub.free_symbols or not sub.is_number:
            continue
        try:
            value = sympy.lambdify((), sub, "math")()
        except OverflowError:
            return True
        if isinstance(value, float) and math.isinf(value):
            return True
    return False


@pytest.mark.parametrize("entry, says", [('u = "1if x else 2"', "conditional expression"),
                                          ("""u = "'\\\\d' + x" """, "not allowed")])
def test_text_python_warns_about_gets_only_our_message(entry, says):
    # Python 3.12+ warns while parsing such text ("invalid decimal literal", "invalid escape
    # sequence"); a problem file's author should see the message naming the place, not the compiler's
    # warning ahead of it, also where warnings are errors.
    import warnings
    from mmsverify.problem.derive import problem_from_text
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(ProblemError, match=says):
            problem_from_text("[domain]\nx = [0, 1]\n[fields]\n" + entry + "\n", "shared.toml")


def test_canonical_form_ignores_spelling_and_keeps_numbers_exact():
    # common practice: a content key must not change with whitespace, parentheses or the spelling of a number
    from mmsverify.problem.expr import canonical_form
    assert canonical_form("sin( 0.70*pi*x ) + +y") == canonical_form("(sin(7e-1*pi*x))+y")
    assert canonical_form("0.1") == "1/10" and canonical_form("1_000") == "1000" and canonical_form("2.0") == "2"
    assert canonical_form("x - y") != canonical_form("y - x")
    assert canonical_form("-x**2") == ["neg", ["**", ["name", "x"], "2"]]
    assert canonical_form(0.1) == "0.1" and canonical_form(3) == "3"
