"""Solvers that misbehave: every fault is recorded against its level, and the harness lives on.

Faults are injected per level. All levels of a run share one small grid
and differ only in their level number, so one call of
:func:`~mmsverify.execute.runner.run_levels` exercises every fault of a kind, in
this process and in worker processes; whole studies show that the others
are still judged. Each test checks the reason recorded for each level.
"""

import os
from pathlib import Path
import signal
import stat
import sys
import textwrap
import time
import tracemalloc

import numpy as np
import pytest

from mmsverify import Case, Solution, derive, run_study
from mmsverify.execute.external import ExternalSolver
from mmsverify.execute.grids import Grid
from mmsverify.execute.processes import GRACE
from mmsverify.execute.runner import run_levels
from solvers_demo.fd.poisson import solve as fd_solve
from mmsverify.study.settings import Refinement

PROBLEM = "plate-poisson"  # 2-D Poisson on the unit square (problems/plate-poisson.toml)
PY = sys.executable
LIMIT = 0.5                # seconds per level where a fault hangs


def _cases(n, problem=PROBLEM, cells=(4, 4)):
    """``n`` cases on one small grid, told apart by their level number."""
    mms = derive(problem)
    p = mms.problem
    return [Case(Grid(k, p.lower, p.upper, cells), mms, {"mode": "combined"}) for k in range(n)]


def _where(cases):
    return [f"fault test, level {c.grid.level}" for c in cases]


# -- solvers in Python ---------------------------------------------------------------------------
class _Unprintable(Exception):
    def __str__(self):
        raise RuntimeError("even printing this error fails")


def _recurse(n):
    return _recurse(n + 1) + 1


def _fault_solution(fault, case):
    """What the solver does for one named fault (module level, so worker processes can run it)."""
    if fault == "raise":
        raise RuntimeError("matrix assembly failed")
    if fault == "hang":
        time.sleep(60)
    if fault == "exit":
        sys.exit(3)
    if fault == "unprintable":
        raise _Unprintable()
    if fault == "huge message":
        raise ValueError("residual history: " + "1.0e+00 " * 2_000_000)
    if fault == "recursion":
        _recurse(0)
    if fault == "memory":
        raise MemoryError("cannot allocate the Jacobian")
    if fault == "none":
        return None
    sol = fd_solve(case)
    u, pts, w = sol.values["u"], sol.points, sol.weights
    bad = {
        "nan": lambda: Solution({"u": np.where(u > 0, np.nan, u)}, pts, w),
        "inf": lambda: Solution({"u": np.where(u > 0, np.inf, -np.inf)}, pts, w),
        "shape": lambda: Solution({"u": u[:-1]}, pts, w),
        "object": lambda: Solution({"u": np.array([None] * u.size, dtype=object).reshape(u.shape)}, pts, w),
        "text": lambda: Solution({"u": u.astype(str)}, pts, w),
        "complex": lambda: Solution({"u": u + 1j}, pts, w),
        "bool": lambda: Solution({"u": u > 0}, pts, w),
        "negative volumes": lambda: Solution({"u": u}, pts, -np.ones(u.shape)),
        "zero volumes": lambda: Solution({"u": u}, pts, np.zeros(u.shape)),
        "nan points": lambda: Solution({"u": u}, (np.full_like(pts[0], np.nan), pts[1]), w),
        "complex points": lambda: Solution({"u": u}, (pts[0] + 0j, pts[1]), w),
        "unknown field": lambda: Solution({"u": u, "p": u}, pts, w),
        "nan quantity": lambda: Solution({"u": u}, pts, w, quantities={"deflection": float("nan")}),
        "bad h": lambda: Solution({"u": u}, pts, w, info={"h": "fine"}),
        "negative h": lambda: Solution({"u": u}, pts, w, info={"h": -0.1}),
        "nan h": lambda: Solution({"u": u}, pts, w, info={"h": float("nan")}),
    }
    return bad[fault]() if fault in bad else sol


class Faulty:
    """Misbehaves on the levels named in ``faults`` (level number -> fault)."""

    def __init__(self, faults):
        self.faults = dict(faults)

    def __call__(self, case):
        return _fault_solution(self.faults.get(case.grid.level, "ok"), case)


# fault -> fragments the recorded reason must contain
PYTHON_FAULTS = {
    "ok": None,
    "raise": ["the solver raised RuntimeError: matrix assembly failed"],
    "hang": [f"no result within {LIMIT:g} s"],
    "exit": ["sys.exit(3)"],
    "unprintable": ["_Unprintable"],
    "huge message": ["the solver raised ValueError: residual history", "characters left out"],
    "recursion": ["RecursionError"],
    "memory": ["MemoryError: cannot allocate the Jacobian"],
    "none": ["the solver returned NoneType"],
    "nan": ["field 'u' has", "NaN/Inf value(s)"],
    "inf": ["NaN/Inf value(s)"],
    "shape": ["field 'u' has shape"],
    "object": ["field 'u'", "dtype object"],
    "text": ["field 'u'", "dtype <U"],
    "complex": ["field 'u'", "complex"],
    "bool": ["field 'u'", "dtype bool"],
    "negative volumes": ["weights (cell volumes) must be finite, non-negative"],
    "zero volumes": ["not all zero"],
    "nan points": ["points contain NaN/Inf"],
    "complex points": ["points", "complex"],
    "unknown field": ["returned field(s) ['p'] that the problem does not define"],
    "nan quantity": ["quantity 'deflection' must be a finite number"],
    "bad h": ["info['h']", "'fine'"],
    "negative h": ["info['h']", "-0.1"],
    "nan h": ["info['h']", "nan"],
}


def _check_reasons(results, faults, expected):
    assert [r.level for r in results] == sorted(faults)
    for r in results:
        fault = faults[r.level]
        want = expected[fault]
        if want is None:
            assert r.ok, (fault, r.message)
            continue
        assert r.status == "failed", (fault, r)
        assert r.message.startswith(f"fault test, level {r.level}"), (fault, r.message[:200])
        for fragment in want:
            assert fragment in r.message, (fault, fragment, r.message[:400])
        assert len(r.message) < 20_000, (fault, len(r.message))


@pytest.mark.parametrize("workers", [None, 2])
def test_every_python_solver_fault_is_recorded_against_its_level(workers):
    faults = dict(enumerate(PYTHON_FAULTS))
    cases = _cases(len(faults))
    start = time.monotonic()
    results = run_levels(Faulty(faults), cases, _where(cases), workers=workers, timeout=LIMIT)
    assert time.monotonic() - start < 30
    _check_reasons(results, faults, PYTHON_FAULTS)


def test_a_study_with_faulty_levels_goes_on_and_judges_the_rest():
    # levels 1 and 4 misbehave in ways that used to end the whole process (sys.exit, an unprintable error)
    result = run_study(PROBLEM, Faulty({1: "exit", 4: "unprintable"}), refinement=Refinement(levels=5, base_cells=4))
    assert [lv.status for lv in result.levels] == ["ok", "failed", "ok", "ok", "failed"]
    # the orders of u hold on levels 0, 2, 3 (the quantities, three coarse levels from 4x4 cells, cannot
    # decide); the failed levels count against the study
    assert all(v.ok for v in result.verdicts if v.norm != "value") and not result.passed
    assert all("levels 0-3" in v.reason for v in result.verdicts if v.norm != "value")
    assert "level 1 failed" in str(result)


def test_ctrl_c_still_stops_the_study():
    # KeyboardInterrupt is the user's, not the solver's: it must not be swallowed as a failed level
    def interrupted(case):
        raise KeyboardInterrupt
    with pytest.raises(KeyboardInterrupt):
        run_study(PROBLEM, interrupted, refinement=Refinement(levels=2))


# -- external programs ----------------------------------------------------------------------------
PROGRAM = r'''
import os, signal, sys, time
import numpy as np

case_path, fault = sys.argv[1], sys.argv[2]
case = {}
for line in open(case_path, encoding="utf-8"):
    if "=" in line and not line.startswith("#"):
        key, value = line.split("=", 1)
        case[key.strip()] = value.strip().strip('"')
out = case["output"]
n = int(case["cells"].strip("[]").split(",")[0]) + 1  # the nodes of the level's grid
g = np.linspace(0.0, 1.0, n)
X, Y = np.meshgrid(g, g, indexing="ij")
x, y = X.ravel(), Y.ravel()
u = np.sin(x) * np.cos(y)
vol = np.full(x.size, 1.0 / x.size)


def csv(path, cols, names):
    np.savetxt(path, np.column_stack(cols), delimiter=",", header=",".join(names), comments="")


if fault == "ok" and out.endswith(".npz"):
    np.savez(out, x=x, y=y, volume=vol, u=u)
elif fault == "ok":
    csv(out, [x, y, vol, u], ["x", "y", "volume", "u"])
elif fault == "exit":
    print("iteration 1: residual 1e-3")
    print("linear solver failed", file=sys.stderr)
    sys.exit(3)
elif fault == "segfault":
    print("about to crash", flush=True)
    os.kill(os.getpid(), signal.SIGSEGV)
elif fault == "hang":
    print("waiting forever", flush=True)
    time.sleep(60)
elif fault == "flood":
    line = "x" * 1023 + "\n"
    for _ in range(30 * 1024):        # 30 MB on stdout
        sys.stdout.write(line)
    sys.stdout.write("LAST LINE\n")
    sys.exit(1)
elif fault == "nan":
    csv(out, [x, y, np.where(x > 0.5, np.nan, u)], ["x", "y", "u"])
elif fault == "inf":
    csv(out, [x, y, u / 0.0], ["x", "y", "u"])
elif fault == "truncated csv":
    csv(out, [x, y, u], ["x", "y", "u"])
    text = open(out).read()
    open(out, "w").write(text[: len(text) - 7])   # the last row cut in the middle of a number
elif fault == "header only":
    open(out, "w").write("x,y,u\n")
elif fault == "truncated npz":
    np.savez(out, x=x, y=y, u=u)
    size = os.path.getsize(out)
    os.truncate(out, size // 2)
elif fault == "ragged npz":
    np.savez(out, x=x, y=y[:-3], u=u)
elif fault == "complex npz":
    np.savez(out, x=x, y=y, u=u + 1j)
elif fault == "text npz":
    np.savez(out, x=x, y=y, u=u.astype(str))
elif fault == "lying npz":  # a member whose header declares 745 GiB
    import io, zipfile
    head = io.BytesIO()
    np.lib.format.write_array_header_1_0(head, {"descr": "<f8", "fortran_order": False, "shape": (10**11,)})
    with zipfile.ZipFile(out, "w") as z:
        z.writestr("x.npy", head.getvalue() + np.zeros(5).tobytes())
elif fault == "object npz":
    np.savez(out, x=x, y=y, u=np.array([None] * x.size, dtype=object))
elif fault == "negative volumes":
    csv(out, [x, y, -vol, u], ["x", "y", "volume", "u"])
elif fault == "too big":
    csv(out, [np.repeat(x, 2000), np.repeat(y, 2000), np.repeat(u, 2000)], ["x", "y", "u"])
elif fault == "no output":
    print("done (forgot to write the solution)")
elif fault == "directory":
    os.mkdir(out)
elif fault == "fifo":
    os.mkfifo(out)
elif fault == "symlink out":
    secret = os.path.join(os.environ["OUTSIDE"], "secret.csv")
    csv(secret, [x, y, u], ["x", "y", "u"])
    os.symlink(secret, out)
elif fault == "plant symlink":
    # replace the next level's folder by a link to a folder outside the study
    here = os.path.dirname(out)
    level = int(case["level"])
    nxt = os.path.join(os.path.dirname(here), os.path.basename(here).replace(f"level-{level}-", f"level-{level + 1}-"))
    os.symlink(os.environ["OUTSIDE"], nxt)
    csv(out, [x, y, u], ["x", "y", "u"])
else:
    raise SystemExit(f"unknown fault {fault}")
'''

# fault -> fragments the recorded reason must contain
EXTERNAL_FAULTS = {
    "ok": None,
    "exit": ["the program exited with code 3", "linear solver failed"],
    "segfault": ["killed by signal SIGSEGV", "about to crash"],
    "hang": ["no result within", "process group was killed", "waiting forever"],
    "flood": ["exited with code 1", "LAST LINE"],
    "nan": ["field 'u' has", "NaN/Inf"],
    "inf": ["NaN/Inf"],
    "truncated csv": ["does not end with a line break", "truncated"],
    "header only": ["has a header but no rows"],
    "truncated npz": ["is not a readable .npz"],
    "ragged npz": ["columns have different lengths"],
    "complex npz": ["column 'u'", "complex"],
    "text npz": ["column 'u'", "not numeric"],
    "object npz": ["is not a readable .npz"],
    "lying npz": ["is not a readable .npz", "Unable to allocate"],
    "negative volumes": ["cell volumes must be non-negative"],
    "too big": ["more than the limit of 20000"],
    "no output": ["wrote no solution", "forgot to write the solution"],
    "directory": ["not a regular file"],
    "fifo": ["not a regular file"],
    "symlink out": ["link"],
    "plant symlink": None,  # this level is fine; the next one must refuse its planted folder
}


def _external(tmp_path, faults, fmt, **kw):
    prog = tmp_path / "faulty_program.py"
    prog.write_text(textwrap.dedent(PROGRAM))
    table = tmp_path / "faults.txt"
    table.write_text("\n".join(f"{level} {fault}" for level, fault in faults.items()))
    wrapper = tmp_path / "wrapper.py"  # picks the fault by level, then runs the program
    wrapper.write_text(textwrap.dedent(f"""
        import runpy, sys
        faults = dict(line.split(" ", 1) for line in open({str(table)!r}).read().splitlines())
        sys.argv = [{str(prog)!r}, sys.argv[1], faults[sys.argv[2]]]
        runpy.run_path({str(prog)!r}, run_name="__main__")
    """))
    return ExternalSolver([PY, str(wrapper), "{case}", "{level}"], fmt=fmt, **kw)


@pytest.fixture
def outside(tmp_path, monkeypatch):
    folder = tmp_path / "outside-the-study"
    folder.mkdir()
    monkeypatch.setenv("OUTSIDE", str(folder))
    return folder


def test_every_external_program_fault_is_recorded_against_its_level(tmp_path, outside):
    npz = {"truncated npz", "ragged npz", "complex npz", "text npz", "object npz", "lying npz"}
    for fmt, names in (("csv", [f for f in EXTERNAL_FAULTS if f not in npz]), ("npz", ["ok", *sorted(npz)])):
        faults = dict(enumerate(names))
        if "plant symlink" in names:  # the level after the planted link runs normally
            faults[len(faults)] = "ok"
        cases = _cases(len(faults))
        study = tmp_path / f"study-{fmt}"
        solver = _external(tmp_path, faults, fmt, timeout=1.5, workdir=str(study), max_bytes=20_000,
                           tail_chars=300)
        tracemalloc.start()  # Python-side memory of the harness while the levels run
        try:
            results = run_levels(solver, cases, _where(cases))
            peak = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        if fmt == "csv":  # with the 30 MB flood (the npz round counts the refused 745 GiB attempt)
            assert peak < 5_000_000, f"the harness held {peak} bytes: program output must not be read whole"
        expected = dict(EXTERNAL_FAULTS)
        if "plant symlink" in names:
            expected["ok"] = None
            planted = max(faults)
            assert not results[planted].ok and "outside the study folder" in results[planted].message
            results = results[:planted]
            faults = {k: v for k, v in faults.items() if k != planted}
        _check_reasons(results, faults, expected)
        for r in results:
            if r.status == "failed":
                assert len(r.message) < 1500, (faults[r.level], len(r.message))  # only the tail of the output
        # the harness wrote nothing outside the study folder (the program wrote secret.csv there itself)
        assert sorted(p.name for p in outside.iterdir()) == ["secret.csv"]


def test_the_study_folder_holds_every_file_even_for_hostile_problem_names(tmp_path, monkeypatch):
    from mmsverify.problem.derive import problem_from_text
    text = (Path(__file__).resolve().parent.parent / "mmsverify" / "problem" / "bundled" / "plate-poisson.toml").read_text()
    text = text.replace('name = "plate-poisson"', 'name = "../../../escaped/../../x"')
    problem = problem_from_text(text, "hostile-name.toml")
    monkeypatch.chdir(tmp_path)
    (tmp_path / "study").mkdir()
    solver = _external(tmp_path, {0: "ok", 1: "ok"}, "csv", workdir=str(tmp_path / "study"))
    before = set(tmp_path.rglob("*"))
    result = run_study(problem, solver, refinement=Refinement(levels=2, base_cells=4))
    assert all(lv.ok for lv in result.levels), [lv.message for lv in result.levels]
    created = set(tmp_path.rglob("*")) - before
    assert created and all((tmp_path / "study") in p.parents for p in created), sorted(map(str, created))


def test_shell_metacharacters_in_the_command_are_passed_literally(tmp_path):
    recorder = tmp_path / "argv.py"
    recorder.write_text(textwrap.dedent("""
        import json, sys
        json.dump(sys.argv[1:], open(sys.argv[1] + ".argv.json", "w"))
        sys.exit(5)
    """))
    literal = ["; touch pwned1", "$(touch pwned2)", "`touch pwned3`", "| touch pwned4", "&& touch pwned5",
               "*", "~", "$HOME", "a b", "'quoted'", '"double"', "\\", "\n", "-rf", "{{case}}"]
    solver = ExternalSolver([PY, str(recorder), "{dir}/x", *literal], cwd=str(tmp_path), workdir=str(tmp_path / "s"))
    (result,) = run_levels(solver, _cases(1), ["metacharacters"])
    assert "exited with code 5" in result.message
    argv_file = next((tmp_path / "s").rglob("x.argv.json"))
    import json
    assert json.loads(argv_file.read_text())[1:] == literal[:-1] + ["{case}"]
    assert not list(tmp_path.rglob("pwned*")), "a shell ran the command"
    with pytest.raises(Exception, match="list of arguments"):
        ExternalSolver("prog {case}; rm -rf /")


def test_a_program_left_running_in_the_background_is_stopped_with_its_level(tmp_path):
    prog = tmp_path / "daemon.py"
    prog.write_text(textwrap.dedent("""
        import os, subprocess, sys
        child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
        open(os.path.join(os.path.dirname(sys.argv[1]), "child.pid"), "w").write(str(child.pid))
        sys.exit(2)
    """))
    solver = ExternalSolver([PY, str(prog), "{case}"], workdir=str(tmp_path / "s"))
    (result,) = run_levels(solver, _cases(1), ["daemon"])
    assert "exited with code 2" in result.message
    pid = int(next((tmp_path / "s").rglob("child.pid")).read_text())
    deadline = time.monotonic() + 5
    while time.monotonic() < deadline:
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except FileNotFoundError:
            break
        if state in ("Z", "X"):
            break
        time.sleep(0.05)
    else:
        os.kill(pid, signal.SIGKILL)
        pytest.fail("the program's background child outlived its level")


def test_output_file_modes_are_not_trusted(tmp_path):
    # a solution file the program made unreadable is a clear failure, not a crash of the harness
    prog = tmp_path / "locked.py"
    prog.write_text(textwrap.dedent(f"""
        import os, sys
        out = [l.split("=", 1)[1].strip().strip('"') for l in open(sys.argv[1]) if l.startswith("output")][0]
        open(out, "w").write("x,y,u\\n0,0,1\\n1,1,1\\n")
        os.chmod(out, {stat.S_IWUSR})
    """))
    solver = ExternalSolver([PY, str(prog), "{case}"], workdir=str(tmp_path / "s"))
    (result,) = run_levels(solver, _cases(1), ["locked"])
    if os.geteuid() == 0:  # root reads any file: the level then simply works
        assert result.ok, result.message
    else:
        assert not result.ok and "Permission denied" in result.message


# -- solvers and programs that try not to end ------------------------------------------------------
# Each case carries a marker of its own: in the command line or environment of every process it
# starts, and as a pid file for children forked without a new command line. After the run, every
# case must have left 0 processes and 0 temporary folders, and the run must have ended within the
# limit plus the kill's grace (a short margin), without a traceback.
HANG = 0.5                 # seconds per level in these cases
MARGIN = 15.0              # seconds on top of the limits: start-up of workers and the kills on a busy machine

# A process that sleeps forever, ignores SIGTERM and records its pid; argv[1] is the case folder
# (which holds the marker in its name, so the command line carries it).
STUBBORN = ("import os, signal, sys, time; signal.signal(signal.SIGTERM, signal.SIG_IGN); "
            "open(os.path.join(sys.argv[1], 'pids', str(os.getpid())), 'w').close()\n"
            "while True:\n    time.sleep(1)")


def _record_pid(folder):
    (Path(folder) / "pids" / str(os.getpid())).touch()


def _stubborn(folder, **kw):
    import subprocess
    return subprocess.Popen([PY, "-c", STUBBORN, str(folder)], **kw)


def _hang_forever():
    while True:
        try:
            time.sleep(10)
        except BaseException:  # noqa: BLE001 - the point of the case
            pass


def _hostile(kind, folder):
    """What a Python solver that will not end does; returns normally for the kinds that leave work behind."""
    import threading
    if kind == "swallow":
        _hang_forever()
    if kind == "cancel alarms":
        if hasattr(signal, "setitimer"):
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, signal.SIG_IGN)
        _hang_forever()
    if kind == "ignore sigterm":
        signal.signal(signal.SIGTERM, signal.SIG_IGN)
        _hang_forever()
    if kind in ("fork and hang", "fork and return"):
        pid = os.fork()
        if pid == 0:  # the child: ignore SIGTERM, record itself, sleep forever, never return into the harness
            try:
                signal.signal(signal.SIGTERM, signal.SIG_IGN)
                _record_pid(folder)
                _hang_forever()
            finally:
                os._exit(0)
        if kind == "fork and hang":
            _hang_forever()
    if kind in ("threads and hang", "threads and return"):
        for _ in range(3):
            threading.Thread(target=_hang_forever).start()  # not daemons: they keep the process alive
        if kind == "threads and hang":
            _hang_forever()
    if kind in ("setsid child and return", "setsid child and hang"):
        _stubborn(folder, start_new_session=True)
        if kind == "setsid child and hang":
            _hang_forever()
    if kind == "double fork":
        pid = os.fork()
        if pid == 0:
            try:
                os.setsid()
                _stubborn(folder)
            finally:
                os._exit(0)  # the daemon's parent leaves; the stubborn grandchild is orphaned
        os.waitpid(pid, 0)
    if kind == "busy loop":
        while True:
            try:
                sum(range(10_000))
            except BaseException:  # noqa: BLE001
                pass
    return None


class Hostile:
    """A solver that misbehaves as ``kinds[level]`` says; case folders under ``root`` (picklable)."""

    def __init__(self, kinds, root):
        self.kinds, self.root = dict(kinds), str(root)

    def __call__(self, case):
        folder = Path(self.root) / f"case-{case.grid.level}"
        _hostile(self.kinds[case.grid.level], folder)
        return fd_solve(case)


HOSTILE_PYTHON = ("swallow", "cancel alarms", "ignore sigterm", "fork and hang", "fork and return",
                  "threads and hang", "threads and return", "setsid child and return", "setsid child and hang",
                  "double fork", "busy loop")
ENDS_NORMALLY = ("fork and return", "threads and return", "setsid child and return", "double fork")


def _case_folders(root, n):
    marker = f"hostile-{os.getpid()}-{time.monotonic_ns()}"
    folders = []
    for k in range(n):
        f = Path(root) / f"{marker}" / f"case-{k}"
        (f / "pids").mkdir(parents=True)
        (f / "tmp").mkdir()
        folders.append(f)
    return Path(root) / marker, folders


def _alive(pid):
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (FileNotFoundError, ProcessLookupError, IndexError):
        return False
    return state not in ("Z", "X")


def _carrying(text):
    """Running processes whose command line or environment holds ``text``."""
    found, needle = [], text.encode()
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit() or int(entry.name) == os.getpid():
            continue
        try:
            if needle in (entry / "cmdline").read_bytes() or needle in (entry / "environ").read_bytes():
                if _alive(entry.name):
                    found.append(int(entry.name))
        except OSError:
            continue
    return found


def _left_behind(folder):
    """Processes of one case still running: those that recorded a pid, or carry the case folder."""
    recorded = [int(p.name) for p in (folder / "pids").iterdir()]
    return sorted({p for p in recorded if _alive(p)} | set(_carrying(str(folder))))


def _assert_all_ended(folders):
    # A SIGKILL is delivered asynchronously: allow the kernel a moment to finish what was sent.
    deadline = time.monotonic() + 5
    while True:
        left = {str(f): _left_behind(f) for f in folders}
        if not any(left.values()) or time.monotonic() > deadline:
            break
        time.sleep(0.05)
    for f, pids in left.items():
        for p in pids:
            try:
                os.kill(p, signal.SIGKILL)  # leave the machine clean before failing
            except ProcessLookupError:
                pass
    assert not any(left.values()), f"processes left behind per case: { {k: v for k, v in left.items() if v} }"


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="counts processes through /proc")
@pytest.mark.parametrize("workers", [None, 2])
def test_python_solvers_that_will_not_end_are_stopped_with_all_they_started(tmp_path, workers):
    root, folders = _case_folders(tmp_path, len(HOSTILE_PYTHON))
    kinds = dict(enumerate(HOSTILE_PYTHON))
    cases = _cases(len(kinds))
    start = time.monotonic()
    results = run_levels(Hostile(kinds, root), cases, _where(cases), workers=workers, timeout=HANG)
    took = time.monotonic() - start
    hanging = sum(k not in ENDS_NORMALLY for k in HOSTILE_PYTHON)
    # every hanging level costs at most its limit and the kill's grace (SIGTERM, then SIGKILL)
    assert took < hanging * (HANG + 2 * GRACE) / (workers or 1) + MARGIN, took
    for r in results:
        kind = kinds[r.level]
        assert "Traceback" not in r.message, (kind, r.message)
        if kind in ENDS_NORMALLY:
            assert r.ok, (kind, r.message)
        else:
            assert r.status == "failed" and f"no result within {HANG:g} s" in r.message, (kind, r.message)
    _assert_all_ended(folders)


HOSTILE_PROGRAMS = {
    "hang": "sleep 600",
    "ignore sigterm": "trap '' TERM; while true; do sleep 1; done",
    "children left behind": "sleep 600 & sleep 600 & exit 0",
    "children ignoring sigterm": "(trap '' TERM; while true; do sleep 1; done) & wait",
    "setsid child": "setsid sleep 600 & exit 0",
    "setsid child and hang": "setsid sleep 600 & sleep 600",
    "setsid python that ignores sigterm": '"$PY" -c "$STUBBORN" "$CASE" & wait',
    "double fork daemon": '( setsid "$PY" -c "$STUBBORN" "$CASE" & ) ; exit 0',
    "huge output": "head -c 30000000 /dev/zero | tr '\\0' x; exit 1",
    "endless output": "yes hostile",
    "closes output and hangs": "exec >/dev/null 2>&1; sleep 600",
    "setsid holder of the pipe": "setsid sh -c 'sleep 600' & exit 0",
}


def _program_solver(folders, **kw):
    """One shell script per case; the case folder (with the marker) is its argument and in its environment."""
    scripts = []
    for f, body in zip(folders, HOSTILE_PROGRAMS.values()):
        script = f / "prog.sh"
        script.write_text(f'#!/bin/sh\n# {f}\nCASE="{f}"\n{body}\n')
        script.chmod(0o755)
        scripts.append(script)
    # the level number picks the case's script
    router = folders[0].parent / "route.sh"
    router.write_text('#!/bin/sh\nexec "$ROOT/case-$1/prog.sh" "$ROOT/case-$1"\n')
    router.chmod(0o755)
    env = {"PY": PY, "STUBBORN": STUBBORN, "ROOT": str(folders[0].parent)}
    return ExternalSolver([str(router), "{level}"], env=env, **kw)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="counts processes through /proc")
@pytest.mark.parametrize("where", ["program's own limit, in this process", "study limit, in workers"])
def test_external_programs_that_will_not_end_are_stopped_with_all_they_started(tmp_path, monkeypatch, where):
    import tempfile
    root, folders = _case_folders(tmp_path, len(HOSTILE_PROGRAMS))
    monkeypatch.setenv("TMPDIR", str(root / "tmp"))
    monkeypatch.setattr(tempfile, "tempdir", None)
    (root / "tmp").mkdir()
    kinds = dict(enumerate(HOSTILE_PROGRAMS))
    cases = _cases(len(kinds))
    start = time.monotonic()
    if where.startswith("program"):
        results = run_levels(_program_solver(folders, timeout=HANG), cases, _where(cases))
    else:
        results = run_levels(_program_solver(folders), cases, _where(cases), workers=2, timeout=HANG)
    took = time.monotonic() - start
    assert took < len(kinds) * (HANG + 2 * GRACE) + MARGIN, took
    for r in results:
        kind = kinds[r.level]
        assert "Traceback" not in r.message, (kind, r.message)
        assert r.status == "failed", (kind, r.message)  # none of them writes a solution
    assert not list((root / "tmp").iterdir()), "temporary level folders left behind"
    _assert_all_ended(folders)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="counts processes through /proc")
@pytest.mark.parametrize("limit", ["default", "none"])  # the program runs in a worker, or in the tool itself
@pytest.mark.parametrize("sig", ["SIGTERM", "SIGHUP", "SIGINT"])
def test_the_tool_stopped_by_a_signal_leaves_no_process_and_no_folder(tmp_path, sig, limit):
    import subprocess
    root, (folder,) = _case_folders(tmp_path, 1)
    (root / "tmp").mkdir()
    script = folder / "prog.sh"
    # the program announces that it runs (so the signal lands while it does), then hides in a new session
    script.write_text(f'#!/bin/sh\n# {folder}\n"$PY" -c "$STUBBORN" "{folder}" &\nsetsid "$PY" -c "$STUBBORN" '
                      f'"{folder}" &\ntouch "{folder}/started"\nwait\n')
    script.chmod(0o755)
    env = dict(os.environ, TMPDIR=str(root / "tmp"), PY=PY, STUBBORN=STUBBORN,
               PYTHONPATH=os.pathsep.join([str(Path(__file__).resolve().parent.parent),
                                           os.environ.get("PYTHONPATH", "")]))
    # The tool starts as a terminal's Ctrl-C would find it: SIGINT at Python's default handler. A test run
    # started in the background by a shell ignores SIGINT, and its children inherit that; by convention
    # the tool then keeps ignoring it, which is not what this test is about.
    launch = [PY, "-c", "import runpy, signal; signal.signal(signal.SIGINT, signal.default_int_handler); "
                        "runpy.run_module('mmsverify', run_name='__main__', alter_sys=True)"]
    proc = subprocess.Popen(launch + ["run", PROBLEM, "--levels", "2", "--external", f"{script} {{case}}"]
                            + (["--timeout", limit] if limit != "default" else []),
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 60
        while not (folder / "started").exists() or len(list((folder / "pids").iterdir())) < 2:
            assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
            time.sleep(0.02)  # polling for the program's own signal, not a delay the result depends on
        proc.send_signal(getattr(signal, sig))
        _, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:  # the test failed: end the tool (SIGTERM lets it clean up) and what it started
            proc.terminate()
            try:
                proc.communicate(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.communicate()
            _assert_all_ended([folder])
    assert "Traceback" not in err.decode(), err.decode()
    assert proc.returncode in (128 + getattr(signal, sig), 130), (proc.returncode, err.decode())
    assert not list((root / "tmp").iterdir()), "temporary level folders left behind"
    _assert_all_ended([folder])
