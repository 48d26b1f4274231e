"""The command line as a user meets it: output, files and exit codes."""

import json
import subprocess
import sys

from mmsverify.cli import main


def test_demo_passes_the_correct_solver_and_catches_the_mistake(capsys):
    assert main(["demo", "--levels", "4"]) == 0
    out = capsys.readouterr().out
    assert "PASS  plate-poisson  solved by  poisson2d" in out
    assert "FAIL  plate-poisson  solved by  poisson2d-neumann1" in out
    assert "seeded mistake is caught" in out
    assert "not that they are the right equations" in out


def test_run_writes_json_and_exit_code_reflects_verdict(tmp_path, capsys):
    out = tmp_path / "r.json"
    assert main(["run", "plate-poisson", "poisson2d", "--levels", "4", "--json", str(out)]) == 0
    d = json.loads(out.read_text())
    assert d["passed"] and d["solver"] == "poisson2d"
    assert main(["run", "plate-poisson", "poisson2d-neumann1", "--levels", "3"]) == 1


def test_bad_problem_file_exits_2_with_file_and_line(tmp_path, capsys):
    f = tmp_path / "bad.toml"
    f.write_text('[domain]\nx = [0, 1]\n[fields]\nu = "__import__(\'os\').system(\'echo hi\')"\n')
    assert main(["run", str(f), "poisson2d"]) == 2
    err = capsys.readouterr().err
    assert str(f) in err and "line 4" in err


def test_unknown_solver_lists_bundled_ones(capsys):
    assert main(["run", "plate-poisson", "nosuch"]) == 2
    assert "poisson2d" in capsys.readouterr().err


def test_list_and_derive(capsys):
    assert main(["list"]) == 0
    out = capsys.readouterr().out
    assert "plate-poisson" in out and "navier_stokes" in out and "custom" in out
    assert main(["derive", "plate-poisson"]) == 0
    assert "source_u =" in capsys.readouterr().out


def test_module_entry_point_runs():
    r = subprocess.run([sys.executable, "-m", "mmsverify", "--help"], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0 and "Exit codes" in r.stdout


def test_run_warns_ahead_of_a_study_whose_design_cannot_catch_mistakes(capsys):
    # LeVeque 2007: the 5-point Laplacian is exact on quadratics, so no order can be observed
    from pathlib import Path
    rc = main(["run", str(Path(__file__).parent / "data" / "quadratic-poisson.toml"), "poisson2d", "--levels", "3"])
    err = capsys.readouterr().err
    assert rc == 3 and "warning: design:" in err and "reproduces this solution exactly" in err


def test_quiet_run_prints_the_headline_and_json_reads_back(tmp_path, capsys):
    from mmsverify.outputs.studyfile import read_json
    out = tmp_path / "q.json"
    assert main(["run", "plate-poisson", "poisson2d", "--levels", "4", "--quiet", "--json", str(out)]) == 0
    assert capsys.readouterr().out.strip() == "PASS  plate-poisson  solved by  poisson2d"
    assert read_json(out).passed


def test_run_plans_the_grid_for_a_target_error(capsys):
    # closed form check: with e = C h^2, the plan's h must give C h^2 = target
    assert main(["run", "plate-poisson", "poisson2d", "--levels", "4", "--target-error", "1e-6"]) == 0
    out = capsys.readouterr().out
    assert "plan for field u: L2 error 1e-06" in out
    c = float(out.split("error model")[1].split()[0])
    h = float(out.split("h needed")[1].split()[0])
    assert abs(c * h ** 2 / 1e-6 - 1) < 0.02


def test_a_study_in_which_no_level_ran_exits_2_with_the_reason_once(capsys):
    # README "Exit codes": 2 bad input; a solver refusing the problem on every level is a set-up error  # common practice
    assert main(["run", "slab-heat", "poisson2d", "--levels", "3"]) == 2
    out = capsys.readouterr().out
    assert "(every level failed; nothing to judge)" in out.splitlines()[0]
    assert "judged on the others" not in out
    assert out.count("is a steady solver") == 1
    assert "every level failed: problem slab-heat, solver poisson2d: FDDiffusion is a steady solver" in out


def test_a_missing_external_program_exits_2_and_names_the_level_once(capsys):
    assert main(["run", "plate-poisson", "--external", "./nosuch-program {case}", "--levels", "3"]) == 2
    out = capsys.readouterr().out
    assert out.count("cannot start") == 1 and out.count("problem plate-poisson,") == 1
    assert "solver external:nosuch-program, program ./nosuch-program: cannot start" in out


def test_an_external_level_message_names_problem_and_level_once(tmp_path):
    from mmsverify import run_study
    from mmsverify.execute.external import ExternalSolver
    result = run_study("plate-poisson", ExternalSolver([str(tmp_path / "absent"), "{case}"]), levels=3)
    for lv in result.levels:
        where = f"level {lv.level} ({lv.grid.describe()})"
        assert lv.message.count(where) == 1 and lv.message.count("problem plate-poisson") == 1
        assert lv.message.startswith(f"problem plate-poisson, solver {result.solver}, {where}, program ")


def test_a_study_with_some_levels_run_still_exits_1(tmp_path, monkeypatch, capsys):
    (tmp_path / "flaky_solver.py").write_text(
        "from mmsverify import SolverError\n"
        "from mmsverify.execute.solvers import resolve_solver\n"
        "def solve(case):\n"
        "    if case.grid.level == 1:\n"
        "        raise SolverError('out of memory on this level')\n"
        "    return resolve_solver('poisson2d')(case)\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    assert main(["run", "plate-poisson", "flaky_solver:solve", "--levels", "4"]) == 1
    out = capsys.readouterr().out
    assert "(level 1 failed; the orders are judged on the others)" in out.splitlines()[0]
    assert "  level 1 failed: problem plate-poisson, solver flaky_solver:solve, level 1" in out
