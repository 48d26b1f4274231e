"""Space and time orders measured separately on a transient problem."""

import math

import numpy as np
import pytest
import scipy.sparse as sps
import scipy.sparse.linalg as spla

from mmsverify import GridError, Solution
from mmsverify.study.spacetime import run_space_time


def theta_heat(theta):
    """rho_c T_t - k T_xx = f in 1-D, Dirichlet ends, theta-method in time
    (theta = 1 implicit Euler, theta = 1/2 Crank-Nicolson)."""
    def solve(case):
        g, m = case.grid, case.mms
        x = g.nodes(0)
        h, dt = g.spacing[0], g.dt
        p = m.problem
        k, rc = float(p.parameters["k"]), float(p.parameters["rho_c"])
        n = x.size - 2
        L = sps.diags([np.ones(n - 1), -2 * np.ones(n), np.ones(n - 1)], [-1, 0, 1], format="csc") * (k / h ** 2)
        I = sps.identity(n, format="csc")
        lhs = spla.splu((rc * I - theta * dt * L).tocsc())
        rhs_op = rc * I + (1 - theta) * dt * L
        u = m.initial("T", x)
        t = g.t_start

        def bc_and_source(tn):
            b = m.source("T", x[1:-1], t=tn).copy()
            b[0] += k / h ** 2 * m.boundary_value("T", "x_min", x[0], t=tn)
            b[-1] += k / h ** 2 * m.boundary_value("T", "x_max", x[-1], t=tn)
            return b
        for _ in range(g.steps):
            t1 = t + dt
            r = rhs_op @ u[1:-1] + dt * (theta * bc_and_source(t1) + (1 - theta) * bc_and_source(t))
            u = np.concatenate([[m.boundary_value("T", "x_min", x[0], t=t1)], lhs.solve(r),
                                [m.boundary_value("T", "x_max", x[-1], t=t1)]])
            t = t1
        w = np.full(x.size, h)
        w[[0, -1]] /= 2
        return Solution({"T": u}, (x,), w, time=t)
    return solve


def test_implicit_euler_is_first_order_in_time_and_second_in_space():
    # Implicit Euler O(dt), centred second difference O(h**2): LeVeque 2007, Finite Difference
    # Methods for ODEs and PDEs, sec. 9.4-9.5 (truncation errors of the heat-equation schemes)
    r = run_space_time("slab-heat", theta_heat(1.0), levels=3)
    assert r.time.formal_order == 1 and r.space.formal_order == 2
    assert r.time.passed, str(r.time)
    assert r.space.passed, str(r.space)
    assert r.combined.passed, str(r.combined)
    assert r.passed
    assert r.time.levels[-1].grid.cells[0] >= 128              # frozen fine space (refined if needed)
    assert len({lv.grid.steps for lv in r.space.levels}) == 1  # frozen small step
    assert "time      PASS  formal 1" in r.summary()


def test_crank_nicolson_claimed_first_order_in_time_is_caught_above():
    # Crank-Nicolson is O(dt**2) (LeVeque 2007, sec. 9.6); declared as first order, the
    # temporal study must report an order above the formal one, not a pass.
    # the frozen spatial error must sit below CN's small temporal error: freeze space finer
    r = run_space_time("slab-heat", theta_heat(0.5), levels=3, fine_cells=4096)
    statuses = {v.status for v in r.time.verdicts}
    assert statuses == {"above"}, str(r.time)


def test_space_time_needs_a_transient_problem():
    with pytest.raises(GridError, match="steady"):
        run_space_time("plate-poisson", theta_heat(1.0))


def test_the_frozen_resolution_is_refined_until_its_error_is_negligible():
    # Crank-Nicolson is O(dt**2) (LeVeque 2007, sec. 9.6): with the default frozen grid its small
    # temporal error would drown in the frozen spatial error; the split study refines the grid itself
    from mmsverify.cli import main
    assert main(["split", "slab-heat", "fd-heat-cn"]) == 0


def test_a_refinement_past_the_budget_is_not_run_and_the_result_says_so():
    # Crank-Nicolson is O(dt**2) (LeVeque 2007, sec. 9.6): at the default frozen 256 cells its temporal
    # errors drown in the frozen spatial error, so the split study wants to freeze finer; with no budget
    # it must keep 256 cells and tell what to run instead
    refined = run_space_time("slab-heat", "fd-heat-cn", levels=3)
    assert refined.time.levels[-1].grid.cells[0] > 256 and refined.notes == ()
    r = run_space_time("slab-heat", "fd-heat-cn", levels=3, refine_budget=0)
    assert {lv.grid.cells[0] for lv in r.time.levels} == {128}   # 8 * 2**(3 + 1), never refined
    assert [lv.grid for lv in r.space.levels] == [lv.grid for lv in refined.space.levels]  # untouched
    assert len(r.notes) == 2 and r.polluted == ("time",)   # the frozen error, then what it does to the verdict
    assert r.notes[1].startswith("the temporal study is polluted by spatial error")
    note = r.notes[0]
    assert note.startswith("the temporal study's frozen 128 cells per direction")
    assert "past the refinement budget of 0 s" in note and "polluted" in note
    command = note.splitlines()[-1]
    assert command.startswith("mmsverify split slab-heat fd-heat-cn --levels 3 --fine-cells ")
    suggested = int(command.split("--fine-cells ")[1])
    factor = suggested // 128
    assert suggested % 128 == 0 and factor > 1 and factor & (factor - 1) == 0   # frozen cells times 2**k
    assert "note: the temporal study's frozen 128 cells" in str(r)
    assert f"\n    {command}\n" in str(r)                     # the command is not broken across lines


def test_the_suggested_command_freezes_fine_enough():
    # common practice: the advice of the note, followed, gives a study without the note
    r = run_space_time("slab-heat", "fd-heat-cn", levels=3, refine_budget=0)
    suggested = int(r.notes[0].splitlines()[-1].split("--fine-cells ")[1])
    followed = run_space_time("slab-heat", "fd-heat-cn", levels=3, fine_cells=suggested, refine_budget=0)
    assert followed.notes == () and followed.time.passed, str(followed)


def test_split_command_budget_option_and_progress_of_every_study(capsys):
    from mmsverify.cli import main
    # the temporal study, swamped by the frozen spatial error, is polluted, not failed: inconclusive (3)
    assert main(["split", "slab-heat", "fd-heat-cn", "--refine-budget", "0", "--verbose"]) == 3
    out, err = capsys.readouterr()
    assert "note: the temporal study's frozen 256 cells" in out and "--refine-budget" in out
    assert "--fine-cells" in out
    assert err.count("time study, cells fixed at 256: ") == 4 and "combined study: 4/4 levels run" in err
    assert "past the refinement budget" in err                 # said as it happens, with --verbose
    # with the default budget the reruns at finer frozen cells show their levels too
    assert main(["split", "slab-heat", "fd-heat-cn", "--verbose"]) == 0
    out, err = capsys.readouterr()
    assert "note: the temporal study" not in out
    assert "freezing the time study's cells finer: 256 -> " in err
    reruns = [line for line in err.splitlines() if line.startswith("slab-heat / fd-heat-cn, time study, cells fixed at")
              and "cells fixed at 256:" not in line]
    assert reruns and len(reruns) % 4 == 0                     # every level of every rerun is shown


def test_a_negative_budget_is_refused():
    with pytest.raises(GridError, match="refinement budget"):
        run_space_time("slab-heat", theta_heat(1.0), refine_budget=-1)


@pytest.mark.parametrize("mode, option", [("time", "--base-cells"), ("space", "--base-steps")])
def test_run_in_one_mode_refuses_with_the_command_that_works(mode, option, capsys):
    # Crank-Nicolson is O(dt**2) (LeVeque 2007, sec. 9.6): with frozen cells guessed at 256, run --mode time
    # reported it "below" (observed 0.38); the refusal names split, which passes (test above)
    from mmsverify.cli import main
    assert main(["run", "slab-heat", "fd-heat-cn", "--mode", mode, "--levels", "3"]) == 2
    err = capsys.readouterr().err
    assert "\n    mmsverify split slab-heat fd-heat-cn --levels 3\n" in err
    assert option in err
    # with the frozen resolution given, fine enough, the same study runs and passes
    frozen = ["--base-cells", "4096"] if mode == "time" else ["--base-steps", "4096"]
    assert main(["run", "slab-heat", "fd-heat-cn", "--mode", mode, "--levels", "3", *frozen]) == 0


FAST_HEAT = """
name = "fast-slab"
[domain]
x = [0.0, 1.0]
t = [0.0, 0.5]
[fields]
T = "1 + exp(-3*t) * sin(1.3*pi*x + 0.4) + 0.2*x*cos(6*t)"
[operator]
kind = "diffusion"
k = 0.5
rho_c = 1.2
[order]
space = 2
time = 2
"""


def test_a_first_order_time_scheme_does_not_fail_the_spatial_study():
    # Implicit Euler is O(dt) (LeVeque 2007, sec. 9.4), here against a claimed time order 2. The time study
    # rightly fails. The frozen steps of the spatial study used to be sized by the formal time order, which
    # left a time error that bent the spatial order of the correct O(h**2) stencil to 1.05 (a spatial FAIL);
    # sized by the measured time order (1) they leave it negligible. The refinement may take the steps it
    # needs (no budget of solver seconds), so the outcome follows the errors, not the machine's speed.
    from mmsverify import problem_from_text
    problem = problem_from_text(FAST_HEAT)
    r = run_space_time(problem, theta_heat(1.0), levels=4, refine_budget=math.inf)
    assert not r.time.passed and {v.status for v in r.time.verdicts} == {"below"}
    assert r.space.passed, str(r.space)
    assert r.polluted == ()


def test_a_polluted_study_is_named_not_failed():
    # the same scheme with the frozen steps fixed by the caller: the time error swamps the spatial one
    from mmsverify import problem_from_text
    problem = problem_from_text(FAST_HEAT)
    r = run_space_time(problem, theta_heat(1.0), levels=3, fine_steps=16)
    assert r.polluted == ("space",)
    assert "space     POLLUTED" in r.summary()
    assert any(n.startswith("the spatial study is polluted by temporal error") and "measured 0.9" in n
               for n in r.notes), r.notes
    assert r.outcome == "fail"      # the time study fails on its own evidence


def test_only_polluted_studies_failing_is_inconclusive():
    from mmsverify.study.spacetime import SpaceTimeResult

    class Study:
        def __init__(self, outcome):
            self.outcome, self.passed = outcome, outcome == "pass"
    fail, ok, unsure = Study("fail"), Study("pass"), Study("inconclusive")
    assert SpaceTimeResult(fail, ok, ok, polluted=("space",)).outcome == "inconclusive"
    assert SpaceTimeResult(fail, fail, ok, polluted=("space",)).outcome == "fail"
    assert SpaceTimeResult(ok, unsure, ok).outcome == "inconclusive"
    assert SpaceTimeResult(ok, ok, ok).outcome == "pass"
