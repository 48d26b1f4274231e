"""Solutions that are well formed but implausible: each used to pass a study silently.

Every solver here returns the exact solution plus an error that shrinks like h**2 (the error of a
correct second-order scheme, common practice for testing a harness), and lies in one way about where,
when or on what grid its values are. The study must fail the level with the reason, or warn.
"""

import math

import numpy as np
import pytest

from mmsverify import Solution, problem_from_text, run_study

STEADY = problem_from_text('name = "bar"\n[domain]\nx = [0, 1]\n[fields]\nu = "sin(2*x) + x"\n'
                           '[operator]\nkind = "poisson"\n[order]\nspace = 2\n')
TRANSIENT = problem_from_text('name = "warm-bar"\n[domain]\nx = [0, 1]\nt = [0, 1]\n[fields]\n'
                              'u = "sin(2*x) * exp(-t) + x"\n[operator]\nkind = "diffusion"\nk = 1\n'
                              '[order]\nspace = 2\ntime = 2\n')


def _second_order(case, x, h, t=None):
    """Exact values at ``x`` plus an error 0.3 h**2 (1 + x): what a correct second-order scheme leaves."""
    t = case.grid.t_end if t is None else t
    return case.mms.exact("u", x, t=t) + 0.3 * h ** 2 * (1 + x)


def _honest(case, x=None):
    g = case.grid
    x = g.nodes(0) if x is None else x
    w = np.full(x.size, g.spacing[0])
    w[[0, -1]] /= 2
    return _second_order(case, x, g.h), x, w


def test_an_honest_solver_passes():
    def solve(case):
        u, x, w = _honest(case)
        return Solution({"u": u}, (x,), w)
    assert run_study(STEADY, solve, levels=4).passed


def test_points_that_stay_those_of_the_coarsest_level_fail_the_level():
    # the scheme runs on the level's grid but reports at the coarsest level's 9 nodes
    def solve(case):
        x = np.linspace(0, 1, 9)
        return Solution({"u": _second_order(case, x, case.grid.h)}, (x,), np.full(9, 1 / 9))
    r = run_study(STEADY, solve, levels=4)
    assert not r.passed
    assert [lv.level for lv in r.failed_levels] == [1, 2, 3]
    assert "the same 9 points as level 0" in r.failed_levels[0].message


def test_a_level_that_returns_the_previous_solution_fails():
    stored = {}

    def solve(case):
        k = case.grid.level
        if k == 2:                       # a stale output file: level 1's solution again
            return stored[1]
        u, x, w = _honest(case)
        stored[k] = Solution({"u": u}, (x,), w)
        return stored[k]
    r = run_study(STEADY, solve, levels=5)
    assert not r.passed
    (bad,) = r.failed_levels
    assert bad.level == 2 and "level 1" in bad.message and "previous level's solution" in bad.message


def test_a_point_count_that_grows_unlike_the_grid_is_told():
    # an own mesh refined 4x per level while the grids halve h: a first-order error then falls like h**2
    def solve(case):
        n = 8 * 4 ** case.grid.level
        x = np.linspace(0, 1, n + 1)
        u = case.mms.exact("u", x) + 0.3 / n * (1 + x)
        return Solution({"u": u}, (x,), np.full(x.size, 1 / (n + 1)))
    r = run_study(STEADY, solve, levels=4)
    assert any("h taken from the grid may be wrong" in n and "level 1" in n for n in r.notes), r.notes


def test_points_outside_the_domain_fail():
    def solve(case):
        g = case.grid
        x = np.linspace(-g.h, 1 + g.h, g.cells[0] + 3)   # with a ghost node at each end
        return Solution({"u": _second_order(case, x, g.h)}, (x,), np.full(x.size, g.h))
    r = run_study(STEADY, solve, levels=3)
    assert not r.passed and len(r.failed_levels) == 3
    assert "outside the domain x = [0, 1]" in r.failed_levels[0].message


@pytest.mark.parametrize("scale", [1e308, 1e5, 1e-3])
def test_weights_that_are_not_volumes_fail(scale):
    def solve(case):
        u, x, w = _honest(case)
        return Solution({"u": u}, (x,), w * scale)
    r = run_study(STEADY, solve, levels=3)
    assert not r.passed and len(r.failed_levels) == 3
    assert "the weights add up to" in r.failed_levels[0].message
    assert "domain's length is 1" in r.failed_levels[0].message


def test_interior_points_only_are_fine():
    def solve(case):
        u, x, w = _honest(case)
        return Solution({"u": u[1:-1]}, (x[1:-1],), w[1:-1])
    assert run_study(STEADY, solve, levels=3).passed


def test_a_single_point_fails():
    def solve(case):
        x = np.array([0.5])
        return Solution({"u": _second_order(case, x, case.grid.h)}, (x,), np.array([1.0]))
    r = run_study(STEADY, solve, levels=3)
    assert not r.passed and len(r.failed_levels) == 3
    assert "a single point" in r.failed_levels[0].message


@pytest.mark.parametrize("when", [2.0, -0.5, math.nan, math.inf])
def test_a_time_outside_the_interval_fails(when):
    def solve(case):
        g = case.grid
        x = g.nodes(0)
        t = when if np.isfinite(when) else g.t_end
        return Solution({"u": _second_order(case, x, g.h, t=t)}, (x,), np.full(x.size, 1 / x.size), time=when)
    r = run_study(TRANSIENT, solve, levels=3)
    assert not r.passed and len(r.failed_levels) == 3
    assert "outside the time interval t = [0, 1]" in r.failed_levels[0].message
