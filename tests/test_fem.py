"""Lagrange finite elements (scikit-fem) against the textbook orders, errors at quadrature points."""

import pytest

pytest.importorskip("skfem")

from mmsverify import run_study  # noqa: E402
from mmsverify.cli import main  # noqa: E402
from solvers_demo.fem.poisson import FEMPoisson  # noqa: E402
from mmsverify.study.settings import Refinement


def _orders(result, norm):
    return result.orders("u", norm)[-1]


@pytest.mark.parametrize("degree", [1, 2], ids=["P1", "P2"])
def test_lagrange_elements_reach_the_textbook_orders(degree):
    # Ciarlet 1978, The Finite Element Method for Elliptic Problems, Theorem 3.2.2; Brenner & Scott,
    # The Mathematical Theory of Finite Element Methods, Theorem 4.4.20 (H1) and Section 5.4 (L2 by
    # duality): for Pp Lagrange elements on quasi-uniform meshes the L2 error falls at p+1, the H1 at p
    r = run_study("plate-poisson", FEMPoisson(degree=degree), refinement=Refinement(cells=[6, 12, 24]))
    assert abs(_orders(r, "L2") - (degree + 1)) <= 0.1, str(r)
    assert abs(_orders(r, "H1semi") - degree) <= 0.1, str(r)
    assert abs(_orders(r, "H1") - degree) <= 0.1, str(r)
    assert {(v.norm, v.formal) for v in r.verdicts} == {("L2", degree + 1), ("H1semi", degree), ("H1", degree),
                                                         ("energy", degree)}
    assert r.passed, str(r)


@pytest.mark.parametrize("degree", [1, 2], ids=["P1", "P2"])
def test_randomly_perturbed_meshes_keep_the_orders(degree):
    # Brenner & Scott, Theorem 4.4.20: the estimates need shape regularity, not structure
    r = run_study("plate-poisson", FEMPoisson(degree=degree, perturb=0.2), refinement=Refinement(cells=[8, 16, 32]))
    assert r.passed, str(r)
    # the reported h is sqrt(2 * area / triangles): the boundary nodes stay, so it is 1/n (common practice)
    assert [lv.h for lv in r.levels] == pytest.approx([1 / 8, 1 / 16, 1 / 32])


def test_a_wrong_neumann_sign_is_caught():
    r = run_study("plate-poisson", FEMPoisson(degree=1, mistake="neumann-sign"), refinement=Refinement(cells=[6, 12, 24]))
    assert not r.passed


def test_the_command_line_confirms_both_elements_with_the_sizes_run(capsys):
    for name, unknowns in (("solvers_demo.fem.poisson:p1", "49 unknowns"),
                           ("solvers_demo.fem.poisson:p2", "169 unknowns")):
        assert main(["run", "plate-poisson", name, "--cells", "6,10,17,29"]) == 0
        out = capsys.readouterr().out
        assert "u L2" in out and "u H1semi" in out and f"6x6 cells, {unknowns}" in out
