"""The seeded-mistake catalogue: every order-changing mistake is flagged, no correct solver is.

The design follows the blind mistake test of Knupp & Salari 2003 (Verification
of Computer Codes in Computational Science and Engineering): mistakes are
seeded into working codes, some of which an order-of-accuracy test must catch
and some of which (no effect on the converged answer, or an error of the same
order as the scheme) it cannot. The verdict sees only observed and formal
orders. Section and chapter numbers cited beside the checks are from memory.
"""

import json

import numpy as np
import pytest

from mmsverify import MMSError
from mmsverify.cli import main
from solvers_demo.catalogue import ENTRIES, KINDS, entries
from solvers_demo.detection import run_catalogue
from solvers_demo.equal_cost import compare_at_equal_cost, plot_equal_cost
from solvers_demo.fd.advection import FDAdvectionDiffusion


@pytest.fixture(scope="session")
def report():
    return run_catalogue()


def test_catalogue_has_enough_switchable_mistakes():
    mistakes = entries(kind="mistake")
    assert len(mistakes) >= 20  # the task asks for at least 20
    for e in mistakes:
        # a mistake is a switch on a working solver, not a copy of it
        assert e.solver.mistake in type(e.solver).MISTAKES
        assert e.description == type(e.solver).MISTAKES[e.solver.mistake]
    assert len({e.key for e in ENTRIES}) == len(ENTRIES)
    assert {e.kind for e in ENTRIES} == set(KINDS)
    assert any(not e.changes_order for e in mistakes)


def test_every_order_changing_mistake_is_flagged(report):
    changing = [o for o in report.outcomes if o.entry.kind == "mistake" and o.entry.changes_order]
    assert len(changing) >= 20
    missed = [o.entry.key for o in changing if not o.flagged]
    assert not missed, str(report)


def test_no_correct_solver_is_flagged(report):
    correct = [o for o in report.outcomes if o.entry.kind == "correct"]
    flagged = [o.entry.key for o in correct if o.flagged]
    assert not flagged, str(report)
    # every correct entry was judged on at least four levels (the plans use 4 or more)
    assert all(o.orders for o in correct)


def test_known_order_losses_show(report):
    by_key = {o.entry.key: o for o in report.outcomes}
    # Ferziger & Peric 2002, section 8.6.2: two-point flux inconsistent on non-orthogonal meshes
    assert by_key["known-two-point-skewed"].flagged
    assert by_key["known-two-point-skewed"].orders["L2"] < 0.5
    # Barth & Jespersen 1989, AIAA 89-0366: limiting at a smooth extremum makes Linf first order
    limiter = by_key["known-limiter-extrema"]
    assert limiter.flagged and abs(limiter.orders["Linf"] - 1.0) < 0.15
    assert not by_key["ok-fv-limited-l1"].flagged


def test_first_order_mistakes_observe_about_one(report):
    # a mistake of truncation error O(h) in a second-order scheme shows as order one
    # (Knupp & Salari 2003: the observed order drops to the order of the mistake)
    ones = [o for o in report.outcomes if o.entry.kind == "mistake" and o.entry.expected == "2 -> 1"]
    assert len(ones) >= 10
    for o in ones:
        assert 0.85 <= o.orders["L2"] <= 1.35, (o.entry.key, o.orders)


def test_newton_jacobian_mistake_is_invisible_to_the_order_test(report):
    by_key = {o.entry.key: o for o in report.outcomes}
    bad, good = by_key["burgers-jacobian-entry"], by_key["ok-burgers"]
    assert not bad.flagged and bad.agrees
    # Kelley 2003, Solving Nonlinear Equations with Newton's Method, ch. 1: an inexact Jacobian
    # converges linearly, so it needs more iterations for the same tolerance
    assert bad.info["newton_per_step"] > good.info["newton_per_step"]
    assert "Newton" in bad.detail


def test_report_is_as_expected_and_readable(report, tmp_path):
    assert report.ok, str(report)
    text = str(report)
    assert "correct solvers flagged: 0 of" in text
    assert all(e.key in text for e in ENTRIES)
    md = report.to_markdown()
    assert sum(line.startswith("| ") for line in md.splitlines()) == len(ENTRIES) + 1  # header and rows
    data = report.to_dict()
    json.dumps(data)
    assert data["counts"]["correct solvers flagged"][0] == 0


def test_catalogue_runs_fast_enough(report):
    # the whole catalogue must fit in the test suite (common practice: well under a minute or two)
    assert report.seconds < 90


def test_unknown_entry_is_refused():
    with pytest.raises(MMSError, match="no catalogue entries"):
        entries(keys=["no-such-entry"])


def test_mistakes_command_writes_the_table(tmp_path, capsys):
    out, js = tmp_path / "table.md", tmp_path / "table.json"
    code = main(["mistakes", "--only", "fd-source-shifted", "ok-fd-poisson-2d", "--out", str(out),
                 "--json", str(js)])
    assert code == 0
    assert "| fd-source-shifted | mistake | 2 -> 1 |" in out.read_text()
    assert json.loads(js.read_text())["ok"] is True
    assert "fd-source-shifted" in capsys.readouterr().out


def test_equal_cost_comparison_small(tmp_path):
    schemes = {"upwind": FDAdvectionDiffusion(convection="upwind"), "central": FDAdvectionDiffusion()}
    c = compare_at_equal_cost("estuary-advection", schemes, levels=4, base_cells=8)
    up, central = c.schemes
    assert c.cheaper == "central"
    # LeVeque 2007, section 10.4: first-order upwind error halves per halving of h, central quarters
    assert up.errors[-2] / up.errors[-1] == pytest.approx(2.0, rel=0.15)
    assert central.errors[-2] / central.errors[-1] == pytest.approx(4.0, rel=0.1)
    assert all(t > 0 for t in up.seconds + central.seconds)
    assert up.how == "extrapolated" and central.how == "interpolated"
    assert up.cells_to_target > 10 * central.cells_to_target
    assert "Cheaper to reach 1%: central" in str(c)
    png = plot_equal_cost(c, tmp_path / "cost.png")
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_equal_cost_needs_two_schemes():
    with pytest.raises(MMSError, match="at least two"):
        compare_at_equal_cost("estuary-advection", {"central": FDAdvectionDiffusion()})


def test_equal_cost_reach_rules():
    from solvers_demo.equal_cost import _reach
    # power law e = 1/x between bracketing points: exact in log-log interpolation
    x, how = _reach([1.0, 10.0, 100.0], [1.0, 0.1, 0.01], 0.05)
    assert how == "interpolated" and x == pytest.approx(20.0)
    assert _reach([2.0, 20.0], [0.001, 0.0001], 0.01) == (2.0, "at most")
    x, how = _reach([1.0, 10.0], [1.0, 0.1], 0.001)
    assert how == "extrapolated" and np.isclose(x, 1000.0)
