"""Verdicts of whole studies: rules per quantity, bounds on the rules, exit codes, re-judging stored files."""

import dataclasses
import json

import pytest

from mmsverify import run_study
from mmsverify.cli import main
from mmsverify.errors import AnalysisError, MMSError, ProblemError
from mmsverify.execute.solvers import resolve_solver
from mmsverify.outputs.studyfile import read_json, write_json
from mmsverify.problem.derive import problem_from_text
from mmsverify.problem.record import PROBLEM_DIR
from mmsverify.study.settings import Judging, Refinement

PLATE = (PROBLEM_DIR / "plate-poisson.toml").read_text()


def superconvergent(case):
    """The 5-point Poisson solver, reporting a deflection whose error falls like h**2.13."""
    sol = resolve_solver("poisson2d")(case)
    exact = case.mms.exact_quantity("deflection")
    return dataclasses.replace(sol, quantities={"deflection": exact + 0.5 * case.grid.h ** 2.13})


def test_superconvergent_functional_fails_two_sided_and_passes_at_least():
    # a functional at 2.12-2.15 in a second-order study must not fail the study under an "at least" rule
    two_sided = run_study("plate-poisson", superconvergent, refinement=Refinement(levels=4))
    v = [v for v in two_sided.verdicts if v.field == "deflection"][0]
    assert v.status == "above" and "superconvergence" in v.reason
    ok = run_study("plate-poisson", superconvergent, refinement=Refinement(levels=4), judging=Judging(rules={"deflection": {"at_least": True}}))
    v = [v for v in ok.verdicts if v.field == "deflection"][0]
    assert v.status == "confirmed" and v.at_least and ok.passed
    # the same rule from the problem file
    text = PLATE.replace("[study]", '[order.by]\ndeflection = {at_least = true}\n\n[study]')
    assert run_study(problem_from_text(text, "sc.toml"), superconvergent, refinement=Refinement(levels=4)).passed


def test_rules_per_field_and_norm_take_the_most_specific_setting():
    r = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=3), judging=Judging(rules={"Linf": {"tolerance": 0.3},
                                                                 "u Linf": {"tolerance": 0.25}}))
    tol = {(v.field, v.norm): v.tolerance for v in r.verdicts}
    assert tol[("u", "Linf")] == 0.25 and tol[("u", "L2")] == 0.1
    with pytest.raises(AnalysisError, match="selector 'w' names no judged"):
        run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2), judging=Judging(rules={"w": {"tolerance": 0.2}}))


@pytest.mark.parametrize("tol", ["2.5", "1e308", "1.0"])
def test_tolerance_of_half_the_order_or_more_is_refused_everywhere(tol, tmp_path, capsys):
    # a tolerance of 2.5 with formal order 2 let a solver that does not converge pass
    with pytest.raises(ProblemError, match="below half the formal order"):
        problem_from_text(PLATE.replace("tolerance = 0.1", f"tolerance = {tol}"), "wide.toml")
    with pytest.raises(ProblemError, match="below half the formal order"):
        problem_from_text(PLATE.replace("[study]", f'[order.by]\n"u Linf" = {{tolerance = {tol}}}\n\n[study]'),
                          "wide.toml")
    with pytest.raises(AnalysisError, match="below half the formal order"):
        run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2), judging=Judging(tolerance=float(tol)))
    assert main(["run", "plate-poisson", "poisson2d", "--levels", "2", "--tolerance", tol, "--quiet"]) == 2
    assert "below half the formal order" in capsys.readouterr().err


def test_first_order_mistake_with_four_levels_fails_with_exit_1(capsys):
    assert main(["run", "plate-poisson", "poisson2d-neumann1", "--levels", "4", "--quiet"]) == 1
    assert "still moving" not in capsys.readouterr().out


def test_temporal_study_on_a_spatial_floor_is_inconclusive_and_speaks_of_dt(capsys):
    # the fixed 32-cell grid leaves a spatial error that the time steps cannot remove
    rc = main(["run", "slab-heat", "fd-heat-euler", "--mode", "time", "--base-cells", "32", "--levels", "5"])
    out = capsys.readouterr().out
    assert rc == 3
    assert "spatial error of the fixed grid" in out and "dt = " in out
    assert "h = " not in out and "tighten the solver tolerance" not in out


def test_report_from_judges_the_stored_errors_again(tmp_path):
    bad = run_study("plate-poisson", "poisson2d-neumann1", refinement=Refinement(levels=4))
    path = write_json(bad, tmp_path / "s.json")
    data = json.loads(path.read_text())
    for v in data["verdicts"]:
        v["status"], v["reason"] = "confirmed", "edited"
    data["passed"], data["outcome"] = True, "pass"
    path.write_text(json.dumps(data))
    again = read_json(path)
    assert not again.passed and all(v.status == "below" for v in again.verdicts)
    assert all(v.reason != "edited" for v in again.verdicts)
    for v in data["verdicts"]:
        v["tolerance"] = 2.5
    path.write_text(json.dumps(data))
    with pytest.raises(MMSError, match="below half the formal order"):
        read_json(path)


def test_linf_on_a_mesh_the_solver_reports_irregular_is_never_failed():
    # finite volumes on random quadrilaterals (table 11): Linf orders 1.86, 1.89, 1.86 over four levels, the
    # worst cell's doing (two more levels reach 1.97, 1.95); the solver says its mesh is irregular
    from solvers_demo.fv.diffusion import FVDiffusion
    from solvers_demo.studies import problem_for
    from mmsverify.cli._run import exit_code

    solver = FVDiffusion(grid="perturbed", seed=11)
    result = run_study(problem_for("plate-poisson", solver), solver)
    by_norm = {v.norm: v for v in result.verdicts}
    assert by_norm["Linf"].status == "inconclusive" and by_norm["Linf"].kind == "irregular grid"
    assert by_norm["L2"].ok and exit_code(result) == 3
