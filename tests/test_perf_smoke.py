"""Fast paths of derivation and evaluation, checked for correctness (never for speed).

* Generated evaluators (CSE, hoisting, block evaluation) against
  plain sympy.lambdify of the same expression, to round-off.
* Compressible Navier-Stokes sources against an independent route: the
  equations expanded by hand into non-conservative form and evaluated with
  mpmath numerical derivatives at 40 digits, and, for the energy equation,
  against a hand-written NumPy implementation.
* A tiny run of each bench script, so they keep working.
"""

import importlib.util
import pickle
import subprocess
import sys
import tracemalloc
from pathlib import Path

import mpmath
import numpy as np
import pytest
import sympy as sp

from mmsverify import derive, load_problem, problem_from_text
from mmsverify.problem.evaluate import BLOCK, Evaluator, build_program
from mmsverify.problem.derive import _Programs

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(autouse=True)
def fresh_programs():
    """Every test generates its evaluators anew."""
    _Programs._memory.clear()
    yield
    _Programs._memory.clear()


def _lambdified(expr, args):
    return sp.lambdify(args, expr, modules="numpy")


def _assert_roundoff(ours, ref):
    ref = np.broadcast_to(ref, ours.shape)
    scale = np.max(np.abs(ref))
    # common practice: agreement to a few hundred ulps of the largest value
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-13 * scale)


# -- generated evaluators against plain lambdify ---------------------------

def test_blocks_and_hoisting_match_plain_lambdify_on_axis_arrays():
    p = load_problem("compressible-2d")
    expr = derive(p).equations["p"]
    x = np.linspace(0.0, 1.0, 181)[:, None]
    y = np.linspace(0.0, 1.0, 173)[None, :]
    ref = _lambdified(expr, p.coords)(x, y)
    for block in (257, 4096, 1 << 20):               # many blocks, some, one
        ours = Evaluator(build_program(expr, p.coords), block=block)(x, y)
        assert ours.shape == (181, 173)
        _assert_roundoff(ours, ref)


def test_full_meshgrid_input_is_reduced_exactly_and_still_correct():
    p = load_problem("compressible-2d")
    ev = Evaluator(build_program(derive(p).equations["u"], p.coords), block=1000)
    xs, ys = np.linspace(0, 1, 150), np.linspace(0, 1, 90)
    for indexing in ("ij", "xy"):
        X, Y = np.meshgrid(xs, ys, indexing=indexing)
        _assert_roundoff(ev(X, Y), _lambdified(derive(p).equations["u"], p.coords)(X, Y))


def test_broadcast_views_as_input_are_reduced_and_still_correct():
    # check_solution hands the exact solution broadcast views of the solver's axis arrays
    p = load_problem("compressible-3d")
    ev = Evaluator(build_program(derive(p).equations["p"], p.coords), block=777)
    axes = [np.linspace(0, 1, n).reshape([-1 if k == a else 1 for k in range(3)]) for a, n in enumerate((50, 30, 40))]
    views = np.broadcast_arrays(*axes)
    assert 0 in views[1].strides and views[1].size > BLOCK
    ours = ev(*views)
    assert ours.shape == (50, 30, 40) and ours.flags.writeable
    _assert_roundoff(ours, _lambdified(derive(p).equations["p"], p.coords)(*axes))


def test_scattered_and_rotated_points_are_not_mistaken_for_axis_arrays():
    p = load_problem("compressible-2d")
    ev = Evaluator(build_program(derive(p).equations["p"], p.coords), block=999)
    rng = np.random.default_rng(7)
    pts = rng.uniform(0, 1, (2, 5000))
    ref = _lambdified(derive(p).equations["p"], p.coords)
    _assert_roundoff(ev(pts[0], pts[1]), ref(pts[0], pts[1]))
    # a rotated mesh: both coordinates vary along both axes
    s, r = np.meshgrid(np.linspace(0, 0.7, 80), np.linspace(0, 0.7, 70), indexing="ij")
    X, Y = 0.1 + 0.8 * s + 0.2 * r, 0.1 - 0.1 * s + 0.9 * r
    _assert_roundoff(ev(X, Y), ref(X, Y))
    # the same first row and column as an axis mesh, different inside
    X2 = np.broadcast_to(np.linspace(0, 1, 80)[:, None], (80, 70)).copy()
    X2[40:, 35:] += 0.01
    Y2 = np.broadcast_to(np.linspace(0, 1, 70)[None, :], (80, 70)).copy()
    _assert_roundoff(ev(X2, Y2), ref(X2, Y2))


def test_three_d_transient_and_partial_dependence():
    x, y, z, t = sp.symbols("x y z t", real=True)
    expr = sp.sin(sp.pi * x) * sp.exp(-t) * sp.cos(2 * y * z) + x ** 3 / (1 + y ** 2) + t ** 2
    ev = Evaluator(build_program(expr, (x, y, z, t)), block=300)
    X = np.linspace(0, 1, 13)[:, None, None]
    Y = np.linspace(0, 2, 11)[None, :, None]
    Z = np.linspace(-1, 1, 9)[None, None, :]
    _assert_roundoff(ev(X, Y, Z, 0.3), _lambdified(expr, (x, y, z, t))(X, Y, Z, 0.3))
    # an expression of x alone still has the full broadcast shape
    only_x = Evaluator(build_program(sp.sin(x) + 1, (x, y, z, t)), block=100)
    out = only_x(X, Y, Z, 0.0)
    assert out.shape == (13, 11, 9)
    np.testing.assert_allclose(out, np.broadcast_to(np.sin(X) + 1, out.shape), rtol=1e-15)
    const = Evaluator(build_program(sp.Integer(3), (x, y, z, t)))
    assert const(X, Y, Z, 1.0).shape == (13, 11, 9) and np.all(const(X, Y, Z, 1.0) == 3.0)


def test_whole_powers_erf_and_exact_float_literals():
    x, y = sp.symbols("x y", real=True)
    expr = (x + 2) ** 5 / (y + 3) ** 3 + sp.erf(x) + sp.Float(0.1 + 0.2) * y + sp.Min(x, y)
    ev = Evaluator(build_program(expr, (x, y)), block=64)
    xs, ys = np.linspace(-1, 1, 40)[:, None], np.linspace(0, 1, 30)[None, :]
    ref = sp.lambdify((x, y), expr, modules=["numpy", "scipy"])(xs, ys)
    _assert_roundoff(ev(xs, ys), ref)
    assert "0.30000000000000004" in build_program(sp.Float(0.1 + 0.2) * x, (x,)).source()


def test_pickled_evaluator_and_program_round_trip():
    x, y = sp.symbols("x y")
    prog = build_program(sp.sin(x * y) + sp.cos(x), (x, y))
    again = pickle.loads(pickle.dumps(Evaluator(prog)))
    assert again.program == prog
    assert float(again(0.5, 2.0)) == pytest.approx(np.sin(1.0) + np.cos(0.5), rel=1e-15)


@pytest.mark.parametrize("name,n", [("compressible-2d", 700), ("compressible-2d", 220), ("compressible-3d", 36)])
def test_peak_temporaries_stay_within_four_full_arrays(name, n):
    # issue 9 target 2: peak temporary memory at most 4 full arrays (output included here)
    p = load_problem(name)
    m = derive(p)
    mesh = np.meshgrid(*[np.linspace(0, 1, n)] * p.dim, indexing="ij")
    m.source("p", *mesh)                            # generate the code outside the measurement
    full = mesh[0].nbytes
    tracemalloc.start()
    try:
        out = m.source("p", *mesh)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert out.shape == mesh[0].shape
    assert peak <= 4 * full, f"peak {peak / full:.2f} full arrays"


# -- compressible Navier-Stokes against an independent route ----------------

mpmath.mp.dps = 40


def _mp_fields(problem):
    args = problem.coords + ((problem.t,) if problem.transient else ())
    return {k: sp.lambdify(args, v, modules="mpmath") for k, v in problem.fields.items()}


def _primitive_form(problem, point):
    """Residuals of problems with operator navier_stokes_compressible, written out by hand.

    Non-conservative form with constant mu (expanded by the product rule):
    with D the mass residual rho_t + u.grad(rho) + rho div(u),
      momentum_i = u_i D + rho (du_i/dt + u.grad u_i) + dp/dx_i
                   - mu (lap u_i + (1/3) d(div u)/dx_i)
      energy     = E D + rho (dE/dt + u.grad E) + div(p u)
                   - (tau_ij du_i/dx_j + u_i dtau_ij/dx_j) - kappa lap(p/rho)
    with E = p/((gamma-1) rho) + |u|^2/2 and kappa = gamma mu/((gamma-1) Pr).
    Returns ``{equation: (value, scale)}``, scale the sum of |terms|.
    """
    # common practice: conservation laws of a calorically perfect gas with the
    # Stokes stress and Fourier conduction, expanded here with the product rule
    dim = problem.dim
    f = _mp_fields(problem)
    par = {k: float(v) for k, v in problem.parameters.items()}
    gamma, mu, pr = par["gamma"], par["mu"], par["Pr"]
    kappa = gamma * mu / ((gamma - 1) * pr)
    vel = [f[c] for c in ("u", "v", "w")[:dim]]
    pt = [mpmath.mpf(v) for v in point]
    nvar = len(pt)

    def d(fn, *axes):
        orders = [0] * nvar
        for a in axes:
            orders[a] += 1
        return mpmath.diff(fn, pt, orders) if axes else fn(*pt)

    def energy(*q):
        return f["p"](*q) / ((gamma - 1) * f["rho"](*q)) + sum(c(*q) ** 2 for c in vel) / 2

    def temperature(*q):
        return f["p"](*q) / f["rho"](*q)

    transient = problem.transient
    tax = dim
    rho = d(f["rho"])
    u = [d(c) for c in vel]
    grad_u = [[d(c, j) for j in range(dim)] for c in vel]
    div_u = sum(grad_u[i][i] for i in range(dim))
    mass_terms = [rho * div_u] + [u[j] * d(f["rho"], j) for j in range(dim)]
    if transient:
        mass_terms.append(d(f["rho"], tax))
    mass = sum(mass_terms)
    out = {"rho": (mass, sum(abs(v) for v in mass_terms))}
    for i, name in enumerate(("u", "v", "w")[:dim]):
        lap = sum(d(vel[i], j, j) for j in range(dim))
        grad_div = sum(d(vel[j], j, i) for j in range(dim))
        terms = [u[i] * mass, d(f["p"], i), -mu * lap, -mu * grad_div / 3]
        terms += [rho * u[j] * grad_u[i][j] for j in range(dim)]
        if transient:
            terms.append(rho * d(vel[i], tax))
        out[name] = (sum(terms), sum(abs(v) for v in terms))
    tau = [[mu * (grad_u[i][j] + grad_u[j][i]) - (2 * mu * div_u / 3 if i == j else 0)
            for j in range(dim)] for i in range(dim)]
    dtau = [sum(mu * (d(vel[i], j, j) + d(vel[j], i, j)) for j in range(dim))
            - 2 * mu * sum(d(vel[k], k, i) for k in range(dim)) / 3 for i in range(dim)]
    terms = [energy(*pt) * mass, d(f["p"]) * div_u]
    terms += [rho * u[j] * d(energy, j) + u[j] * d(f["p"], j) for j in range(dim)]
    terms += [-tau[i][j] * grad_u[i][j] for i in range(dim) for j in range(dim)]
    terms += [-u[i] * dtau[i] for i in range(dim)]
    terms += [-kappa * d(temperature, j, j) for j in range(dim)]
    if transient:
        terms.append(rho * d(energy, tax))
    out["p"] = (sum(terms), sum(abs(v) for v in terms))
    return out


_TRANSIENT_2D = """
[domain]
x = [0.0, 1.0]
y = [0.0, 2.0]
t = [0.0, 1.0]
[fields]
rho = "1 + 0.2*sin(x + 2*t)*cos(y)"
u = "0.5 + 0.3*cos(x*y) * exp(-t)"
v = "-0.2 + 0.1*sin(2*x - y + t)"
p = "2 + 0.5*cos(x + y)*(1 + t**2)"
[operator]
kind = "navier_stokes_compressible"
gamma = 1.3
mu = 0.05
Pr = 0.7
"""


@pytest.mark.parametrize("name", ["compressible-2d", "compressible-3d", "transient-2d"])
def test_compressible_sources_match_primitive_form(name):
    problem = problem_from_text(_TRANSIENT_2D) if name == "transient-2d" else load_problem(name)
    m = derive(problem)
    rng = np.random.default_rng(11)
    lo = np.array(problem.lower + ((problem.t_range[0],) if problem.transient else ()))
    hi = np.array(problem.upper + ((problem.t_range[1],) if problem.transient else ()))
    for _ in range(2):
        point = lo + (hi - lo) * rng.uniform(0.1, 0.9, lo.size)
        coords = point[: problem.dim]
        t = point[-1] if problem.transient else None
        for eq, (value, scale) in _primitive_form(problem, point).items():
            ours = float(m.source(eq, *coords, t=t))
            assert abs(ours - float(value)) <= 1e-12 * float(scale), (name, eq, ours, float(value))


def test_compressible_energy_matches_handwritten_numpy():
    spec = importlib.util.spec_from_file_location("_handwritten", ROOT / "bench" / "_handwritten.py")
    hand = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(hand)
    m = derive("compressible-2d")
    x, y = np.linspace(0, 1, 64)[:, None], np.linspace(0, 1, 48)[None, :]
    _assert_roundoff(m.source("p", x, y), hand.energy_source(x, y))


def test_compressible_operator_needs_the_fields_of_its_dimension():
    text = _TRANSIENT_2D.replace('[operator]', 'w = "1"\n[operator]')
    with pytest.raises(Exception, match="needs fields rho, u, v, p in 2-D"):
        problem_from_text(text)


def test_compressible_traction_is_the_viscous_stress():
    # reference: tau_xy = mu (du/dy + dv/dx), Stokes hypothesis (common practice)
    text = (_TRANSIENT_2D.replace("t = [0.0, 1.0]\n", "").replace("2*t", "2").replace("exp(-t)", "2")
            .replace(" + t)", ")").replace("t**2", "1") + '[boundaries]\ny_max = "neumann"\n')
    p = problem_from_text(text)
    assert not p.transient
    m = derive(p)
    x, y = p.coords
    u, v = p.fields["u"], p.fields["v"]
    expected = 0.05 * (sp.diff(u, y) + sp.diff(v, x))
    got = float(m.normal_flux("u", "y_max", 0.3, 2.0))
    assert got == pytest.approx(float(expected.subs({x: 0.3, y: 2.0})), rel=1e-13)


# -- bench scripts stay working -----------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("script", ["evaluators.py", "derivation.py", "first_contact.py"])
def test_bench_script_runs_at_tiny_size(script):
    run = subprocess.run([sys.executable, str(ROOT / "bench" / script), "--tiny"], capture_output=True,
                         text=True, timeout=600, cwd=ROOT)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "ratio" in run.stdout or "total" in run.stdout
    if script == "first_contact.py":        # the demo itself behaved as designed in both runs
        assert run.stdout.count("| 0 | Demo outcome: the correct solver is confirmed") == 2, run.stdout
