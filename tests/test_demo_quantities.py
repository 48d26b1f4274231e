"""The node-centred FD demo solvers report the declared quantities at second order."""

import numpy as np
import pytest

from mmsverify import Case, derive, problem_from_text, run_study
from mmsverify.execute.grids import Grid
from solvers_demo.fd._quantities import _ONE_SIDED, _interpolate, node_quantities
from solvers_demo.fd.burgers import FDBurgers
from solvers_demo.fd.diffusion import FDDiffusion
from solvers_demo.fd.heat import FDHeat


def _verdicts(result):
    return {v.field: v for v in result.verdicts if v.norm == "value"}


def test_poisson2d_reports_both_plate_quantities_at_order_two():
    # Atkinson 1989, An Introduction to Numerical Analysis, section 5.1: trapezoid rule error O(h**2)
    # (from memory); the flux's one-sided difference is of fifth order, so its error is the
    # solution's O(h**2) (Fornberg 1988, Math. Comp. 51:699, Table 3; from memory)
    r = run_study("plate-poisson", "poisson2d", levels=5)
    assert r.quantities == ("deflection", "edge_slope") and r.missing_quantities == {}
    verdict = _verdicts(r)
    assert verdict["deflection"].ok and verdict["edge_slope"].ok
    for name in r.quantities:
        p = r.quantity_orders(name)
        assert abs(p[-1] - 2) < 0.03, (name, p)
    assert r.passed and r.notes == ()


def test_demo_prints_no_missing_quantity_note(capsys):
    from mmsverify.cli import main
    assert main(["demo"]) == 0
    out = capsys.readouterr().out
    assert "not reported by the solver" not in out
    assert "ok edge_slope value confirmed" in out and "ok deflection value confirmed" in out
    # the seeded first-order Neumann mistake lowers the quantities' order too
    # (common practice: a first-order boundary closure makes the whole solution first order)
    assert "!! edge_slope value below" in out and "!! deflection value below" in out


_MEMBRANE = """
[domain]
x = [0, 1]
y = [0, 2]
[fields]
u = "exp(x)*sin(y) + x*y"
[operator]
kind = "diffusion"
k = "1 + 0.5*x + 0.25*y"
[boundaries]
default = "dirichlet"
x_max = "neumann"
[quantities]
centre = {point = "u", at = [0.375, 0.75]}
left = {flux = "u", side = "x_min"}
right = {flux = "u", side = "x_max"}
total = {integral = "u"}
square = {integral = "u**2"}
"""


def test_point_flux_and_integral_of_a_variable_coefficient_problem_are_confirmed():
    # the point is a node of every level, so its error is the solution's pointwise O(h**2)
    # (LeVeque 2007, Finite Difference Methods for ODEs and PDEs, section 2.15: the
    # conservative stencil is second order for smooth variable k; from memory)
    p = problem_from_text(_MEMBRANE, "membrane.toml")
    r = run_study(p, FDDiffusion(), levels=4)
    verdict = _verdicts(r)
    assert set(verdict) == {"centre", "left", "right", "total"}
    assert all(v.ok for v in verdict.values()), [str(v) for v in verdict.values()]
    # an expression that is not a computed field is left out and named in a note
    assert r.missing_quantities == {"square": (0, 1, 2, 3)}
    assert any("square" in n for n in r.notes)


def test_flux_uses_the_variable_coefficient():
    # with the exact field on the nodes only the difference and quadrature errors are left;
    # dropping k (coefficient=None) would leave an O(1) error on this side where k is 1.5 to 2
    p = problem_from_text(_MEMBRANE, "membrane.toml")
    m = derive(p)
    exact = m.exact_quantity("right")
    errors, without_k = [], []
    for n in (8, 16, 32):
        grid = Grid(0, (0.0, 0.0), (1.0, 2.0), (n, 2 * n))
        x, y = np.meshgrid(grid.nodes(0), grid.nodes(1), indexing="ij")
        values = {"u": m.exact("u", x, y)}
        errors.append(abs(node_quantities(Case(grid, m), values)["right"] - exact))
        without_k.append(abs(node_quantities(Case(grid, m), values, coefficient=None)["right"] - exact))
    assert errors[-1] < 1e-3 * abs(exact) and np.log2(errors[-2] / errors[-1]) > 1.9   # trapezoid: O(h**2)
    assert min(without_k) > 0.2 * abs(exact)


def test_heat_solver_reports_quantities_at_the_end_time():
    # Crank-Nicolson with the space scheme: second order in h and dt together
    # (LeVeque 2007, sections 9.1-9.3; from memory)
    text = """
[domain]
x = [0, 1]
t = [0, 0.5]
[fields]
T = "1 + exp(-0.8*t)*sin(1.3*pi*x + 0.4) + 0.2*x*cos(2*t)"
[operator]
kind = "diffusion"
k = "0.5 + 0.2*x"
rho_c = 1.2
[order]
space = 2
time = 2
[quantities]
probe = {point = "T", at = [0.25]}
wall = {flux = "T", side = "x_min"}
heat = {integral = "T"}
"""
    r = run_study(problem_from_text(text, "rod.toml"), FDHeat(), levels=4, base_cells=8, base_steps=8)
    verdict = _verdicts(r)
    assert set(verdict) == {"probe", "wall", "heat"}
    assert all(v.ok for v in verdict.values()), [str(v) for v in verdict.values()]


def test_burgers_flux_uses_nu():
    text = """
[domain]
x = [-1, 1]
[fields]
u = "0.5 - 0.4*tanh(x/0.4) + 0.05*sin(pi*x)"
[operator]
kind = "burgers"
nu = 0.1
[quantities]
outflow = {flux = "u", side = "x_max"}
"""
    r = run_study(problem_from_text(text, "front.toml"), FDBurgers(), levels=4, base_cells=16)
    assert _verdicts(r)["outflow"].ok, str(r)


@pytest.mark.parametrize("points", sorted(_ONE_SIDED))
def test_one_sided_differences_are_exact_for_polynomials_of_their_degree(points):
    # Fornberg 1988, Math. Comp. 51:699, Table 3 (from memory): the one-sided first-derivative
    # weights on `points` nodes differentiate polynomials up to degree points - 1 exactly
    c = np.array(_ONE_SIDED[points])
    i = np.arange(points)
    for degree in range(points):
        # outward derivative at the boundary node 0, the inward direction being +i
        assert np.dot(c, i ** degree) == pytest.approx(-1.0 if degree == 1 else 0.0, abs=1e-12)
    assert abs(np.dot(c, i ** points)) > 1    # and no higher: the order is points - 1
    if points == 3:
        # LeVeque 2007, Finite Difference Methods for ODEs and PDEs, section 1.1: (3u0 - 4u1 + u2)/(2h)
        assert np.allclose(c, [1.5, -2.0, 0.5])


def test_bilinear_interpolation_is_second_order():
    # common practice: linear interpolation error h**2 s(1-s) u''/2 at the fraction s of its cell;
    # with 3, 9, 27, 81 cells the point (1/2, 1/2) stays at s = 1/2, so the ratio is exactly 9
    f = lambda x, y: np.sin(2 * x) * np.exp(y)    # noqa: E731
    errors = []
    for n in (3, 9, 27, 81):
        grid = Grid(0, (0.0, 0.0), (1.0, 1.0), (n, n))
        x, y = np.meshgrid(grid.nodes(0), grid.nodes(1), indexing="ij")
        errors.append(abs(_interpolate(grid, f(x, y), (0.5, 0.5)) - f(0.5, 0.5)))
    orders = np.log(np.array(errors[:-1]) / np.array(errors[1:])) / np.log(3)
    assert np.all(np.abs(orders - 2) < 0.02), orders
    grid = Grid(0, (0.0, 0.0), (1.0, 1.0), (4, 4))
    x, y = np.meshgrid(grid.nodes(0), grid.nodes(1), indexing="ij")
    assert _interpolate(grid, f(x, y), (1.0, 0.25)) == pytest.approx(f(1.0, 0.25), rel=1e-14)  # a node, an edge
