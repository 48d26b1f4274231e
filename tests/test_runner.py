"""Levels through executors: process pools, any Executor, Dask; time limits and failures."""

from concurrent.futures import ThreadPoolExecutor
import os
from pathlib import Path
import time

import numpy as np
import pytest

from mmsverify import Solution, SolverError, run_study
from mmsverify.study.batch import run_studies
from solvers_demo.fd.poisson import solve as fd_solve
from mmsverify.study.settings import Refinement, Running

PROBLEM = "plate-poisson"  # 2-D Poisson, second order; the bundled solver confirms it on 4 levels


class Faulty:
    """The bundled FD solver, misbehaving on chosen levels (picklable: module-level class)."""

    def __init__(self, **faults):
        self.faults = faults

    def __call__(self, case):
        fault = self.faults.get(f"level{case.grid.level}")
        if fault == "raise":
            raise RuntimeError("matrix assembly failed")
        if fault == "sleep":
            time.sleep(30)
        if fault == "exit":
            os._exit(7)
        if fault == "swallow":            # a solver whose own `except Exception` eats the first time-out
            try:
                time.sleep(30)
            except Exception:
                pass
            time.sleep(30)
        if fault == "swallow all":        # catches even the SystemExit or KeyboardInterrupt of a stop
            while True:
                try:
                    time.sleep(30)
                except BaseException:
                    pass
        sol = fd_solve(case)
        if fault == "nan":
            u = sol.values["u"].copy()
            u[2, 2] = np.nan
            return Solution({"u": u}, sol.points, sol.weights)
        if fault == "shape":
            return Solution({"u": sol.values["u"][:-1]}, sol.points, sol.weights)
        return sol


def _errors(result):
    return [lv.errors["u"]["L2"] for lv in result.levels]


def test_process_pool_gives_the_serial_result():
    serial = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=4))
    pooled = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=4), running=Running(workers=2))
    assert serial.passed and pooled.passed
    assert _errors(pooled) == _errors(serial)
    assert [lv.level for lv in pooled.levels] == [0, 1, 2, 3]


def test_any_executor_and_progress_callback():
    seen = []
    with ThreadPoolExecutor(2) as pool:
        result = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=4), running=Running(executor=pool, progress=seen.append))
    assert result.passed
    assert sorted(lv.level for lv in seen) == [0, 1, 2, 3]


def test_crash_nan_and_wrong_shape_are_recorded_per_level():
    solver = Faulty(level1="raise", level2="nan", level4="shape")
    result = run_study(PROBLEM, solver, refinement=Refinement(levels=5, base_cells=4), running=Running(workers=2))
    status = [lv.status for lv in result.levels]
    assert status == ["ok", "failed", "failed", "ok", "failed"]
    assert "RuntimeError: matrix assembly failed" in result.levels[1].message
    assert "NaN" in result.levels[2].message
    assert "shape" in result.levels[4].message
    assert result.verdicts and all("levels 0-3" in v.reason for v in result.verdicts)
    text = str(result)
    assert "level 1 failed" in text and "level 4 failed" in text


@pytest.mark.parametrize("workers", [None, 2])
def test_a_level_past_the_time_limit_is_stopped_and_recorded(workers):
    start = time.monotonic()
    result = run_study(PROBLEM, Faulty(level1="sleep"), refinement=Refinement(levels=3), running=Running(timeout=2, workers=workers))
    assert time.monotonic() - start < 15
    assert [lv.status for lv in result.levels] == ["ok", "failed", "ok"]
    assert "no result within 2 s" in result.levels[1].message


def test_a_dead_worker_fails_only_its_level():
    result = run_study(PROBLEM, Faulty(level1="exit"), refinement=Refinement(levels=3), running=Running(workers=2))
    assert [lv.status for lv in result.levels] == ["ok", "failed", "ok"]
    assert "worker process died" in result.levels[1].message


def test_unpicklable_solver_with_workers_is_a_clear_error():
    with pytest.raises(SolverError, match="cannot be sent to worker processes"):
        run_study(PROBLEM, lambda case: fd_solve(case), refinement=Refinement(levels=2), running=Running(workers=2))


def test_bad_limits_are_refused():
    with pytest.raises(SolverError, match="positive"):
        run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=2), running=Running(timeout=0))
    with pytest.raises(SolverError, match="workers"):
        run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=2), running=Running(workers=0))


def test_several_studies_in_parallel():
    jobs = [{"problem": PROBLEM, "solver": "poisson2d", "refinement": 4},
            {"problem": PROBLEM, "solver": "poisson2d-neumann1", "refinement": 3}]
    good, bad = run_studies(jobs, workers=2)
    assert good.solver == "poisson2d" and bad.solver == "poisson2d-neumann1"
    assert good.passed and not bad.passed  # the seeded first-order Neumann mistake is caught
    with pytest.raises(SolverError, match="study job 0"):
        run_studies([{"problem": PROBLEM, "solver": "no_such_module:solve"}])


def test_dask_local_cluster():
    distributed = pytest.importorskip("distributed", reason="Dask is optional: pip install 'mmsverify[dask]'")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        result = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=4), running=Running(executor=client))
    serial = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=4))
    assert _errors(result) == _errors(serial)


def test_command_line_workers_timeout_and_dask(capsys):
    from mmsverify.cli import main
    assert main(["run", PROBLEM, "poisson2d", "--levels", "4", "--workers", "2", "--timeout", "60"]) == 0
    assert "PASS" in capsys.readouterr().out
    pytest.importorskip("distributed", reason="Dask is optional: pip install 'mmsverify[dask]'")
    assert main(["run", PROBLEM, "poisson2d", "--levels", "4", "--dask", "local", "--workers", "1"]) == 0


def _thread_counts(_):
    from threadpoolctl import threadpool_info
    return os.environ.get("OPENBLAS_NUM_THREADS"), tuple(sorted({i["num_threads"] for i in threadpool_info()
                                                                 if i["user_api"] == "blas"}))


def test_process_pool_workers_share_the_cores(monkeypatch):
    # common practice: N processes on C cores run at most C // N BLAS threads each, or they oversubscribe
    pytest.importorskip("threadpoolctl")
    from mmsverify.execute.runner import _cores, process_pool
    for v in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        monkeypatch.delenv(v, raising=False)
    share = max(1, _cores() // 2)
    with process_pool(2) as pool:
        assert set(pool.map(_thread_counts, range(4))) == {(str(share), (share,))}
    monkeypatch.setenv("OPENBLAS_NUM_THREADS", "7")  # a count the user chose is kept
    with process_pool(2) as pool:
        assert {env for env, _ in pool.map(_thread_counts, range(2))} == {"7"}


def test_a_solver_that_swallows_the_time_out_is_stopped_again():
    # common practice: a broad `except Exception` in user code must not let a level run unbounded
    start = time.monotonic()
    result = run_study(PROBLEM, Faulty(level1="swallow"), refinement=Refinement(levels=2), running=Running(timeout=1))
    assert time.monotonic() - start < 10
    (failed,) = result.failed_levels
    assert failed.level == 1 and "no result within 1 s" in failed.message
    import signal
    assert signal.getsignal(signal.SIGALRM) == signal.SIG_DFL and signal.getitimer(signal.ITIMER_REAL)[0] == 0


def test_worker_pools_never_fork_the_tool():
    # common practice: fork of a process that may run threads is unsafe (Python 3.12+ warns; 3.14 changed the default)
    from mmsverify.execute.processes import mp_context
    assert mp_context().get_start_method() in ("forkserver", "spawn")
    root = Path(__file__).resolve().parent.parent / "mmsverify"
    for name in ("execute/runner.py", "execute/processes.py", "execute/external.py", "cli/__init__.py", "cli/_run.py"):
        text = (root / name).read_text(encoding="utf-8")
        for banned in ("os.fork", "gc.freeze", "threading.Thread", "import _thread", "SIGALRM", "setitimer"):
            assert banned not in text, (name, banned)


def test_a_solver_that_swallows_base_exception_is_stopped_serially_and_the_next_level_runs():
    result = run_study(PROBLEM, Faulty(level0="swallow all"), refinement=Refinement(levels=2, base_cells=4), running=Running(timeout=0.5))
    assert result.levels[0].status == "failed" and "no result within 0.5 s" in result.levels[0].message
    assert result.levels[1].ok, result.levels[1].message
