"""Solutions written by a program as VTU (meshio): fields, points and cell volumes read from the mesh."""

import sys
from pathlib import Path

import numpy as np
import pytest

meshio = pytest.importorskip("meshio")

from mmsverify import load_problem, run_study  # noqa: E402
from mmsverify.execute.external import ExternalSolver, read_solution  # noqa: E402
from mmsverify.execute.meshfiles import cell_volumes  # noqa: E402
from mmsverify.study.settings import Judging, Refinement

PROGRAM = str(Path(__file__).parent / "data" / "vtu_program.py")


def test_cell_volumes_of_each_supported_cell():
    p = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    assert cell_volumes(p, "tetra", np.array([[0, 1, 2, 3]]))[0] == pytest.approx(1 / 6)   # common practice
    assert cell_volumes(p[:, :2], "triangle", np.array([[0, 1, 2]]))[0] == pytest.approx(0.5)
    assert cell_volumes(p[:, :1], "line", np.array([[0, 1]]))[0] == pytest.approx(1.0)


def test_point_and_cell_data_give_points_and_weights(tmp_path):
    problem = load_problem("plate-poisson")
    pts = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [1.0, 1.0, 0.0], [0.0, 1.0, 0.0], [2.0, 0.0, 0.0]])
    cells = [("quad", np.array([[0, 1, 2, 3]])), ("triangle", np.array([[1, 4, 2]]))]
    meshio.Mesh(pts, cells, point_data={"u": np.arange(5.0)}).write(tmp_path / "p.vtu")
    sol = read_solution(tmp_path / "p.vtu", problem)
    # lumped vertex weights: each cell shares its area equally among its nodes; the total is the area 1.5
    np.testing.assert_allclose(sol["volume"], [0.25, 0.25 + 0.5 / 3, 0.25 + 0.5 / 3, 0.25, 0.5 / 3])
    meshio.Mesh(pts, cells, cell_data={"u": [np.array([1.0]), np.array([2.0])]}).write(tmp_path / "c.vtu")
    sol = read_solution(tmp_path / "c.vtu", problem)
    np.testing.assert_allclose(sol["volume"], [1.0, 0.5])
    np.testing.assert_allclose(sol["points"][0], [0.5, 4 / 3])
    np.testing.assert_allclose(sol["values"]["u"], [1.0, 2.0])


def test_a_broken_vtu_fails_its_level_with_the_reason(tmp_path):
    (tmp_path / "b.vtu").write_text("<VTKFile>not really</VTKFile>")
    with pytest.raises(Exception, match="not a readable mesh file"):
        read_solution(tmp_path / "b.vtu", load_problem("plate-poisson"))


@pytest.mark.parametrize("mode", ["cell", "point"])
def test_an_external_program_writing_vtu_is_verified_end_to_end(mode, tmp_path):
    solver = ExternalSolver([sys.executable, PROGRAM, "{case}", mode], fmt="vtu", workdir=str(tmp_path / mode))
    r = run_study("plate-poisson", solver, refinement=Refinement(levels=3, base_cells=6), judging=Judging(formal_order=2))
    assert r.passed, str(r)
    wrong = ExternalSolver([sys.executable, PROGRAM, "{case}", mode, "first"], fmt="vtu",
                           workdir=str(tmp_path / (mode + "1")))
    assert not run_study("plate-poisson", wrong, refinement=Refinement(levels=3, base_cells=6), judging=Judging(formal_order=2)).passed
