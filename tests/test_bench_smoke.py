"""The benchmark scripts of issue 9 targets 1, 4 and 5 keep working (tiny sizes; no timing is checked).

Each script runs with ``--tiny`` in a fresh process, as a user would run it,
and must print its table with the figure it exists for.
"""

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

pytestmark = pytest.mark.slow  # each runs a bench script in a fresh process


def _run(script, tmp_path):
    env = dict(os.environ)
    run = subprocess.run([sys.executable, str(ROOT / "bench" / script), "--tiny"], capture_output=True, text=True,
                         env=env, timeout=600, cwd=ROOT)
    assert run.returncode == 0, run.stdout + run.stderr
    return run.stdout


def test_harness_overhead_splits_a_study_into_solver_and_harness(tmp_path):
    out = _run("harness_overhead.py", tmp_path)
    assert "| solver, own work |" in out and "| error norms |" in out
    assert "first run of the content" in out
    assert "harness share" in out and "Machine:" in out


def test_warm_study_compares_no_limit_with_the_default_limit(tmp_path):
    out = _run("warm_study.py", tmp_path)
    assert "| none (levels in this process) |" in out and "| 3600 s (levels in a worker) |" in out
    assert "Machine:" in out


def test_solver_scaling_reports_default_next_to_direct(tmp_path):
    out = _run("solver_scaling.py", tmp_path)
    assert "**default** (auto: dst)" in out          # 3-D Dirichlet box: the sine transform applies
    assert "| amg |" in out and "| direct |" in out
    assert "time per unknown max/min" in out


@pytest.mark.parametrize("batch", ["catalogue: run_catalogue", "mistakes command", "studies: run_studies"])
def test_parallel_batch_compares_one_and_two_workers(tmp_path, batch):
    out = _parallel_output(tmp_path)
    line = next(ln for ln in out.splitlines() if ln.startswith(f"| {batch}"))
    assert line.count("|") == 7 and "x**" in line


_CACHE = {}


def _parallel_output(tmp_path):
    if "out" not in _CACHE:  # one run serves the three checks
        _CACHE["out"] = _run("parallel_batch.py", tmp_path)
    return _CACHE["out"]


def test_scattered_points_compare_derived_and_hand_written(tmp_path):
    out = _run("scattered.py", tmp_path)
    for quantity in ("source", "exact", "gradient"):
        assert f"| {quantity} | mmsverify |" in out and f"| {quantity} | hand-written NumPy |" in out


def test_dask_batch_compares_one_and_two_workers(tmp_path):
    out = _run("dask_batch.py", tmp_path)
    assert "2 workers against 1" in out and "speed-up" in out and "| yes |" in out
