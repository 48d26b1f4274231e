"""The CI gate for a compiled program, end to end: export, compile, save a baseline, check it.

Also the hash handshake: a program built from the header of another problem
is refused with a message that says to rebuild it.
"""

import json
from pathlib import Path
import shutil
import subprocess

import pytest

from mmsverify.cli import main
from mmsverify.outputs.export import write_export
from mmsverify.problem.record import PROBLEM_DIR

REPO = Path(__file__).resolve().parent.parent
SOURCE = REPO / "solvers_demo" / "c" / "poisson2d.c"
# A half-cell shift of the Dirichlet data: an O(h) error on the boundary, so the scheme drops to first order
# (common practice: an O(h) boundary error caps a second-order interior scheme at first order).
CORRECT_BOUNDARY = "u[k] = mms_exact(0, x, y);"
SHIFTED_BOUNDARY = "u[k] = mms_exact(0, x + 0.5 * hx, y);"


def _compile(folder, source, problem):
    """Export ``problem``'s header into ``folder`` and build ``source`` there as ./poisson2d."""
    write_export(problem, "c", folder / "mms_problem.h")
    run = subprocess.run(["cc", "-std=c99", "-O2", f"-I{folder}", str(source), "-o", str(folder / "poisson2d"),
                          "-lm"], capture_output=True, text=True)
    assert run.returncode == 0, run.stderr


@pytest.fixture
def project(tmp_path, monkeypatch):
    if shutil.which("cc") is None:
        pytest.skip("needs a C compiler (cc)")
    src = tmp_path / "poisson2d.c"
    shutil.copy(SOURCE, src)
    assert CORRECT_BOUNDARY in src.read_text()
    _compile(tmp_path, src, "plate-poisson")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_baseline_of_a_compiled_program_catches_a_boundary_mistake_and_a_stale_build(project, capsys):
    ext = ["--external", "./poisson2d {case}"]
    assert main(["baseline", "save", "plate-poisson", *ext, "-o", "b.json", "--levels", "4", "--quiet"]) == 0
    data = json.loads((project / "b.json").read_text())
    assert data["run"]["external"]["command"] == ["./poisson2d", "{case}"]
    capsys.readouterr()
    # the file names a program, but a baseline does not choose what runs: name it, or confirm it
    assert main(["baseline", "check", "b.json"]) == 2
    assert "--rerun-recorded" in capsys.readouterr().err
    assert main(["baseline", "check", "b.json", "--rerun-recorded"]) == 0
    assert capsys.readouterr().out.startswith("NO REGRESSION")
    assert main(["baseline", "check", "b.json", *ext, "--json", "-"]) == 0
    assert json.loads(capsys.readouterr().out)["passed"] is True

    # a first-order boundary mistake in the source, rebuilt in place: the gate fails with exit 1
    src = project / "poisson2d.c"
    src.write_text(src.read_text().replace(CORRECT_BOUNDARY, SHIFTED_BOUNDARY))
    _compile(project, src, "plate-poisson")
    assert main(["baseline", "check", "b.json", *ext, "--json", "-"]) == 1
    report = json.loads(capsys.readouterr().out)
    orders = [f for f in report["findings"] if f["kind"] == "order"]
    assert orders and all("observed order 1." in f["message"] or "observed order 0." in f["message"]
                          for f in orders)

    # the correct source built from the header of another problem: refused, with the advice to rebuild
    other = project / "other.toml"
    other.write_text((PROBLEM_DIR / "plate-poisson.toml").read_text().replace("a = 0.7", "a = 0.75"))
    _compile(project, SOURCE, other)
    assert main(["baseline", "check", "b.json", *ext]) == 1
    out = capsys.readouterr().out
    assert "built for another problem" in out and "rebuild" in out
    assert "observed 0.00" not in out


def test_report_runs_an_external_program(project, capsys):
    assert main(["report", "plate-poisson", "--external", "./poisson2d {case}", "--levels", "4",
                 "-o", "rep", "--formats", "json,md", "--quiet"]) == 0
    data = json.loads(next((project / "rep").glob("*.json")).read_text())
    assert data["solver"] == "external:poisson2d"
