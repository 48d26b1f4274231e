"""A study killed at random moments resumes with no corrupt file and no finished level redone.

``mmsverify run ... --cache DIR --json OUT`` runs in its own process group
and is killed with SIGKILL (no clean-up of any kind) after a random delay,
then started again, until one run finishes. After every kill each file the
study keeps is checked: level records and the result file. A level whose
record existed when a run started must not be
solved by that run. The finished study must hold the numbers of one run
that was never interrupted.
"""

import json
import os
from pathlib import Path
import random
import signal
import subprocess
import sys
import textwrap
import time

import pytest

from mmsverify import run_study
from mmsverify.outputs.studyfile import read_json

REPO = Path(__file__).resolve().parent.parent
PROBLEM, LEVELS, BASE = "plate-poisson", 4, 4
MAX_RUNS = 12

SLOW_SOLVER = """
import os, time
from solvers_demo.fd.poisson import solve as _solve

def solve(case):
    with open(os.environ["CALL_LOG"], "a") as fh:
        fh.write(f"{os.environ['RUN_ID']} {case.grid.level}\\n")
    time.sleep(0.2)  # long enough for kills to land inside levels as well as between them
    return _solve(case)
"""


def _records(cache):
    """Level number -> key of every record in the level cache; fails on any corrupt file."""
    found, folder = {}, cache / "levels"
    for path in sorted(folder.iterdir()) if folder.exists() else []:
        if path.name.startswith(".") and path.name.endswith(".tmp"):
            continue  # a write that was killed; never read as a record
        assert path.suffix == ".json", path
        rec = json.loads(path.read_text(encoding="utf-8"))  # a torn record raises here
        assert rec["key"] == path.stem and rec["result"]["status"] == "ok", path
        assert set(rec["result"]["errors"]["u"]) >= {"L1", "L2", "Linf"}, path
        found[rec["level"]] = rec["key"]
    return found


def _check_files(tmp_path):
    """Everything the study keeps is whole: level records and the result file."""
    records = _records(tmp_path / "cache")
    out = tmp_path / "out.json"
    if out.exists():
        read_json(out)  # a half-written result raises here
    return records


def _started(log, run_id):
    if not log.exists():
        return []
    pairs = [line.split() for line in log.read_text().splitlines()]
    return [int(level) for rid, level in pairs if rid == str(run_id)]


def _scenario(tmp_path, seed, workers):
    (tmp_path / "slow_solver.py").write_text(textwrap.dedent(SLOW_SOLVER))
    log = tmp_path / "calls.log"
    env = dict(os.environ, CALL_LOG=str(log),
               PYTHONPATH=os.pathsep.join([str(tmp_path), str(REPO), os.environ.get("PYTHONPATH", "")]))
    cmd = [sys.executable, "-m", "mmsverify", "run", PROBLEM, "slow_solver:solve", "--levels", str(LEVELS),
           "--base-cells", str(BASE), "--cache", str(tmp_path / "cache"), "--json", str(tmp_path / "out.json")]
    if workers:
        cmd += ["--workers", str(workers)]
    rng = random.Random(seed)
    kills, resumed, redone = 0, 0, []
    for run in range(MAX_RUNS):
        finished = _check_files(tmp_path)
        resumed += bool(finished)
        # random moments from process start-up on, later ones on average, so that runs make progress
        delay = rng.uniform(0.3, 1.0) + 0.15 * run if run < MAX_RUNS - 1 else None
        proc = subprocess.Popen(cmd, cwd=tmp_path, env=dict(env, RUN_ID=str(run)), stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, start_new_session=True)
        try:
            _, err = proc.communicate(timeout=delay)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)  # the study and its workers, without warning
            proc.communicate()
            kills += 1
            err = None
        redone += [(run, level) for level in _started(log, run) if level in finished]
        if err is not None:
            assert proc.returncode in (0, 1, 3), err.decode()[-2000:]  # a finished study: any verdict
            break
    else:
        pytest.fail(f"no run finished in {MAX_RUNS} attempts")
    records = _check_files(tmp_path)
    assert not redone, f"(run, level) pairs solved again although their record existed: {redone}"
    assert sorted(records) == list(range(LEVELS))
    return kills, resumed, run, read_json(tmp_path / "out.json")


@pytest.fixture(scope="module")
def reference():
    """The same study, never interrupted (the slow solver only delays the bundled FD solver)."""
    return run_study(PROBLEM, "poisson2d", levels=LEVELS, base_cells=BASE)


@pytest.mark.parametrize("seed, workers", [(1, None), (2, None), (3, 2)])
def test_a_study_killed_at_random_moments_resumes_without_loss_or_repetition(tmp_path, reference, seed, workers):
    start = time.monotonic()
    kills, resumed, runs, result = _scenario(tmp_path, seed, workers)
    assert kills >= 1 and resumed >= 1, "the seeded delays must interrupt a run that a later one resumes"
    assert [lv.errors for lv in result.levels] == [lv.errors for lv in reference.levels]
    assert [lv.status for lv in result.levels] == ["ok"] * LEVELS and result.passed == reference.passed
    print(f"\nseed {seed}, workers {workers}: {kills} kills, {resumed} runs resumed, finished on run {runs + 1}, "
          f"{time.monotonic() - start:.1f} s")
