"""Functionals (integrals, boundary fluxes, point values) with their own orders."""

import math

import numpy as np
import pytest

from mmsverify import ProblemError, Solution, derive, problem_from_text, run_study
from solvers_demo.fd.poisson import solve


def with_quantities(case):
    """The 5-point solver, plus the two functionals plate-poisson declares."""
    sol = solve(case)
    u = sol.values["u"]
    hx, hy = case.grid.spacing
    w = np.full(u.shape[0], hx)
    w[[0, -1]] /= 2                                           # trapezoid rule, second order
    # outward derivative on y_min is -du/dy; one-sided third-order difference, so the
    # flux error is that of the O(h**2) solution (Fornberg 1988, Math. Comp. 51:699, Table 3)
    dudn = -(-11 * u[:, 0] + 18 * u[:, 1] - 9 * u[:, 2] + 2 * u[:, 3]) / (6 * hy)
    q = {"deflection": float(np.sum(sol.weights * u)), "edge_slope": float(np.sum(w * dudn))}
    return Solution(sol.values, sol.points, sol.weights, quantities=q)


def test_quantities_get_their_own_order_and_verdict():
    # common practice: trapezoid integration is second order; so is a flux from an O(h**2) solution
    r = run_study("plate-poisson", with_quantities, levels=6)
    assert r.quantities == ("deflection", "edge_slope")
    p = r.quantity_orders("deflection")
    assert np.all(np.abs(p[1:] - 2) < 0.05), p
    # the edge flux approaches 2 from above (a faster-decaying term fades with h)
    p = r.quantity_orders("edge_slope")
    assert np.all(np.diff(p[1:]) < 0) and abs(p[-1] - 2) < 0.15, p
    verdict = {v.field: v for v in r.verdicts if v.norm == "value"}
    assert verdict["deflection"].ok
    # Roy 2005, J. Comput. Phys. 205:131-156: the levels approach the formal order from outside the asymptotic
    # range (orders 2.5 down to 2.13), following its series C h^2 + D h^(2+q)
    assert verdict["edge_slope"].status == "confirmed"
    assert "converging to the formal order" in verdict["edge_slope"].reason
    assert "quantity edge_slope" in str(r)
    assert r.to_dict()["levels"][0]["quantities"]["deflection"]["exact"] == pytest.approx(
        derive("plate-poisson").exact_quantity("deflection"))


def test_exact_quantities_against_closed_forms():
    # closed forms by hand: int_0^1 int_0^2 sin(x) e^y = (1 - cos 1)(e^2 - 1), etc.
    p = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 2]\n[fields]\nu = "sin(x)*exp(y)"\n[quantities]\n'
                          'tot = {integral = "u"}\nwf = {flux = "u", side = "x_max"}\n'
                          'lf = {flux = "u", side = "y_min"}\nc = {point = "u", at = [0.5, 1.0]}\n')
    m = derive(p)
    assert m.exact_quantity("tot") == pytest.approx((1 - math.cos(1)) * (math.e ** 2 - 1), rel=1e-14)
    assert m.exact_quantity("wf") == pytest.approx(math.cos(1) * (math.e ** 2 - 1), rel=1e-14)
    assert m.exact_quantity("lf") == pytest.approx(-(1 - math.cos(1)), rel=1e-14)   # outward normal is -y
    assert m.exact_quantity("c") == pytest.approx(math.sin(0.5) * math.e, rel=1e-14)


def test_transient_quantity_defaults_to_end_time():
    p = problem_from_text('[domain]\nx = [0, 1]\nt = [0, 2]\n[fields]\nu = "x*t"\n[quantities]\n'
                          'c = {point = "u", at = [0.5]}\n')
    assert derive(p).exact_quantity("c") == pytest.approx(1.0)


@pytest.mark.parametrize("spec,words", [
    ('q = {flux = "w", side = "x_max"}', "flux needs a field name"),
    ('q = {flux = "u", side = "z_max"}', "flux needs side"),
    ('q = {point = "u", at = [2.0, 0.5]}', "outside the domain"),
    ('q = {point = "u"}', r"point needs at = \[x, y\]"),
    ('q = "u"', "give one of"),
])
def test_bad_quantity_declarations(spec, words):
    text = '[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x*y"\n[quantities]\n' + spec + "\n"
    with pytest.raises(ProblemError, match=words):
        problem_from_text(text, "q.toml")


def test_undeclared_quantity_fails_the_level_with_a_reason():
    def solver(case):
        sol = solve(case)
        return Solution(sol.values, sol.points, sol.weights, quantities={"drag": 1.0})
    r = run_study("plate-poisson", solver, levels=2)
    assert all("declare them under [quantities]" in lv.message for lv in r.levels)


_NOT_REPORTED = ("declared in the problem file but not reported by the solver: deflection, edge_slope "
                 "(a solver reports them in Solution.quantities)")


def test_declared_quantities_the_solver_never_reports_are_one_note_not_a_failure(tmp_path):
    # common practice: a functional left out is a gap in the evidence, not a wrong order
    from mmsverify.outputs.studyfile import read_json, study_to_data, write_json
    r = run_study("plate-poisson", _fields_only, levels=3)
    assert r.passed and r.quantities == ()
    assert r.missing_quantities == {"deflection": (0, 1, 2), "edge_slope": (0, 1, 2)}
    lines = str(r).splitlines()
    assert [ln for ln in lines if "quantit" in ln] == ["  note: " + _NOT_REPORTED]
    assert study_to_data(r)["notes"] == [_NOT_REPORTED]
    assert study_to_data(r)["missing_quantities"] == {"deflection": [0, 1, 2], "edge_slope": [0, 1, 2]}
    back = read_json(write_json(r, tmp_path / "s.json"))
    assert back.missing_quantities == r.missing_quantities and back.notes == r.notes


def test_quantities_reported_everywhere_give_no_note():
    r = run_study("plate-poisson", with_quantities, levels=3)
    assert r.missing_quantities == {} and r.notes == ()
    assert "note:" not in str(r) and r.to_dict()["notes"] == []


def test_a_quantity_missing_on_some_levels_names_them():
    def patchy(case):
        sol = with_quantities(case)
        q = dict(sol.quantities)
        if case.grid.level in (1, 3):
            del q["edge_slope"]
        return Solution(sol.values, sol.points, sol.weights, quantities=q)
    r = run_study("plate-poisson", patchy, levels=4)
    assert r.missing_quantities == {"edge_slope": (1, 3)}
    note = ("the solver reported quantity edge_slope on levels 0, 2 but not on levels 1, 3; its order uses only "
            "the levels that reported it")
    assert r.notes == (note,)
    assert "  note: " + note in str(r).splitlines()
    assert r.to_dict()["notes"] == [note] and r.to_dict()["missing_quantities"] == {"edge_slope": [1, 3]}
    verdict = {v.field: v for v in r.verdicts if v.norm == "value"}
    assert "(levels 0-2;" in verdict["edge_slope"].reason     # judged on 0 and 2, which the note explains


def test_a_failed_level_is_not_a_missing_quantity():
    def fails_fine(case):
        if case.grid.level == 2:
            raise RuntimeError("out of memory")
        return with_quantities(case)
    r = run_study("plate-poisson", fails_fine, levels=3)
    assert r.missing_quantities == {} and r.notes == ()


def _fields_only(case):
    """The 5-point solver with its reported functionals dropped (the bundled one reports them)."""
    sol = solve(case)
    return Solution(sol.values, sol.points, sol.weights, info=sol.info)


_fields_only.name = "poisson2d-fields-only"    # what the study prints as the solver's name
