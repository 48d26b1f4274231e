"""External programs as solvers: case files, process control, solution files, the C demo."""

import json
from pathlib import Path
import shutil
import subprocess
import sys
import textwrap
import time
import tomllib

import numpy as np
import pytest

import mmsverify
from mmsverify import Case, SolverError, derive, plan_grids, run_study
from mmsverify.outputs.export import write_export
from mmsverify.execute.external import ExternalSolver, ProgramFailed, expand_command, read_solution, write_case
from mmsverify.study.settings import Refinement

REPO = Path(__file__).resolve().parent.parent
PY = sys.executable


def _case(problem="plate-poisson", level=1, **opts):
    grid = plan_grids(problem, levels=level + 2)[level]
    return Case(grid, derive(problem), {"mode": "combined", **opts})


def _program(tmp_path, body, name="prog.py"):
    """A small Python program used as the external solver (it imports numpy only, to start fast)."""
    path = tmp_path / name
    path.write_text("import sys, json, os, time, tomllib\nimport numpy as np\n"
                    "def read_case(p):\n    return tomllib.loads(open(p).read())\n"
                    "def exact(x, y):  # plate-poisson.toml [fields] u\n"
                    "    return np.sin(0.7 * np.pi * x + 0.2) * np.cos(1.3 * np.pi * y) + np.exp(0.5 * x * y)\n"
                    + textwrap.dedent(body))
    return path


# -- case files and commands ----------------------------------------------
def test_case_file_is_flat_toml_with_grid_boundaries_and_parameters(tmp_path):
    case = _case(level=1)
    path = write_case(case, tmp_path, tmp_path / "solution.csv", params={"omega": 1.5, "scheme": "sor"})
    data = tomllib.loads(path.read_text())
    assert data["cells"] == [16, 16] and data["lower"] == [0.0, 0.0] and data["upper"] == [1.0, 1.0]
    assert data["level"] == 1 and data["h"] == 1 / 16 and data["output_format"] == "csv"
    assert data["problem_hash"] == case.problem.content_hash()
    assert data["boundary"]["u"] == ["dirichlet", "neumann", "dirichlet", "dirichlet"]  # plate-poisson.toml
    assert data["param"] == {"omega": 1.5, "scheme": "sor"}
    assert all("[" not in line.split("=")[0] for line in path.read_text().splitlines())  # no table headers


def test_case_file_gives_the_robin_coefficient_of_each_robin_side(tmp_path):
    from mmsverify import problem_from_text
    problem = problem_from_text('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x*y + sin(x)"\n'
                                '[boundaries]\nx_max = "robin"\ny_min = "robin"\nrobin = {x_max = 2.5, y_min = 0.5}\n')
    case = Case(plan_grids(problem, levels=2)[0], derive(problem), {"mode": "combined"})
    data = tomllib.loads(write_case(case, tmp_path, tmp_path / "solution.csv").read_text())
    assert data["boundary"]["u"] == ["dirichlet", "robin", "robin", "dirichlet"]
    assert data["robin"] == {"x_max": 2.5, "y_min": 0.5}
    assert "robin" not in tomllib.loads(write_case(_case(), tmp_path, tmp_path / "s.csv").read_text())


def test_case_file_json_and_transient_keys(tmp_path):
    case = _case("slab-heat", level=0)
    data = json.loads(write_case(case, tmp_path, tmp_path / "s.npz", fmt="json").read_text())
    assert data["t_start"] == 0.0 and data["t_end"] == 0.5 and data["steps"] == case.grid.steps
    assert data["dt"] == pytest.approx(0.5 / case.grid.steps) and data["output_format"] == "npz"


def test_command_placeholders():
    assert expand_command(["run", "{case}", "--out={out}", "{{lit}}"], {"case": "c", "out": "o"}) == \
        ["run", "c", "--out=o", "{lit}"]
    with pytest.raises(SolverError, match=r"unknown placeholder \{input\}"):
        ExternalSolver(["prog", "{input}"])
    with pytest.raises(SolverError, match="list of arguments"):
        ExternalSolver("prog {case}")
    with pytest.raises(SolverError, match="format"):
        ExternalSolver(["prog"], fmt="vtk")


# -- reading solutions ----------------------------------------------------
def test_read_csv_npz_and_npy(tmp_path):
    problem = mmsverify.load_problem("plate-poisson")
    (tmp_path / "a.csv").write_text("# comment\nx,y,volume,u,residual\n0,0,0.5,1.0,9\n1,0.5,0.5,2.0,9\n")
    sol = read_solution(tmp_path / "a.csv", problem)
    assert np.allclose(sol["points"][1], [0, 0.5]) and np.allclose(sol["values"]["u"], [1, 2])
    assert np.allclose(sol["volume"], 0.5) and sol["ignored"] == ["residual"]
    np.savez(tmp_path / "b.npz", points=np.array([[0.1, 0.2], [0.3, 0.4], [0.5, 0.6]]), u=np.ones(3), time=0.5)
    sol = read_solution(tmp_path / "b.npz", problem)
    assert np.allclose(sol["points"][0], [0.1, 0.3, 0.5]) and sol["volume"] is None and sol["time"] == 0.5
    arr = np.zeros(4, dtype=[("x", float), ("y", float), ("u", float)])
    np.save(tmp_path / "c.npy", arr)
    assert read_solution(tmp_path / "c.npy", problem)["values"]["u"].shape == (4,)


@pytest.mark.parametrize("content, kind, text", [
    ("x,y,u\n0,0,1\n1,1\n", "bad output", "rows do not match"),
    ("x,y,u\n0,0,nan\n1,1,2\n", "nan", "1 NaN/Inf"),
    ("x,u\n0,1\n", "bad output", r"coordinate\(s\) \['y'\]"),
    ("x,y,p\n0,0,1\n", "bad output", "no column for any field"),
    ("", "bad output", "is empty"),
])
def test_bad_csv_is_reported(tmp_path, content, kind, text):
    (tmp_path / "s.csv").write_text(content)
    with pytest.raises(ProgramFailed, match=text) as info:
        read_solution(tmp_path / "s.csv", mmsverify.load_problem("plate-poisson"))
    assert info.value.kind == kind


def test_size_limit_and_plain_npy_are_refused(tmp_path):
    problem = mmsverify.load_problem("plate-poisson")
    (tmp_path / "s.csv").write_text("x,y,u\n" + "0,0,1\n" * 100)
    with pytest.raises(ProgramFailed, match="more than the limit"):
        read_solution(tmp_path / "s.csv", problem, max_bytes=100)
    np.savez_compressed(tmp_path / "z.npz", x=np.zeros(10**6), y=np.zeros(10**6), u=np.zeros(10**6))
    with pytest.raises(ProgramFailed, match="more than the limit"):  # the unpacked size counts
        read_solution(tmp_path / "z.npz", problem, max_bytes=10**6)
    np.save(tmp_path / "p.npy", np.zeros((3, 3)))
    with pytest.raises(ProgramFailed, match="structured array"):
        read_solution(tmp_path / "p.npy", problem)


# -- running programs -----------------------------------------------------
def test_points_and_h_of_an_unstructured_mesh(tmp_path):
    # Cell centroids of a jittered triangulation with their areas. The level's size must be
    # h = (V/N)**(1/d) (Celik et al. 2008, J. Fluids Eng. 130:078001, eq. 1): here V = 1 and
    # N = 2 n**2 triangles. The "solver" is the exact solution plus an error of size h**2 at its own
    # points, so the study sees order 2 only if errors are measured at those points.
    prog = _program(tmp_path, """
        from scipy.spatial import Delaunay
        case = read_case(sys.argv[1])
        n = case["cells"][0]
        g = np.linspace(0.0, 1.0, n + 1)
        X, Y = np.meshgrid(g, g, indexing="ij")
        rng = np.random.default_rng(n)
        inner = (X > 0) & (X < 1) & (Y > 0) & (Y < 1)
        X[inner] += rng.uniform(-0.2, 0.2, inner.sum()) / n
        Y[inner] += rng.uniform(-0.2, 0.2, inner.sum()) / n
        pts = np.column_stack([X.ravel(), Y.ravel()])
        tri = pts[Delaunay(pts).simplices]
        c = tri.mean(axis=1)
        a, b = tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]
        area = 0.5 * np.abs(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
        h = np.sqrt(area.sum() / area.size)
        u = exact(c[:, 0], c[:, 1]) + h**2 * np.cos(3 * c[:, 0])
        np.savez(case["output"], points=c, volume=area, u=u)
    """)
    solver = ExternalSolver([PY, str(prog), "{case}"], fmt="npz", spacing="volumes")
    result = run_study("plate-poisson", solver, refinement=Refinement(levels=3))
    hs = [lv.h for lv in result.levels]
    assert all(lv.ok for lv in result.levels)
    for lv in result.levels:  # two triangles per square cell of side 1/n
        assert lv.h == pytest.approx(np.sqrt(0.5) / lv.grid.cells[0])
        assert lv.n_points == 2 * lv.grid.cells[0] ** 2
    assert hs[0] / hs[1] == pytest.approx(2.0)
    assert result.passed, str(result)


def test_timeout_kills_the_whole_process_group(tmp_path):
    prog = _program(tmp_path, """
        import subprocess
        child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(120)"])
        open(os.path.join(os.path.dirname(sys.argv[1]), "child.pid"), "w").write(str(child.pid))
        print("started child", child.pid, flush=True)
        time.sleep(120)
    """)
    solver = ExternalSolver([PY, str(prog), "{case}"], timeout=1.5, workdir=str(tmp_path / "study"))
    start = time.monotonic()
    with pytest.raises(ProgramFailed, match="no result within 1.5 s") as info:
        solver(_case(level=0))
    assert time.monotonic() - start < 10
    assert info.value.kind == "timeout" and "started child" in str(info.value)
    pid = int(next((tmp_path / "study").rglob("child.pid")).read_text())
    assert _gone(pid), "the program's child survived the time-out"


def _gone(pid, wait=5.0):
    end = time.monotonic() + wait
    while time.monotonic() < end:
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except (FileNotFoundError, ProcessLookupError):
            return True
        if state in ("Z", "X"):  # exited, waiting to be reaped by its new parent
            return True
        time.sleep(0.05)
    return False


def test_crash_missing_output_and_missing_program_are_reported_with_the_output_tail(tmp_path):
    crash = _program(tmp_path, """
        for i in range(200):
            print("iteration", i)
        print("matrix is singular", file=sys.stderr)
        sys.exit(3)
    """, "crash.py")
    with pytest.raises(ProgramFailed, match="exited with code 3") as info:
        ExternalSolver([PY, str(crash), "{case}"], tail_chars=200)(_case(level=0))
    assert info.value.kind == "crash" and "matrix is singular" in info.value.tail
    assert "iteration 0\n" not in info.value.tail  # only the tail is kept
    silent = _program(tmp_path, "print('done')\n", "silent.py")
    with pytest.raises(ProgramFailed, match="wrote no solution.csv") as info:
        ExternalSolver([PY, str(silent), "{case}"])(_case(level=0))
    assert info.value.kind == "no output"
    with pytest.raises(ProgramFailed, match="no such program"):
        ExternalSolver([str(tmp_path / "missing-program"), "{case}"])(_case(level=0))


def test_failing_levels_are_recorded_and_the_rest_still_judged(tmp_path):
    # levels 0-3 write exact + h^2 error; level 1 crashes and level 4 writes NaN
    prog = _program(tmp_path, """
        case = read_case(os.environ["MMSVERIFY_CASE"])
        if case["level"] == 1:
            print("segmentation fault (simulated)"); sys.exit(139)
        n = case["cells"][0]; g = np.linspace(0, 1, n + 1)
        X, Y = np.meshgrid(g, g, indexing="ij")
        u = exact(X, Y) + np.sin(X + Y) / n**2
        if case["level"] == 4:
            u[3, 3] = np.nan
        np.savetxt(case["output"], np.column_stack([X.ravel(), Y.ravel(), u.ravel()]), delimiter=",",
                   header="x,y,u", comments="")
    """)
    result = run_study("plate-poisson", ExternalSolver([PY, str(prog)]), refinement=Refinement(levels=5, base_cells=4))
    status = [lv.status for lv in result.levels]
    assert status == ["ok", "failed", "ok", "ok", "failed"]
    assert "exited with code 139" in result.levels[1].message
    assert "segmentation fault (simulated)" in result.levels[1].message
    assert "NaN" in result.levels[4].message
    # judged on levels 0, 2 and 3; failed levels are defects
    assert all(v.ok for v in result.verdicts if v.field == "u") and not result.passed
    assert "levels 0-3" in result.verdicts[0].reason


# -- the C demo -----------------------------------------------------------
@pytest.fixture(scope="module")
def c_demo(tmp_path_factory):
    if shutil.which("gcc") is None:
        pytest.skip("needs the system C compiler gcc")
    build = tmp_path_factory.mktemp("c-demo")
    write_export("plate-poisson", "c", build / "mms_problem.h")
    run = subprocess.run(["gcc", "-std=c99", "-pedantic", "-Wall", "-Wextra", "-Werror", "-O2", f"-I{build}",
                          str(REPO / "solvers_demo" / "c" / "poisson2d.c"), "-o", str(build / "poisson2d"), "-lm"],
                         capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    return build / "poisson2d"


def test_c_demo_reaches_order_two_through_the_runner(c_demo, tmp_path):
    solver = ExternalSolver([str(c_demo), "{case}"], workdir=str(tmp_path), timeout=60)
    result = run_study("plate-poisson", solver, refinement=Refinement(levels=4))
    assert result.passed, str(result)
    for v in result.verdicts:
        assert abs(v.observed - 2) < 0.1  # plate-poisson.toml [order] space = 2, tolerance 0.1
    # the same 5-point scheme with ghost-node Neumann as the bundled Python solver: same discrete errors
    python = run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=4))
    for c_level, py_level in zip(result.levels, python.levels):
        assert c_level.errors["u"]["L2"] == pytest.approx(py_level.errors["u"]["L2"], rel=1e-6)
    log = next(tmp_path.rglob("level-3-64x64/output.log")).read_text()
    assert mmsverify.load_problem("plate-poisson").content_hash() in log


def test_c_demo_failure_to_converge_is_recorded(c_demo):
    solver = ExternalSolver([str(c_demo), "{case}"], params={"max_sweeps": 20})
    result = run_study("plate-poisson", solver, refinement=Refinement(levels=2))
    assert not any(lv.ok for lv in result.levels) and not result.passed
    assert "exited with code 3" in result.levels[0].message
    assert "no convergence within param.max_sweeps" in result.levels[0].message


def test_c_demo_from_the_command_line_with_workers_and_cache(c_demo, tmp_path, capsys):
    from mmsverify.cli import main
    argv = ["run", "plate-poisson", "--external", f"{c_demo} {{case}}", "--workers", "2",
            "--cache", str(tmp_path / "cache"), "--json", str(tmp_path / "study.json")]
    assert main(argv) == 0
    assert "PASS  plate-poisson  solved by  external:poisson2d" in capsys.readouterr().out
    assert len(list((tmp_path / "cache" / "runs").rglob("case.toml"))) == 4  # the study folder by default
    assert main(argv) == 0  # the rerun takes every level from the cache
    data = json.loads((tmp_path / "study.json").read_text())
    assert all(lv["message"].startswith("reused from the level cache") for lv in data["levels"])
    assert main(["run", "plate-poisson", "poisson2d", "--external", "x {case}"]) == 2


# -- the output log on disk -------------------------------------------------
FLOOD = """
case = read_case(sys.argv[1])
for i in range(int(sys.argv[2])):
    print(f"line {i:07d} " + "." * 40)
print("LAST LINE", flush=True)
g = np.linspace(0, 1, case["cells"][0] + 1)
X, Y = np.meshgrid(g, g, indexing="ij")
np.savetxt(case["output"], np.column_stack([X.ravel(), Y.ravel(), exact(X, Y).ravel()]), delimiter=",",
           header="x,y,u", comments="")
"""


def _flood_log(tmp_path, lines, **options):
    prog = _program(tmp_path, FLOOD, "flood.py")
    study = tmp_path / f"study-{lines}"
    solver = ExternalSolver([PY, str(prog), "{case}", str(lines)], workdir=str(study), **options)
    assert solver(_case(level=0)).values["u"].size == 9 * 9  # the level itself is unaffected
    printed = b"".join(f"line {i:07d} {'.' * 40}\n".encode() for i in range(lines)) + b"LAST LINE\n"
    return next(study.rglob("output.log")).read_bytes(), printed


def test_output_log_keeps_head_and_tail_of_a_flood(tmp_path):
    log, printed = _flood_log(tmp_path, 20_000, max_log_bytes=10_000)  # about 1 MB printed
    head, marker, tail = log.partition(b"\n... ")
    assert head == printed[:5000] and tail.endswith(printed[-5000:]) and tail.endswith(b"LAST LINE\n")
    omitted = len(printed) - 10_000
    assert marker and tail.startswith(f"{omitted} bytes omitted (".encode())
    assert len(log) < 10_000 + 200
    with pytest.raises(SolverError, match="max_log_bytes"):
        ExternalSolver([PY, "x"], max_log_bytes=0)


def test_output_log_is_bounded_by_default_and_whole_when_short(tmp_path):
    log, printed = _flood_log(tmp_path, 60_000)  # about 3 MB printed
    assert len(printed) > 3 * (1 << 20) // 2 and len(log) < (1 << 20) + 200
    assert log.startswith(printed[:1000]) and log.endswith(printed[-1000:]) and b" bytes omitted (" in log
    log, printed = _flood_log(tmp_path, 100)
    assert log == printed  # under the limit: byte for byte, no marker
