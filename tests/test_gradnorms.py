"""Gradient norms (H1 seminorm, H1, energy) and formal orders per norm."""

import numpy as np
import pytest

from mmsverify import Solution, SolverError, run_study
from mmsverify.problem.derive import derive
from mmsverify.execute.gradnorms import gradient_errors, norm_rules
from mmsverify.problem.derive import problem_from_text
from mmsverify.study.settings import Refinement

TEXT = '[domain]\nx = [0, 1]\ny = [0, 1]\n[fields]\nu = "x**3 * y + sin(y)"\n[operator]\nkind = "diffusion"\nk = 2.0\n'


def test_exact_gradient_is_the_derivative():
    m = derive(problem_from_text(TEXT))
    x, y = np.array([0.2, 0.5]), np.array([0.3, 0.9])
    gx, gy = m.gradient("u", x, y)
    np.testing.assert_allclose(gx, 3 * x**2 * y)        # d/dx of x^3 y + sin y
    np.testing.assert_allclose(gy, x**3 + np.cos(y))


def test_gradient_norms_of_a_known_error():
    # an error of (0.1, 0) in the gradient everywhere: H1 seminorm 0.1, energy sqrt(k) * 0.1 (common practice)
    m = derive(problem_from_text(TEXT))
    x, y = np.meshgrid(np.linspace(0, 1, 5), np.linspace(0, 1, 4), indexing="ij")
    gx, gy = m.gradient("u", x, y)
    e = gradient_errors(m, "u", (gx + 0.1, gy), (x, y), np.ones_like(x), l2=0.2)
    assert e["H1semi"] == pytest.approx(0.1)
    assert e["H1"] == pytest.approx(np.hypot(0.2, 0.1))
    assert e["energy"] == pytest.approx(np.sqrt(2.0) * 0.1)


def test_norm_orders_forms_and_errors():
    p = problem_from_text(TEXT)

    class Both:
        norm_orders = {"L2": 3, "H1semi": 2}

    class PerField:
        norm_orders = {"u": {"energy": 1}, "other": {"L2": 5}}

    class Bad:
        norm_orders = {"H2": 1}

    assert norm_rules(Both(), p, "s") == {"L2": {"space": 3.0}, "H1semi": {"space": 2.0}}
    assert norm_rules(PerField(), p, "s") == {"u energy": {"space": 1.0}}
    with pytest.raises(SolverError, match="unknown norm 'H2'"):
        norm_rules(Bad(), p, "s")


class _Sampled:
    """Exact values at cell centres with a gradient carrying an O(h) error: values at order 2, gradient at 1."""

    norm_orders = {"L2": 2, "H1semi": 1}
    judged_norms = {"u": ("L2",)}

    def __init__(self, wrong_gradient_order=False):
        self.wrong = wrong_gradient_order

    def __call__(self, case):
        g, m = case.grid, case.mms
        x, y = (np.linspace(lo + d / 2, hi - d / 2, n) for lo, hi, d, n in
                zip(g.lower, g.upper, g.spacing, g.cells))
        x, y = np.meshgrid(x, y, indexing="ij")
        h = g.spacing[0]
        gx, gy = m.gradient("u", x, y)
        bump = h**2 if self.wrong else h
        return Solution(values={"u": m.exact("u", x, y) + h**2 * np.sin(x)}, points=(x, y),
                        weights=h * g.spacing[1], gradients={"u": (gx + bump * np.cos(y), gy)})


def test_each_norm_is_judged_at_its_own_order():
    r = run_study(problem_from_text(TEXT), _Sampled(), refinement=Refinement(levels=3, base_cells=4))
    assert {(v.norm, v.formal, v.status) for v in r.verdicts} == {("L2", 2, "confirmed"), ("H1semi", 1, "confirmed")}
    assert r.passed
    wrong = run_study(problem_from_text(TEXT), _Sampled(wrong_gradient_order=True), refinement=Refinement(levels=3, base_cells=4))
    assert not wrong.passed
    assert [v.norm for v in wrong.verdicts if not v.ok] == ["H1semi"]


def test_gradients_of_the_wrong_shape_fail_the_level():
    class Short(_Sampled):
        def __call__(self, case):
            s = super().__call__(case)
            return Solution(values=s.values, points=s.points, gradients={"u": s.gradients["u"][:1]})

    r = run_study(problem_from_text(TEXT), Short(), refinement=Refinement(levels=2, base_cells=4))
    assert all(not lv.ok for lv in r.levels)
    assert "must hold 2 arrays" in r.levels[0].message


def test_orders_per_norm_in_the_problem_file_override_the_solver():
    # [order.by] rules give a gradient norm its order; they win over the solver's norm_orders
    text = TEXT + '[order]\nspace = 2\n[order.by]\n"u H1semi" = {space = 1}\n'

    class Plain(_Sampled):
        norm_orders = None

    r = run_study(problem_from_text(text), Plain(), refinement=Refinement(levels=3, base_cells=4))
    assert {(v.norm, v.formal) for v in r.verdicts} == {("L2", 2), ("H1semi", 1)} and r.passed, str(r)

    class Claims(_Sampled):
        norm_orders = {"H1semi": 2}

    assert run_study(problem_from_text(text), Claims(), refinement=Refinement(levels=3, base_cells=4)).passed


def test_gradient_norms_reach_every_report_and_come_back_from_json(tmp_path):
    # The Markdown, HTML and CSV tables show the gradient norms the text table shows, and a study file
    # with a verdict in the H1 seminorm is read back and judged again to the same verdicts.
    from mmsverify.outputs.studyfile import csv_text, read_json, write_json
    from mmsverify.render.html import html_text
    from mmsverify.render.markdown import markdown_text
    from mmsverify.render.notebook import study_html
    r = run_study(problem_from_text(TEXT), _Sampled(), refinement=Refinement(levels=3, base_cells=4))
    for n in ("H1semi", "H1", "energy"):
        for text in (str(r), markdown_text(r), html_text(r, figures=False), study_html(r, figure=False)):
            assert f"{n} error" in text
    rows = csv_text(r).splitlines()
    assert sum(",u,H1semi," in row for row in rows) == 3          # one per level
    write_json(r, tmp_path / "study.json")
    back = read_json(tmp_path / "study.json")
    assert [(v.norm, v.status) for v in back.verdicts] == [(v.norm, v.status) for v in r.verdicts]
    assert ("H1semi", "confirmed") in [(v.norm, v.status) for v in back.verdicts]
