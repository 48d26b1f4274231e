"""End-to-end studies: the 5-point Poisson demo and the faults a study must survive."""

import numpy as np
import pytest

from mmsverify import Grid, GridError, Solution, SolverError, refinement, run_study
from mmsverify.execute.grids import check_refinement
from mmsverify.study.settings import Judging, Refinement


@pytest.fixture(scope="module")
def good():
    return run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=5))


def test_five_point_poisson_is_second_order(good):
    # LeVeque 2007, Finite Difference Methods for ODEs and PDEs, sec. 3.2: the 5-point
    # Laplacian has local truncation error (h**2/12)(u_xxxx + u_yyyy), so order 2.
    assert good.passed
    for norm in ("L2", "Linf"):
        p = good.orders("u", norm)
        assert len(p) == 4
        assert np.all(np.abs(p[1:] - 2.0) < 0.1), p
    assert all(v.status == "confirmed" for v in good.verdicts)


def test_error_constant_matches_truncation_error_scaling(good):
    # LeVeque 2007, sec. 2.x/3.x: global error ~ C h**2, so e(h)/h**2 tends to a constant
    lv = [lv for lv in good.levels if lv.ok]
    c = [r.errors["u"]["L2"] / r.h ** 2 for r in lv]
    assert abs(c[-1] / c[-2] - 1) < 0.01


def test_first_order_neumann_variant_is_flagged():
    # common practice: a first-order one-sided Neumann boundary lowers the global order to 1
    bad = run_study("plate-poisson", "poisson2d-neumann1", refinement=Refinement(levels=4))
    assert not bad.passed
    for v in bad.verdicts:
        assert v.status == "below"
        if v.norm == "value":           # the reported quantities fall to first order with the field
            continue
        assert "formal 2" in v.reason and "converging to another order" in v.reason
        assert v.interval[1] < 1.9 and abs(v.observed - 1.0) < 0.2


def test_verdict_reason_states_levels_order_and_tolerance(good):
    v = good.verdicts[1]
    assert v.reason.startswith("observed 2.00 [") and "levels 0-4" in v.reason
    assert "formal 2 +- 0.1; within the tolerance" in v.reason


def _one_level_fault(fault):
    def solver(case):
        if case.grid.level == 1:
            if fault == "raise":
                raise RuntimeError("matrix is singular")
            x = case.grid.nodes(0)
            if fault == "nan":
                return Solution(values={"u": np.full((x.size, x.size), np.nan)}, points=(x[:, None], x[None, :]))
            if fault == "shape":
                return Solution(values={"u": np.zeros(3)}, points=(x[:, None], x[None, :]))
            if fault == "type":
                return {"u": x}
        from solvers_demo.fd.poisson import solve
        return solve(case)
    return solver


@pytest.mark.parametrize("fault,words", [
    ("raise", "raised RuntimeError: matrix is singular"),
    ("nan", "NaN/Inf"),
    ("shape", "shape"),
    ("type", "returned dict"),
])
def test_a_failing_level_is_recorded_and_the_study_goes_on(fault, words):
    r = run_study("plate-poisson", _one_level_fault(fault), refinement=Refinement(levels=4))
    failed = r.failed_levels
    assert [lv.level for lv in failed] == [1]
    assert words in failed[0].message
    assert "level 1" in failed[0].message
    assert all(lv.ok for lv in r.levels if lv.level != 1)
    # levels 0, 2, 3 support the order of u; a failed level is a defect. (edge_slope, still bending at
    # orders 1.78 and 1.99, gets a 95 % interval from one degree of freedom that cannot decide)
    assert all(v.ok for v in r.verdicts if v.field == "u") and not r.passed
    assert str(r).splitlines()[0].endswith("(level 1 failed; the orders are judged on the others)")


def test_grid_sequence_that_is_not_a_refinement_is_refused():
    g = [Grid(0, (0.0,), (1.0,), (16,)), Grid(1, (0.0,), (1.0,), (8,))]
    with pytest.raises(GridError, match="does not refine level 0"):
        check_refinement(g)
    with pytest.raises(GridError, match="ratio must exceed 1"):
        refinement((0,), (1,), 8, 3, ratio=1.0)
    with pytest.raises(GridError, match="different domains"):
        check_refinement([Grid(0, (0.0,), (1.0,), (8,)), Grid(1, (0.0,), (2.0,), (16,))])


def test_grid_dimension_must_match_problem():
    grids = refinement((0, 0, 0), (1, 1, 1), 2, 2)
    with pytest.raises(GridError, match="3-D but problem plate-poisson is 2-D"):
        run_study("plate-poisson", "poisson2d", refinement=Refinement(grids=grids))


def test_solver_for_another_operator_is_recorded_not_crashing():
    r = run_study("cavity-flow", "poisson2d", refinement=Refinement(levels=2))
    assert all("pick a solver for that operator" in lv.message and f"level {lv.level}" in lv.message for lv in r.levels)
    assert not r.passed and r.verdicts == ()


def test_exact_solution_gives_inconclusive_not_a_pass():
    # LeVeque 2007: the 5-point stencil is exact for polynomials of degree <= 3,
    # so a quadratic manufactured solution shows no order at all.
    from mmsverify import problem_from_text
    p = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "1 + x**2 + x*y"')
    r = run_study(p, "poisson2d", refinement=Refinement(levels=3))
    assert {v.status for v in r.verdicts} == {"inconclusive"}
    assert "round-off" in r.verdicts[0].reason


def test_json_ready_dict_has_every_number(good):
    import json
    d = json.loads(json.dumps(good.to_dict()))
    assert d["passed"] is True and len(d["levels"]) == 5
    assert d["levels"][0]["errors"]["u"]["L2"] == good.levels[0].errors["u"]["L2"]
    assert len(d["orders"]["u"]["Linf"]) == 4


def test_a_solver_is_judged_against_the_order_it_states():
    # common practice: a scheme is verified against its own design order
    from solvers_demo.fd.poisson import solve

    def first_order_claim(case):
        return solve(case)
    first_order_claim.formal_order = 1
    r = run_study("plate-poisson", first_order_claim, refinement=Refinement(levels=3))
    assert r.formal_order == 1 and r.order_source == "solver"
    assert {v.status for v in r.verdicts if v.field == "u"} == {"above"}
    assert {v.status for v in r.verdicts} <= {"above", "inconclusive"}
    assert "stated by the solver" in str(r)
    r = run_study("plate-poisson", first_order_claim, refinement=Refinement(levels=4), judging=Judging(formal_order=2))
    assert r.passed and r.order_source == "caller"


def test_solver_options_and_info_reach_the_level_results():
    from solvers_demo.fd.poisson import solve

    def solver(case):
        sol = solve(case)
        return Solution(sol.values, sol.points, sol.weights, info={"grid": case.options.get("grid"), "sweeps": 3})
    r = run_study("plate-poisson", solver, options={"grid": "stretched"}, refinement=Refinement(levels=2))
    assert r.levels[0].info == {"grid": "stretched", "sweeps": 3}


def test_only_the_chosen_norms_are_judged():
    from mmsverify import AnalysisError
    r = run_study("plate-poisson", "poisson2d-neumann1", refinement=Refinement(levels=3), judging=Judging(norms=("L2",)))
    assert [v.norm for v in r.verdicts if v.field == "u"] == ["L2"] and "Linf" in r.levels[0].errors["u"]
    assert {v.norm for v in r.verdicts if v.field != "u"} == {"value"}    # quantities: one verdict each
    with pytest.raises(AnalysisError, match="among L1, L2, Linf"):
        run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2), judging=Judging(norms=("H1",)))


def _stating(space=None, time=None):
    """The 5-point solver (or the heat solver) with stated orders attached as plain attributes."""
    from solvers_demo.fd.poisson import solve

    def solver(case):
        return solve(case)
    if space is not None:
        solver.formal_order = space
    if time is not None:
        solver.time_order = time
    return solver


def test_a_stated_order_that_differs_from_the_file_is_noted():
    # common practice: a scheme is verified against its own design order; the file's differing
    # [order] (plate-poisson says space = 2) is named so the reader sees the swap
    import json
    r = run_study("plate-poisson", _stating(space=1), refinement=Refinement(levels=2))
    assert r.order_conflicts == ({"axis": "space", "solver": 1.0, "problem": 2.0, "used_for": "verdicts"},)
    line = "note: the solver states order 1; the problem file's [order] space = 2; judged against the solver's"
    assert [ln.strip() for ln in str(r).splitlines()].count(line) == 1
    d = json.loads(json.dumps(r.to_dict()))
    assert d["order_conflicts"] == [{"axis": "space", "solver": 1.0, "problem": 2.0, "used_for": "verdicts"}]
    assert line[len("note: "):] in d["notes"]


def test_agreeing_or_overridden_orders_give_no_order_note():
    for r in (run_study("plate-poisson", _stating(space=2), refinement=Refinement(levels=2)),       # agrees with [order] space = 2
              run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=2)),             # bundled, states 2
              run_study("plate-poisson", _stating(space=1), refinement=Refinement(levels=2), judging=Judging(formal_order=2))):  # the caller decides
        assert r.order_conflicts == ()
        assert "[order]" not in str(r) and not any("[order]" in n for n in r.to_dict()["notes"])


def test_a_stated_time_order_is_noted_where_it_was_used():
    # Crank-Nicolson is second order in time (Crank & Nicolson 1947, Proc. Camb. Phil. Soc. 43:50);
    # slab-heat's [order] says time = 1. Combined refinement plans the steps with the stated order,
    # time refinement judges against it; backward Euler (first order) agrees with the file.
    r = run_study("slab-heat", "fd-heat-cn", refinement=Refinement(levels=2))
    assert r.order_conflicts == ({"axis": "time", "solver": 2.0, "problem": 1.0, "used_for": "grids"},)
    assert "note: the solver states time order 2; the problem file's [order] time = 1; the time steps were " \
           "planned with the solver's" in str(r)
    r = run_study("slab-heat", "fd-heat-cn", refinement=Refinement(levels=2, mode="time", base_cells=256))
    assert [c["used_for"] for c in r.order_conflicts] == ["verdicts"]
    assert r.notes == ("the solver states time order 2; the problem file's [order] time = 1; judged against "
                       "the solver's",)
    # given steps in space mode: the stated time order shaped nothing, so nothing to say
    assert run_study("slab-heat", "fd-heat-cn", refinement=Refinement(levels=2, mode="space", base_steps=64)).order_conflicts == ()
    r = run_study("slab-heat", "fd-heat-euler", refinement=Refinement(levels=2, mode="time", base_cells=256))
    assert r.order_conflicts == () and r.notes == ()


@pytest.mark.parametrize("mode, option", [("time", "base_cells"), ("space", "base_steps")])
def test_a_one_sided_study_does_not_guess_its_frozen_resolution(mode, option):
    # Crank-Nicolson (second order in time, Crank & Nicolson 1947) on slab-heat: with the cells frozen at the
    # count the plan used to guess (256), the spatial error stalled the time order at 0.38 (a false "below")
    with pytest.raises(GridError, match=f"give the frozen .*\\({option}\\).*mmsverify split"):
        run_study("slab-heat", "fd-heat-cn", refinement=Refinement(levels=3, mode=mode))


def test_no_order_note_when_the_file_states_no_order():
    # a file without [order] holds defaults, not a claim the solver could contradict
    from mmsverify.problem.derive import load_problem, problem_from_text
    text = load_problem("plate-poisson").source
    with open(text, encoding="utf-8") as fh:
        body = fh.read()
    start = body.index("[order]")
    body = body[:start] + body[body.index("[study]"):]
    p = problem_from_text(body, source="no-order.toml")
    assert p.order_given == () and p.space_order == 2
    r = run_study(p, _stating(space=1), refinement=Refinement(levels=2))
    assert r.order_conflicts == () and r.notes[:1] != ("the solver states order 1",)
    assert "[order]" not in str(r)
    assert load_problem("plate-poisson").order_given == ("space",)


def test_order_source_names_where_the_judged_order_came_from():
    # a solver stating only its time order: the judged space order is the file's
    r = run_study("plate-poisson", _stating(time=1), refinement=Refinement(levels=2))
    assert r.order_source == "problem" and "stated by the solver" not in str(r)
    assert run_study("plate-poisson", _stating(space=2), refinement=Refinement(levels=2)).order_source == "solver"


def test_stated_orders_follow_the_options_that_configure_the_solver():
    # the one-sided Neumann difference is first order (LeVeque 2007, section 2.12, from memory);
    # chosen through options, the study is judged against order 1, not the default scheme's 2
    from solvers_demo.fd.diffusion import FDDiffusion
    r = run_study("plate-poisson", FDDiffusion(), options={"neumann": "one-sided"}, refinement=Refinement(levels=3))
    assert r.formal_order == 1 and r.order_source == "solver"
    assert [c["solver"] for c in r.order_conflicts] == [1.0]
    with pytest.raises(SolverError, match="neumann='ghost'"):
        run_study("plate-poisson", FDDiffusion(), options={"neumann": "ghost"}, refinement=Refinement(levels=2))


def test_the_solvers_arrays_are_left_as_returned():
    # u = x: the exact values on full meshgrid points can be a view of the solver's x array, so the error
    # must not be written into them (the study reuses the exact values' memory only when it is its own)
    from mmsverify import problem_from_text
    problem = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x"\n[order]\nspace = 2\n',
                                "linear-field")
    kept = []

    def solve(case):
        X, Y = np.meshgrid(*(case.grid.nodes(a) for a in range(2)), indexing="ij")
        u = X + case.grid.spacing[0] ** 2 * Y      # an error of order h^2
        kept.append((X, X.copy(), u, u.copy()))
        return Solution(values={"u": u}, points=(X, Y))

    result = run_study(problem, solve, refinement=Refinement(levels=3, base_cells=4))
    for X, X0, u, u0 in kept:
        assert np.array_equal(X, X0) and np.array_equal(u, u0)
    assert result.passed
    assert result.levels[0].errors["u"]["Linf"] == pytest.approx(0.25 ** 2)   # h^2 * max y


def test_axis_points_and_a_coordinate_field_give_no_warning():
    # u = x on np.ix_ points: the exact values are then a broadcast view of the points; asking whether
    # such a view is writeable warns in NumPy 2 (FutureWarning), and a user's suite may turn warnings
    # into errors. The study must neither warn nor write into the view.
    import warnings
    from mmsverify import problem_from_text
    problem = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x"\n[order]\nspace = 2\n',
                                "linear-field")

    def solve(case):
        x, y = np.ix_(case.grid.nodes(0), case.grid.nodes(1))
        return Solution(values={"u": x + case.grid.spacing[0] ** 2 * y}, points=(x, y))

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = run_study(problem, solve, refinement=Refinement(levels=3, base_cells=4))
    assert result.passed and all(lv.ok for lv in result.levels)
