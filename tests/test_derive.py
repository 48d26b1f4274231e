"""Derived source terms against independent routes.

Route 1: the operator applied by hand with sympy derivatives for one case.
Route 2: for every bundled problem, the operator is re-implemented here
with high-precision numerical derivatives (mpmath.diff at 40 digits) of the
exact fields only, at random points, and compared with the derived sources.
"""

import mpmath
import numpy as np
import pytest
import sympy as sp

from mmsverify import bundled_problems, derive, load_problem, problem_from_text

mpmath.mp.dps = 40


def test_poisson_source_by_hand():
    # reference: sympy differentiation done here, term by term
    m = derive("plate-poisson")
    x, y = m.problem.coords
    u = sp.sin(sp.Rational(7, 10) * sp.pi * x + sp.Rational(1, 5)) * sp.cos(sp.Rational(13, 10) * sp.pi * y) \
        + sp.exp(x * y / 2)
    f = -(sp.diff(u, x, 2) + sp.diff(u, y, 2))
    pts = np.random.default_rng(1).uniform(0, 1, (20, 2))
    ours = m.source("u", pts[:, 0], pts[:, 1])
    ref = np.array([float(f.subs({x: a, y: b})) for a, b in pts])
    np.testing.assert_allclose(ours, ref, rtol=1e-13, atol=1e-13)


def _mp(expr, args):
    fn = sp.lambdify(args, expr, modules="mpmath")
    return lambda *v: fn(*v)


def _d(f, point, axis, n=1):
    """n-th partial derivative of f at point along axis, mpmath numerical differentiation."""
    point = [mpmath.mpf(v) for v in point]

    def g(s):
        q = list(point)
        q[axis] = s
        return f(*q)
    return mpmath.diff(g, point[axis], n)


def _independent_residuals(problem, point):
    """Each built-in operator, written again from its documented definition."""
    X = problem.coords
    args = X + ((problem.t,) if problem.t is not None else ())
    q = {k: _mp(v, args) for k, v in problem.fields.items()}
    par = {k: _mp(v, args) for k, v in problem.parameters.items()}
    dim = len(X)
    op = problem.operator
    tax = dim  # index of t in point
    if op in ("poisson", "diffusion"):
        (name, u), = q.items()
        k = par["k"]
        r = 0
        for a in range(dim):
            flux = lambda *p, a=a: k(*p) * _d(u, p, a)
            r -= _d(flux, point, a)
        if problem.t is not None:
            r += par["rho_c"](*point) * _d(u, point, tax)
        return {name: r}
    if op == "advection_diffusion":
        (name, u), = q.items()
        r = 0
        for a, c in zip(range(dim), ("ax", "ay", "az")):
            r += par[c](*point) * _d(u, point, a)
            flux = lambda *p, a=a: par["k"](*p) * _d(u, p, a)
            r -= _d(flux, point, a)
        if problem.t is not None:
            r += _d(u, point, tax)
        return {name: r}
    if op == "burgers":
        (name, u), = q.items()
        r = u(*point) * _d(u, point, 0) - par["nu"](*point) * _d(u, point, 0, 2)
        if problem.t is not None:
            r += _d(u, point, tax)
        return {name: r}
    if op == "navier_stokes":
        u, v, p = q["u"], q["v"], q["p"]
        rho, nu = par["rho"](*point), par["nu"](*point)
        out = {}
        for name, c, a in (("u", u, 0), ("v", v, 1)):
            out[name] = (u(*point) * _d(c, point, 0) + v(*point) * _d(c, point, 1) + _d(p, point, a) / rho
                         - nu * (_d(c, point, 0, 2) + _d(c, point, 1, 2)))
        out["p"] = _d(u, point, 0) + _d(v, point, 1)
        return out
    if op == "custom" and problem.name == "reactor-custom":
        # -d/dx(k(u) du/dx) + r u**3 with k = 1 + 0.2 u**2, r = 0.8 (mmsverify/problem/bundled/reactor-custom.toml)
        u = q["u"]
        flux = lambda s: (1 + mpmath.mpf("0.2") * u(s) ** 2) * _d(u, (s,), 0)
        return {"u": -mpmath.diff(flux, mpmath.mpf(point[0])) + mpmath.mpf("0.8") * u(*point) ** 3}
    pytest.skip(f"no independent implementation for operator {op!r} of {problem.name}")


@pytest.mark.parametrize("name", bundled_problems())
def test_sources_match_high_precision_differences(name):
    # reference: mpmath numerical differentiation (independent of sympy's diff)
    problem = load_problem(name)
    m = derive(problem)
    rng = np.random.default_rng(abs(hash(name)) % 2**32)
    lo = np.array(problem.lower + ((problem.t_range[0],) if problem.transient else ()))
    hi = np.array(problem.upper + ((problem.t_range[1],) if problem.transient else ()))
    for _ in range(3):
        point = lo + (hi - lo) * rng.uniform(0.1, 0.9, lo.size)
        ref = _independent_residuals(problem, [mpmath.mpf(float(v)) for v in point])
        for eq, value in ref.items():
            coords = point[: problem.dim]
            t = point[-1] if problem.transient else None
            ours = float(m.source(eq, *coords, t=t))
            assert ours == pytest.approx(float(value), rel=1e-11, abs=1e-11), (name, eq, point)


def test_neumann_data_is_outward_normal_derivative():
    # reference: sympy differentiation; the outward normal on x_min is -x
    text = '[domain]\nx = [0, 1]\ny = [0, 2]\n[fields]\nu = "x**2*y + 3*y"\n[boundaries]\nx_min = "neumann"'
    m = derive(problem_from_text(text))
    assert float(m.normal_derivative("u", "x_min", 0.5, 2.0)) == pytest.approx(-2.0)   # -(2 x y)
    assert float(m.normal_derivative("u", "y_max", 0.5, 2.0)) == pytest.approx(3.25)   # x**2 + 3
    assert float(m.normal_flux("u", "y_min", 0.5, 2.0)) == pytest.approx(-3.25)        # k = 1


def test_transient_initial_data_and_time_argument():
    m = derive("slab-heat")
    x = np.linspace(0, 1, 5)
    np.testing.assert_allclose(m.initial("T", x), m.exact("T", x, t=0.0))
    with pytest.raises(Exception, match="transient"):
        m.exact("T", x)


def test_evaluator_broadcasts_axis_arrays_and_constants():
    m = derive(problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x + y"'))
    X, Y = np.meshgrid(np.linspace(0, 1, 3), np.linspace(0, 1, 4), indexing="ij", sparse=True)
    assert m.exact("u", X, Y).shape == (3, 4)
    assert m.source("u", X, Y).shape == (3, 4)          # -lap(x + y) = 0, still a full array
    assert np.all(m.source("u", X, Y) == 0)


def test_manufactured_pickles_without_compiled_functions():
    import pickle
    m = derive("plate-poisson")
    m.exact("u", 0.1, 0.2)
    m2 = pickle.loads(pickle.dumps(m))
    assert m2.content_hash == m.content_hash
    assert float(m2.exact("u", 0.1, 0.2)) == float(m.exact("u", 0.1, 0.2))


def test_a_pickled_manufactured_carries_its_derivation():
    # A level worker receives the problem pickled; it should not differentiate the problem again.
    import pickle
    m = derive(problem_from_text('[domain]\nx = [0, 1]\n[fields]\nu = "x**3"'))
    assert m._derivation is None                       # derived on first use
    m2 = pickle.loads(pickle.dumps(m))
    assert m2._derivation is not None
    assert float(m2.source("u", 0.5)) == -3.0           # -u'' = -6x at x = 1/2
