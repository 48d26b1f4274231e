"""The demo solvers reach their textbook formal orders on four or more levels.

Formal orders: node-centred finite differences for -div(k grad u) are second
order with a conservative stencil, first order with a one-sided two-point
Neumann row and second order with the three-point one (LeVeque 2007, Finite
Difference Methods for ODEs and PDEs, sections 2.12-2.15 and 3.2).
"""

import numpy as np
import pytest

from mmsverify import Case, Grid, SolverError, derive, run_study
from solvers_demo.fd.diffusion import FDDiffusion
from solvers_demo.fd.poisson import solve, solve_first_order_neumann


def _study(problem, solver, levels=4, **kw):
    return run_study(problem, solver, levels=levels, formal_order=solver.formal_order, **kw)


def _assert_confirmed(result):
    assert len([lv for lv in result.levels if lv.ok]) >= 4
    assert result.passed, str(result)


@pytest.mark.parametrize("problem", ["plate-poisson", "fin-diffusion", "block-poisson3d"])
def test_fd_diffusion_second_order(problem):
    # LeVeque 2007, section 2.15: conservative variable-coefficient stencil, second order
    _assert_confirmed(_study(problem, FDDiffusion()))


def test_fd_poisson_1d_second_order():
    from mmsverify import problem_from_text
    p = problem_from_text('[domain]\nx = [0, 2]\n[fields]\nu = "sin(2*x) + x**3/4"\n'
                          '[boundaries]\ndefault = "dirichlet"\nx_min = "neumann"\n')
    # LeVeque 2007, section 2.12: ghost-node (half-cell) Neumann keeps second order
    _assert_confirmed(_study(p, FDDiffusion()))


@pytest.mark.parametrize("problem,base", [("plate-poisson", 16), ("fin-diffusion", 16)])
def test_fd_neumann_treatments(problem, base):
    # LeVeque 2007, section 2.12: one-sided two-point Neumann is first order, three-point second
    _assert_confirmed(_study(problem, FDDiffusion(neumann="one-sided"), base_cells=base))
    _assert_confirmed(_study(problem, FDDiffusion(neumann="one-sided-3pt"), base_cells=base))


def test_readme_demo_pair_keeps_its_behaviour():
    good = run_study("plate-poisson", solve, levels=4)
    bad = run_study("plate-poisson", solve_first_order_neumann, levels=4)
    assert good.passed and not bad.passed
    assert solve.formal_order == 2 and solve_first_order_neumann.formal_order == 2
    # the one-sided Neumann row lowers every norm to first order (LeVeque 2007, section 2.12)
    assert all(abs(v.observed - 1.0) < 0.15 for v in bad.verdicts)


@pytest.mark.parametrize("linear", ["direct", "amg", "dst"])
def test_linear_solvers_agree(linear):
    from mmsverify import problem_from_text
    p = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(3*x)*exp(y)"')
    case = Case(Grid(0, (0.0, 0.0), (1.0, 1.0), (40, 30)), derive(p))
    ref = FDDiffusion(linear="direct")(case).values["u"]
    got = FDDiffusion(linear=linear)(case).values["u"]
    assert np.max(np.abs(got - ref)) < 1e-9 * np.max(np.abs(ref))  # common practice: solver tolerance


def test_dst_refuses_neumann_sides():
    case = Case(Grid(0, (0.0, 0.0), (1.0, 1.0), (8, 8)), derive("plate-poisson"))
    with pytest.raises(SolverError, match="sine transform"):
        FDDiffusion(linear="dst")(case)


def test_bad_options_and_problems_are_refused():
    with pytest.raises(SolverError, match="neumann='ghost'"):
        FDDiffusion(neumann="ghost")
    with pytest.raises(SolverError, match="no seeded mistake"):
        FDDiffusion(mistake="typo")
    case = Case(Grid(0, (0.0, 0.0), (1.0, 1.0), (8, 8)), derive("river-advection"))
    with pytest.raises(SolverError, match="advection_diffusion"):
        FDDiffusion()(case)


def test_case_options_configure_the_solver():
    case = Case(Grid(0, (0.0, 0.0), (1.0, 1.0), (8, 8)), derive("plate-poisson"), {"neumann": "one-sided"})
    sol = FDDiffusion()(case)
    assert sol.info["solver"] == "FDDiffusion(neumann='one-sided')" and sol.info["formal_order"] == 1
