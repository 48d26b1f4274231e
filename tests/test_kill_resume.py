"""A study killed midway resumes with no corrupt file and no finished level redone.

``mmsverify run ... --cache DIR --json OUT`` runs in its own process group.
A test solver writes a marker file when it reaches a chosen level and then
waits; the test kills the whole group with SIGKILL (no clean-up of any
kind) as soon as the marker appears, so the kill lands inside that level
every time, whatever the machine's load. Every file the study keeps is then
checked: level records and the result file. The
rerun with the same cache must solve exactly the levels that have no
record, and the finished study must hold the numbers of a study that was
never interrupted.
"""

import json
import os
from pathlib import Path
import signal
import subprocess
import sys
import textwrap
import time

import pytest

from mmsverify import run_study
from mmsverify.outputs.studyfile import read_json
from mmsverify.study.settings import Refinement

REPO = Path(__file__).resolve().parent.parent
PROBLEM, LEVELS, BASE = "plate-poisson", 4, 4

KILL_SOLVER = """
import os, time
from solvers_demo.fd.poisson import solve as _solve

def solve(case):
    with open(os.environ["CALL_LOG"], "a") as fh:
        fh.write(f"{os.environ['RUN_ID']} {case.grid.level}\\n")
    if os.environ.get("STOP_AT") == str(case.grid.level):
        open(os.environ["MARKER"], "w").close()
        while True:  # the test kills the study now
            time.sleep(1)
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


def _kill_when_reached(cmd, env, marker, limit=120):
    """Start the study and SIGKILL its process group once ``marker`` exists; fails if it ends first."""
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
    deadline = time.monotonic() + limit
    try:
        while not marker.exists():
            if proc.poll() is not None:
                pytest.fail(f"the study ended before reaching its kill level: {proc.stderr.read().decode()[-2000:]}")
            assert time.monotonic() < deadline, "the kill level was never reached"
            time.sleep(0.02)  # polling for the marker; the kill moment does not depend on this delay
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the study and its workers, without warning
        proc.communicate()


def _scenario(tmp_path, stop_at, workers):
    (tmp_path / "kill_solver.py").write_text(textwrap.dedent(KILL_SOLVER))
    log, marker = tmp_path / "calls.log", tmp_path / "reached"
    # the killed study cannot remove its temporary folder (SIGKILL allows no clean-up): keep it in the test's
    # folder, not the machine's /tmp
    (tmp_path / "tmp").mkdir()
    env = dict(os.environ, CALL_LOG=str(log), MARKER=str(marker), TMPDIR=str(tmp_path / "tmp"),
               PYTHONPATH=os.pathsep.join([str(tmp_path), str(REPO), os.environ.get("PYTHONPATH", "")]))
    cmd = [sys.executable, "-m", "mmsverify", "run", PROBLEM, "kill_solver:solve", "--levels", str(LEVELS),
           "--base-cells", str(BASE), "--cache", str(tmp_path / "cache"), "--json", str(tmp_path / "out.json")]
    if workers:
        cmd += ["--workers", str(workers)]
    _kill_when_reached(cmd, dict(env, RUN_ID="0", STOP_AT=str(stop_at)), marker)
    finished = _check_files(tmp_path)
    assert stop_at not in finished and finished, f"records after the kill: {sorted(finished)}"
    left_by_kill = set((tmp_path / "tmp").iterdir())
    rerun = subprocess.run(cmd, env=dict(env, RUN_ID="1"), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                           timeout=300)
    assert rerun.returncode in (0, 1, 3), rerun.stderr.decode()[-2000:]
    assert set((tmp_path / "tmp").iterdir()) == left_by_kill, "a study that ended left a temporary folder"
    assert sorted(_started(log, 1)) == sorted(set(range(LEVELS)) - set(finished)), \
        "the rerun must solve exactly the levels without a record"
    assert sorted(_check_files(tmp_path)) == list(range(LEVELS))
    return finished, read_json(tmp_path / "out.json")


@pytest.fixture(scope="module")
def reference():
    """The same study, never interrupted (the slow solver only delays the bundled FD solver)."""
    return run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=LEVELS, base_cells=BASE))


@pytest.mark.slow
# Levels run largest first, so the smallest level is reached last: serially three records exist when
# it starts; with two workers it is sent once two levels have finished and been stored.
# serially the levels run coarse to fine, so the kill comes inside a finer level; two workers take the
# largest level first, so the coarsest is the last one they reach
@pytest.mark.parametrize("stop_at, workers", [(2, None), (3, None), (0, 2)])
def test_a_study_killed_inside_a_level_resumes_without_loss_or_repetition(tmp_path, reference, stop_at, workers):
    finished, result = _scenario(tmp_path, stop_at, workers)
    assert [lv.errors for lv in result.levels] == [lv.errors for lv in reference.levels]
    assert [lv.status for lv in result.levels] == ["ok"] * LEVELS and result.passed == reference.passed
