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
from mmsverify.execute.runner import run_levels
from solvers_demo.fd.poisson import solve as fd_solve

PROBLEM = "plate-poisson"  # 2-D Poisson on the unit square (mmsverify/problem/bundled/plate-poisson.toml)
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
    result = run_study(PROBLEM, Faulty({1: "exit", 4: "unprintable"}), levels=5, base_cells=4)
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
        run_study(PROBLEM, interrupted, levels=2)


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
    result = run_study(problem, solver, levels=2, base_cells=4)
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
