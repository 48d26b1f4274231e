"""Statements and omissions of a solver are either honoured or refused, never ignored."""

import dataclasses
import warnings

import numpy as np
import pytest

from mmsverify import Solution, SolverError, run_study
from mmsverify.cli import main
from solvers_demo.fd import poisson
from solvers_demo.ns.staggered import StaggeredNS
from mmsverify.study.settings import Refinement


def test_a_declared_field_not_returned_fails_the_level_unless_the_solver_says_so():
    def u_only(case):
        sol = StaggeredNS()(case)
        return dataclasses.replace(sol, values={"u": sol.values["u"]})
    result = run_study("cavity-flow", u_only, refinement=Refinement(levels=2))
    assert not any(lv.ok for lv in result.levels)
    assert "field(s) v, p" in result.levels[0].message and "not_computed" in result.levels[0].message
    u_only.not_computed = ("v", "p")
    assert all(lv.ok for lv in run_study("cavity-flow", u_only, refinement=Refinement(levels=2)).levels)


@pytest.mark.parametrize("bad", ["2", True, float("nan"), -1])
def test_a_wrongly_typed_order_statement_is_an_error(bad):
    def solve(case):
        return poisson.solve(case)
    solve.formal_order = bad
    with pytest.raises(SolverError, match="is not an order"):
        run_study("plate-poisson", solve, refinement=Refinement(levels=2))


def _stretched(case):
    """The bundled solver's values on its own nodes, reported without weights and with the finer half only,
    so the points are evenly spaced in one axis and not in the other."""
    sol = poisson.solve(case)
    x, y = np.broadcast_arrays(*sol.points)
    keep = np.concatenate([np.arange(0, x.shape[0], 2), [x.shape[0] - 1]])
    keep = np.unique(np.concatenate([keep[keep < x.shape[0] // 2], np.arange(x.shape[0] // 2, x.shape[0])]))
    return Solution(values={"u": sol.values["u"][keep]}, points=(x[keep], y[keep]))


def test_missing_weights_on_uneven_points_warn():
    with pytest.warns(RuntimeWarning, match="not evenly spaced"):
        run_study("plate-poisson", _stretched, refinement=Refinement(levels=2))
    with warnings.catch_warnings():
        warnings.simplefilter("error")    # even points without weights: no warning
        run_study("plate-poisson", lambda case: dataclasses.replace(poisson.solve(case), weights=None), refinement=Refinement(levels=2))


def test_a_stated_order_that_differs_from_the_file_is_told(capsys):
    def first(case):
        return poisson.solve(case)
    first.formal_order = 1
    result = run_study("plate-poisson", first, refinement=Refinement(levels=3))
    assert any("the solver states order 1" in n and "[order] space = 2" in n for n in result.notes)


def test_a_module_that_fails_to_import_gets_its_own_message_and_exit_2(tmp_path, monkeypatch, capsys):
    (tmp_path / "broken_solver.py").write_text("def solve(case):\n    return 1 +\n")
    (tmp_path / "needy_solver.py").write_text("import not_installed_anywhere\n")
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(tmp_path))
    assert main(["run", "plate-poisson", "broken_solver:solve"]) == 2
    err = capsys.readouterr().err
    assert "syntax error" in err and "broken_solver.py, line 2" in err and "No module named" not in err
    assert main(["run", "plate-poisson", "needy_solver:solve"]) == 2
    assert "imports 'not_installed_anywhere', which is not installed" in capsys.readouterr().err
