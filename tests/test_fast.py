"""The fast derivation engine (symengine) agrees with sympy and steps aside when unsure.

A problem file is read with symengine where it keeps to the common cases
(mmsverify._fast) and with sympy otherwise; the outcome (tables, errors)
must not depend on the engine. sympy is the reference library here: its
derivatives are the check on symengine's.
"""

import os
import pickle
import subprocess
import sys
import tomllib

import numpy as np
import pytest
import sympy as sp

from mmsverify import _fast
from mmsverify.errors import ProblemError
from mmsverify.problem.record import PROBLEM_DIR, _Reader, bundled_problems, problem_from_text

FAST = ["block-poisson3d", "cavity-flow", "estuary-advection", "fin-diffusion", "kiln-conduction", "plate-poisson",
        "plume-advection", "river-advection", "shock-burgers", "slab-heat"]
TABLES = ("fields", "parameters", "equations", "fluxes", "quantities", "bounds")

PLATE = """
[domain]
x = [0.0, 1.0]
y = [0.0, 2.0]
[constants]
a = 0.7
[fields]
u = "{field}"
[operator]
kind = "diffusion"
k = "1 + x*y/4"
[boundaries]
x_max = "neumann"
[quantities]
load = {{integral = "u"}}
wall = {{flux = "u", side = "x_max"}}
"""


def _sympy_read(text, source="<text>"):
    return _Reader(tomllib.loads(text), text, source).read()


def _entries(tables):
    for table in TABLES:
        for key, value in tables[table].items():
            if table == "quantities":
                value = value[1]
            elif table == "bounds":
                value = value[0]
            for i, expr in enumerate(value if isinstance(value, list) else [value]):
                yield (table, key, i), expr


def _agree(fast_expr, sympy_expr, symbols, rng):
    """Both expressions at random points of [0.1, 1.1]^n; sympy's lambdify is the reference."""
    import symengine as se
    points = [rng.uniform(0.1, 1.1, 7) for _ in symbols]
    want = np.broadcast_to(sp.lambdify(symbols, sympy_expr, "numpy")(*points), points[0].shape)
    f = se.Lambdify([se.Symbol(str(s)) for s in symbols], [fast_expr])
    got = np.array([f(list(p))[0] if np.ndim(f(list(p))) else f(list(p)) for p in zip(*points)], dtype=float)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12 * (1 + np.max(np.abs(want))))


def test_the_common_bundled_problems_are_read_fast():
    fast = [n for n in bundled_problems()
            if problem_from_text((PROBLEM_DIR / f"{n}.toml").read_text())._fast_tables() is not None]
    assert fast == FAST    # compressible (sympy functions) and custom equations are read with sympy


@pytest.mark.parametrize("name", FAST)
def test_fast_tables_agree_with_sympy_derivation(name):
    text = (PROBLEM_DIR / f"{name}.toml").read_text()
    fast = problem_from_text(text, name)
    reference = _sympy_read(text, name)
    symbols = reference.coords + ((reference.t,) if reference.t is not None else ())
    ref = dict(_entries({t: getattr(reference, t) for t in TABLES}))
    got = dict(_entries(fast._fast_tables()))
    assert got.keys() == ref.keys()
    rng = np.random.default_rng(7)
    for key in ref:
        assert all(_fast.is_fast(e) for e in [got[key]] if not isinstance(got[key], (int, float)))
        _agree(got[key], ref[key], symbols, rng)


@pytest.mark.parametrize("name", ["plate-poisson", "slab-heat"])
def test_sympy_tables_of_a_fast_problem_are_the_sympy_reading(name):
    text = (PROBLEM_DIR / f"{name}.toml").read_text()
    fast, reference = problem_from_text(text, name), _sympy_read(text, name)
    assert "fields" not in fast.__dict__
    for table in TABLES:
        assert sp.srepr(getattr(fast, table)) == sp.srepr(getattr(reference, table)), table
    assert fast.coords == reference.coords and fast.t == reference.t
    assert fast.equation_text == reference.equation_text and fast.boundaries == reference.boundaries


def test_constant_powers_of_pi_and_e_stay_on_the_fast_path():
    p = problem_from_text(PLATE.format(field="pi**2*x*y + E**0.5*sin(x)"))
    assert p._fast_tables() is not None
    assert sp.srepr(p.equations) == sp.srepr(_sympy_read(PLATE.format(field="pi**2*x*y + E**0.5*sin(x)")).equations)


def test_changed_orders_keep_the_fast_tables_and_the_hash():
    p = problem_from_text(PLATE.format(field="sin(a*pi*x)*cos(y)"))
    q = p.with_changes(space_order=1, tolerance=0.2)
    assert (q.space_order, q.tolerance, p.space_order) == (1, 0.2, 2)
    assert str(q._fast_tables()) == str(p._fast_tables()) and q.content_hash() == p.content_hash()
    assert "fields" not in q.__dict__
    with pytest.raises(TypeError, match="changes only"):
        p.with_changes(fields={})


@pytest.mark.parametrize("field", [
    "atan2(y + 1, x + 2) + y",   # a function the fast engine leaves to sympy
    "erf(x) * y",
    "sqrt(2) * x + y",           # a function of a constant: sympy checks that it is real
    "x**y + 1",                  # a power with a symbolic exponent
])
def test_fast_engine_steps_aside_and_sympy_reads_it(field):
    text = PLATE.format(field=field)
    p = problem_from_text(text)
    assert p._fast_tables() is None and "_text" not in p.__dict__
    assert sp.srepr(p.equations) == sp.srepr(_sympy_read(text).equations)


@pytest.mark.parametrize("field", [
    "sin(q*x)",                  # unknown name
    "asin(2) * x",               # not a real number
    "x / (y - y)",               # division by zero
    "x^2",                       # '^' is not a power
    "sin(x",                     # syntax error
    "x**100",                    # exponent beyond the limit
    "1e400 * x",                 # number beyond the limit
])
def test_errors_are_the_sympy_readers_messages(field):
    text = PLATE.format(field=field)
    with pytest.raises(ProblemError) as sympy_error:
        _sympy_read(text)
    with pytest.raises(ProblemError) as error:
        problem_from_text(text)
    assert str(error.value) == str(sympy_error.value)


def test_custom_and_compressible_operators_are_read_with_sympy():
    for name in ("reactor-custom", "compressible-2d"):
        p = problem_from_text((PROBLEM_DIR / f"{name}.toml").read_text(), name)
        assert p._fast_tables() is None and ("fields" in p.__dict__ or "_symbolic" in p.__dict__)


def test_content_hash_is_the_same_in_every_process_and_sees_one_ulp(tmp_path):
    script = ("from mmsverify.problem.record import load_problem\n"
              "p = load_problem('plate-poisson')\n"
              "print(p.content_hash(), p._fast_tables() is not None)\n")
    out = []
    for seed in ("1", "2"):
        env = {**os.environ, "PYTHONHASHSEED": seed, "MMSVERIFY_CACHE": str(tmp_path / f"cache-{seed}")}
        res = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120, env=env)
        assert res.returncode == 0, res.stderr
        out.append(res.stdout.split())
    assert out[0] == out[1] and out[0][1] == "True"
    a = problem_from_text(PLATE.format(field="sin(a*pi*x) + y"))
    b = problem_from_text(PLATE.format(field="sin(a*pi*x) + y").replace("a = 0.7", "a = 0.7000000000000001"))
    assert a._fast_tables() is not None and a.content_hash() != b.content_hash()


def test_fast_problem_pickles_with_its_tables():
    p = problem_from_text(PLATE.format(field="sin(a*pi*x)*cos(y)"))
    packed = pickle.loads(pickle.dumps(p._packed()))
    assert "_fast_blob" in packed.__dict__ and "fields" not in packed.__dict__
    assert packed.content_hash() == p.content_hash() and packed.names("equations") == ("u",)
    assert str(packed.code_table("equations")["u"]) == str(p.code_table("equations")["u"])
    assert sp.srepr(packed.equations) == sp.srepr(p.equations)      # sympy tables from the kept text


def test_fast_and_sympy_problems_evaluate_alike():
    """The generated code of both readings gives the same numbers (sources, fluxes, quantities)."""
    from mmsverify.problem.derive import derive
    text = PLATE.format(field="sin(a*pi*x + 0.2)*exp(-y/2) + x*y**3/7")
    fast, slow = derive(problem_from_text(text)), derive(_sympy_read(text))
    assert fast.problem._fast_tables() is not None and slow.problem.__dict__.get("_fast") is None
    x, y = np.meshgrid(np.linspace(0, 1, 9), np.linspace(0, 2, 11), indexing="ij")
    for f in ("exact", "source"):
        np.testing.assert_allclose(getattr(fast, f)("u", x, y), getattr(slow, f)("u", x, y), rtol=1e-13, atol=1e-13)
    np.testing.assert_allclose(fast.normal_flux("u", "x_max", 1.0, y[0]), slow.normal_flux("u", "x_max", 1.0, y[0]),
                               rtol=1e-13, atol=1e-13)
    np.testing.assert_allclose(fast.normal_derivative("u", "y_min", x[:, 0], 0.0),
                               slow.normal_derivative("u", "y_min", x[:, 0], 0.0), rtol=1e-13, atol=1e-13)
    for q in ("load", "wall"):
        assert fast.exact_quantity(q) == pytest.approx(slow.exact_quantity(q), rel=1e-13)


def test_first_run_of_a_new_problem_builds_no_sympy_expression(tmp_path):
    """A cold study of a problem the fast engine reads never imports sympy.tensor (sympy's first sum)."""
    script = ("import sys\n"
              "from mmsverify import run_study\n"
              "r = run_study('plate-poisson', 'poisson2d', levels=4, base_cells=8)\n"
              "print(r.passed, 'sympy.tensor.tensor' in sys.modules)\n")
    env = {**os.environ, "MMSVERIFY_CACHE": str(tmp_path / "empty-cache")}
    res = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, timeout=120)
    assert res.returncode == 0, res.stderr
    assert res.stdout.split() == ["True", "False"], res.stdout + res.stderr
