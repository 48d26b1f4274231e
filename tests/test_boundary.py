"""Boundary data beyond the box: normals at any points, Robin, periodic, a curved domain."""

import numpy as np
import pytest

from mmsverify import ProblemError, run_study
from mmsverify.problem.derive import derive
from mmsverify.problem.derive import problem_from_text

BASE = ('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(1.3*x + 0.4) * cos(0.8*y) + 0.5*x*y"\n'
        '[operator]\nkind = "diffusion"\nk = 1.5\n')
ROBIN = BASE + '[boundaries]\nx_max = "robin"\nrobin = 2.5\n'


def test_normal_flux_and_robin_data_at_points_on_a_circle():
    # u = x**2 + y**2 with k = 1.5: k du/dr = 3 r; on the unit circle 3, Robin data 3 + alpha (common practice)
    m = derive(problem_from_text('[domain]\nx = [-1, 1]\ny = [-1, 1]\n[fields]\nu = "x**2 + y**2"\n'
                                 '[operator]\nkind = "diffusion"\nk = 1.5\n'))
    a = np.linspace(0, 2 * np.pi, 9)
    pts, nrm = (np.cos(a), np.sin(a)), (np.cos(a), np.sin(a))
    np.testing.assert_allclose(m.normal_flux_at("u", pts, nrm), 3.0)
    np.testing.assert_allclose(m.robin_data("u", pts, nrm, 2.0), 5.0)
    with pytest.raises(ProblemError, match="unit vectors"):
        m.normal_flux_at("u", pts, (2 * np.cos(a), 2 * np.sin(a)))


def test_robin_needs_a_positive_coefficient():
    p = problem_from_text(ROBIN)
    assert p.boundaries[("u", "x_max")] == "robin" and p.robin == {"x_max": 2.5}
    with pytest.raises(ProblemError, match="needs its coefficient"):
        problem_from_text(BASE + '[boundaries]\nx_max = "robin"\n')
    with pytest.raises(ProblemError, match="positive number"):
        problem_from_text(BASE + '[boundaries]\nx_max = "robin"\nrobin = -1\n')
    with pytest.raises(ProblemError, match="has no Robin kind"):
        problem_from_text(BASE + '[boundaries]\nx_max = "robin"\nrobin = {y_max = 1.0}\n')
    assert problem_from_text(ROBIN).content_hash() != problem_from_text(ROBIN.replace("2.5", "3.5")).content_hash()


def test_periodic_sides_pair_and_need_a_periodic_field():
    text = '[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(2*pi*x) * exp(y)"\n[boundaries]\n'
    derive(problem_from_text(text + 'x_min = "periodic"\nx_max = "periodic"\n'))
    with pytest.raises(ProblemError, match="periodic sides come in pairs"):
        problem_from_text(text + 'x_min = "periodic"\n')
    with pytest.raises(ProblemError, match="values on y_min and y_max differ"):
        derive(problem_from_text(text + 'y_min = "periodic"\ny_max = "periodic"\n'))


def test_a_solver_without_robin_refuses_it():
    r = run_study(problem_from_text(ROBIN), "fd-diffusion", refinement=Refinement(levels=2))
    assert not r.passed and "implements dirichlet, neumann boundaries" in r.levels[0].message


skfem = pytest.importorskip("skfem")
from solvers_demo.fem.poisson import FEMPoisson  # noqa: E402
from mmsverify.study.settings import Refinement


@pytest.mark.parametrize("degree", [1, 2], ids=["P1", "P2"])
def test_robin_case_passes_and_a_wrong_sign_is_caught(degree):
    # Brenner & Scott, Theorem 4.4.20 with a Robin term (a coercive form for alpha > 0): L2 at p+1, H1 at p
    good = run_study(problem_from_text(ROBIN), FEMPoisson(degree=degree), refinement=Refinement(cells=[4, 8, 16]))
    assert good.passed, str(good)
    bad = run_study(problem_from_text(ROBIN), FEMPoisson(degree=degree, mistake="robin-sign"), refinement=Refinement(cells=[4, 8, 16]))
    assert not bad.passed


def test_curved_neumann_boundary_passes_and_a_box_normal_is_caught():
    # the disc inscribed in plate-poisson's box: its right arc takes x_max's Neumann kind
    good = run_study("plate-poisson", FEMPoisson(domain="disc"), refinement=Refinement(cells=[4, 8, 16, 32]))
    assert good.passed, str(good)
    assert "disc, " in str(good) and "4x4 cells" not in str(good)
    bad = run_study("plate-poisson", FEMPoisson(domain="disc", mistake="box-normal"), refinement=Refinement(cells=[4, 8, 16, 32]))
    assert not bad.passed
