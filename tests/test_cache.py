"""Level cache: content keys, atomic records, reuse, and resuming a killed study."""

import os
from pathlib import Path
import subprocess
import sys
import textwrap
import time

import pytest

from mmsverify import Case, derive, plan_grids, run_study
from mmsverify.execute.cache import LevelCache, solver_identity
from mmsverify.execute.external import ExternalSolver
from mmsverify.study.settings import Refinement, Running

PROBLEM = "plate-poisson"
REPO = Path(__file__).resolve().parent.parent

COUNTING_SOLVER = """
import os, time
from solvers_demo.fd.poisson import solve as _solve

def solve(case):
    with open(os.environ["RUN_LOG"], "a") as fh:
        fh.write(f"{case.grid.level}\\n")
    if case.grid.level >= 2 and os.environ.get("HANG_FROM_LEVEL_2") == "1":
        time.sleep(600)
    return _solve(case)
"""


@pytest.fixture
def counting(tmp_path, monkeypatch):
    """A solver module that logs every call (level number) to a file."""
    (tmp_path / "counting_solver.py").write_text(textwrap.dedent(COUNTING_SOLVER))
    log = tmp_path / "calls.log"
    monkeypatch.setenv("RUN_LOG", str(log))
    monkeypatch.syspath_prepend(str(tmp_path))
    yield log
    sys.modules.pop("counting_solver", None)


def _calls(log):
    return [int(line) for line in log.read_text().split()] if log.exists() else []


def _case(level=0, problem=PROBLEM, **options):
    return Case(plan_grids(problem, levels=3)[level], derive(problem), {"mode": "combined", **options})


def test_keys_follow_the_content(tmp_path):
    cache = LevelCache(tmp_path)
    key = cache.key(_case(), "solver-a")
    assert key == cache.key(_case(), "solver-a")
    assert len({key, cache.key(_case(1), "solver-a"), cache.key(_case(), "solver-b"),
                cache.key(_case(problem="fin-diffusion"), "solver-a"),
                cache.key(_case(scheme="upwind"), "solver-a")}) == 5


def test_solver_identity_follows_its_code(tmp_path, monkeypatch):
    mod = tmp_path / "edited_solver.py"
    mod.write_text("def solve(case):\n    return 1\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    import edited_solver
    first = solver_identity(edited_solver.solve)
    mod.write_text("def solve(case):\n    return 2\n")
    assert solver_identity(edited_solver.solve) != first
    sys.modules.pop("edited_solver", None)
    prog = tmp_path / "prog.sh"
    prog.write_text("#!/bin/sh\nexit 0\n")
    ext = ExternalSolver([str(prog), "{case}"])
    before = solver_identity(ext)
    prog.write_text("#!/bin/sh\nexit 1\n")  # a rebuilt program is another solver
    assert solver_identity(ext) != before


def test_records_are_written_atomically_and_unreadable_ones_ignored(tmp_path):
    result = run_study(PROBLEM, "poisson2d", refinement=Refinement(levels=2), running=Running(cache_dir=tmp_path))
    cache = LevelCache(tmp_path)
    assert len(cache) == 2
    assert not [p for p in (tmp_path / "levels").iterdir() if p.suffix != ".json"]  # no temporary files left
    case = _case(0)
    key = cache.key(case, solver_identity(__import__("solvers_demo.fd.poisson", fromlist=["solve"]).solve))
    assert cache.load(key, case.grid).errors == result.levels[0].errors
    cache.path(key).write_text('{"key": "trunc')
    with pytest.warns(RuntimeWarning, match="not a JSON record"):
        assert cache.load(key, case.grid) is None


HELPED_SOLVER = """
from solvers_demo.fd.poisson import solve as _solve
from cache_helper import SCALE

def solve(case):
    sol = _solve(case)
    return type(sol)(values={k: v * SCALE for k, v in sol.values.items()}, points=sol.points, weights=sol.weights)
"""


def test_editing_a_module_the_solver_imports_recomputes_the_levels(tmp_path, monkeypatch, capsys):
    from mmsverify.cli import main
    (tmp_path / "helped_solver.py").write_text(HELPED_SOLVER)
    helper = tmp_path / "cache_helper.py"
    helper.write_text("SCALE = 1.0\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    argv = ["run", PROBLEM, "helped_solver:solve", "--levels", "4", "--cache", str(tmp_path / "c")]
    try:
        assert main(argv) == 0
        assert main(argv) == 0
        assert "4 levels from the cache" in capsys.readouterr().out
        helper.write_text("SCALE = 1.0 + 1e-3  # the edit must reach the result\n")
        sys.modules.pop("cache_helper", None)
        sys.modules.pop("helped_solver", None)
        main(argv)
        out = capsys.readouterr().out
        assert "from the cache" not in out   # every level recomputed with the edited helper
    finally:
        sys.modules.pop("cache_helper", None)
        sys.modules.pop("helped_solver", None)


def test_no_cache_flag_runs_every_level(tmp_path, capsys):
    from mmsverify.cli import main
    argv = ["run", PROBLEM, "poisson2d", "--levels", "4", "--cache", str(tmp_path)]
    assert main(argv) == 0
    capsys.readouterr()
    assert main(argv + ["--no-cache"]) == 0
    assert "from the cache" not in capsys.readouterr().out
    assert main(argv) == 0
    assert "4 levels from the cache" in capsys.readouterr().out


def test_special_files_and_links_in_place_of_a_record_are_refused_unread(tmp_path):
    cache = LevelCache(tmp_path)
    case = _case(0)
    key = cache.key(case, "s")
    cache.path(key).symlink_to("/dev/zero")
    with pytest.warns(RuntimeWarning, match="symbolic link"):
        assert cache.load(key, case.grid) is None
    cache.path(key).unlink()
    os.mkfifo(cache.path(key))   # a read would block for ever
    with pytest.warns(RuntimeWarning, match="not a regular file"):
        assert cache.load(key, case.grid) is None


@pytest.mark.skipif(os.name == "nt", reason="POSIX modes")
def test_a_cache_folder_others_may_write_is_refused(tmp_path):
    from mmsverify.errors import MMSError
    folder = tmp_path / "shared"
    folder.mkdir()
    folder.chmod(0o777)
    with pytest.raises(MMSError, match="writable by other users"):
        LevelCache(folder)


def test_rerun_reuses_finished_levels(counting, tmp_path):
    first = run_study(PROBLEM, "counting_solver:solve", refinement=Refinement(levels=3), running=Running(cache_dir=tmp_path / "c"))
    assert _calls(counting) == [0, 1, 2]
    second = run_study(PROBLEM, "counting_solver:solve", refinement=Refinement(levels=4), running=Running(cache_dir=tmp_path / "c"))
    assert _calls(counting) == [0, 1, 2, 3]  # only the new level ran
    assert [lv.errors for lv in second.levels[:3]] == [lv.errors for lv in first.levels]
    assert "reused from the level cache" in second.levels[0].message and second.passed
    run_study(PROBLEM, "counting_solver:solve", refinement=Refinement(levels=2), running=Running(cache_dir=tmp_path / "c", resume=False))
    assert _calls(counting) == [0, 1, 2, 3, 0, 1]


_FAILED_CALLS = []


def _fail(case):
    _FAILED_CALLS.append(case.grid.level)
    raise RuntimeError("diverged")


def test_failed_levels_are_not_stored_and_run_again(tmp_path):
    _FAILED_CALLS.clear()
    for _ in range(2):
        result = run_study(PROBLEM, _fail, refinement=Refinement(levels=2), running=Running(cache_dir=tmp_path))
        assert not any(lv.ok for lv in result.levels)
    assert len(LevelCache(tmp_path)) == 0
    assert _FAILED_CALLS == [0, 1, 0, 1]


def test_a_killed_study_resumes_without_redoing_finished_levels(counting, tmp_path):
    cache_dir = tmp_path / "cache"
    script = (f"import sys; sys.path[:0] = [{str(tmp_path)!r}, {str(REPO)!r}]\n"
              "import mmsverify\n"
              f"mmsverify.run_study({PROBLEM!r}, 'counting_solver:solve', 4, running=mmsverify.Running(cache_dir={str(cache_dir)!r}))\n")
    env = dict(os.environ, HANG_FROM_LEVEL_2="1")
    proc = subprocess.Popen([sys.executable, "-c", script], env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while _calls(counting) != [0, 1, 2]:  # levels 0 and 1 done, level 2 hangs
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "the study did not reach level 2"
            time.sleep(0.05)
        assert len(LevelCache(cache_dir)) == 2
    finally:
        proc.kill()
        proc.wait()
    result = run_study(PROBLEM, "counting_solver:solve", refinement=Refinement(levels=4), running=Running(cache_dir=cache_dir))
    assert _calls(counting) == [0, 1, 2, 2, 3]  # the rerun did only levels 2 and 3
    assert result.passed and [lv.level for lv in result.levels] == [0, 1, 2, 3]
    assert len(LevelCache(cache_dir)) == 4


# -- temporary records left by a writer killed mid-write -----------------------

KILLED_WRITER = """
import os, signal, sys
from types import SimpleNamespace
sys.path[:0] = [{repo!r}]
import mmsverify.execute.cache as cache
os.replace = lambda *a: os.kill(os.getpid(), signal.SIGKILL)  # killed between the write and the rename
grid = SimpleNamespace(lower=(0.0,), upper=(1.0,), cells=(4,), t_start=None, t_end=None, steps=None)
result = SimpleNamespace(grid=grid, level=0, h=0.25, status="ok", errors={{}}, seconds=0.0, n_points=5,
                         scale={{}}, quantities={{}}, info={{}})
cache.LevelCache({folder!r}).store("0" * 64, result)
"""


def _age(path, seconds):
    t = time.time() - seconds
    os.utime(path, (t, t))


def _finished_pid():
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid  # no longer running (reused within this test only by a very unlikely coincidence)


@pytest.mark.skipif(os.name == "nt", reason="writers' pids are not asked on Windows")
def test_a_killed_writers_temporary_record_is_removed_on_open(tmp_path):
    proc = subprocess.run([sys.executable, "-c", KILLED_WRITER.format(repo=str(REPO), folder=str(tmp_path))],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == -9, proc.stderr
    left = list((tmp_path / "levels").glob(".*.tmp"))
    assert len(left) == 1 and left[0].read_text().startswith("{")  # the whole record, never renamed
    LevelCache(tmp_path)
    assert left[0].exists()  # too fresh: a writer on another machine sharing the folder could own it
    _age(left[0], 2 * 60)
    cache = LevelCache(tmp_path)
    assert not left[0].exists() and len(cache) == 0


@pytest.mark.skipif(os.name == "nt", reason="writers' pids are not asked on Windows")
def test_temporaries_of_running_writers_are_kept(tmp_path):
    levels = tmp_path / "levels"
    levels.mkdir()
    writer = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        key = "a" * 64
        running = levels / f".{key}.{writer.pid}.1.tmp"  # another process, still writing
        mine = levels / f".{key}.{os.getpid()}.2.tmp"  # this process (another thread may be writing)
        dead = levels / f".{key}.{_finished_pid()}.3.tmp"
        ancient = levels / f".{key}.{writer.pid}.4.tmp"  # running writer, but no write takes an hour
        foreign = levels / ".editor-swap.tmp"  # not a name the cache makes: only the age rule applies
        record = levels / f"{key}.json"
        for path in (running, mine, dead, ancient, foreign, record):
            path.write_text("{}")
            _age(path, 10 * 60)
        _age(ancient, 2 * 3600)
        LevelCache(tmp_path)
        assert running.exists() and mine.exists() and foreign.exists() and record.exists()
        assert not dead.exists() and not ancient.exists()
        _age(foreign, 2 * 3600)
        LevelCache(tmp_path)
        assert not foreign.exists() and running.exists() and record.exists()
    finally:
        writer.kill()
        writer.wait()
