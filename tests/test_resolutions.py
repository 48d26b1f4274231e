"""Resolutions the solver chooses: lists of resolutions and what a level actually ran."""

import numpy as np
import pytest

from mmsverify import GridError, ProblemError, Solution, run_study
from mmsverify.cli import main
from mmsverify.problem.derive import problem_from_text
from mmsverify.execute.resolutions import listed_grids, parse_cells
from mmsverify.study.settings import Refinement

TEXT = ('[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "sin(2*x) * cos(y)"\n[operator]\nkind = "poisson"\n'
        '[order]\nspace = 2\n')


def test_parse_cells():
    assert parse_cells("6, 10,17,29") == [6, 10, 17, 29]
    assert parse_cells("8") == 8
    with pytest.raises(GridError, match="comma-separated"):
        parse_cells("6;10")


def test_a_list_must_refine():
    p = problem_from_text(TEXT)
    with pytest.raises(GridError, match="does not refine"):
        listed_grids(p, [10, 6, 17])
    with pytest.raises(GridError, match="at least 2"):
        listed_grids(p, [10])
    with pytest.raises(GridError, match="entry 1"):
        listed_grids(p, [6, 0])


def test_cells_in_the_study_table_and_the_command_line(tmp_path, capsys):
    f = tmp_path / "p.toml"
    f.write_text(TEXT + "[study]\ncells = [6, 10, 17]\n")
    r = run_study(str(f), "poisson2d")
    assert [lv.grid.cells for lv in r.levels] == [(6, 6), (10, 10), (17, 17)]
    assert r.passed
    assert main(["run", "plate-poisson", "poisson2d", "--cells", "6,10,17,29"]) == 0
    out = capsys.readouterr().out
    for n in (6, 10, 17, 29):
        assert f"{n}x{n} cells" in out
    assert main(["run", "plate-poisson", "poisson2d", "--cells", "6"]) == 2
    assert "--base-cells" in capsys.readouterr().err


def test_a_bad_cells_entry_names_the_file(tmp_path):
    f = tmp_path / "p.toml"
    f.write_text(TEXT + "[study]\ncells = [6]\n")
    with pytest.raises(ProblemError, match="at least 2 resolutions"):
        run_study(str(f), "poisson2d")


class _OwnMesh:
    """Exact values plus an O(h^2) error on a mesh of its own: n + n//2 points per direction, h reported."""

    formal_order = 2

    def __init__(self, report=True):
        self.report = report

    def __call__(self, case):
        n = case.grid.cells[0] + case.grid.cells[0] // 2
        h = 1.0 / n
        x = np.linspace(h / 2, 1 - h / 2, n)
        x, y = np.meshgrid(x, x, indexing="ij")
        u = case.mms.exact("u", x, y) + h**2 * np.cos(x)
        return Solution(values={"u": u}, points=(x, y), weights=h * h, h=h if self.report else None,
                        unknowns=n * n)


def test_the_reported_h_and_unknowns_are_what_the_table_shows():
    r = run_study(problem_from_text(TEXT), _OwnMesh(), refinement=Refinement(cells=[4, 6, 10]))
    assert [lv.h for lv in r.levels] == pytest.approx([1 / 6, 1 / 9, 1 / 15])
    assert r.passed
    assert "6x6 cells, 81 unknowns" in str(r)


def test_a_wrong_unknown_count_fails_the_level():
    class Bad(_OwnMesh):
        def __call__(self, case):
            s = super().__call__(case)
            return Solution(values=s.values, points=s.points, unknowns=-3)

    r = run_study(problem_from_text(TEXT), Bad(), refinement=Refinement(cells=[4, 6]))
    assert not any(lv.ok for lv in r.levels)
    assert "unknowns must be a positive whole number" in r.levels[0].message
