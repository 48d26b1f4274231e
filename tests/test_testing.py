"""The pytest helper: assert_order, the order_check fixture, and the README example."""

import json
import re
import subprocess
import sys
from importlib.metadata import entry_points
from pathlib import Path

import pytest

from mmsverify.testing import OrderCheckError, assert_order, failure_message
from solvers_demo.fd import poisson

README = Path(__file__).resolve().parents[1] / "README.md"


def test_demo_solver_is_second_order(order_check, request):
    # the project's own demo solver, checked the way a user checks theirs
    # (second order: 5-point stencil, ghost-node Neumann; solvers_demo/fd/poisson.py)
    result = order_check("plate-poisson", "poisson2d", order=2, levels=4)
    assert result.passed
    recorded = dict(request.node.user_properties)["mmsverify"]
    assert recorded.startswith("pass: plate-poisson with poisson2d")


def test_seeded_mistake_fails_with_the_table():
    with pytest.raises(OrderCheckError) as info:
        assert_order("plate-poisson", "poisson2d-neumann1", order=2, levels=3)
    text = str(info.value)
    assert text.startswith("order check failed: plate-poisson solved by poisson2d-neumann1, formal order 2")
    assert "u L2: BELOW - observed " in text and "converging to another order" in text
    assert "u Linf" not in text.split("\n\n")[0]  # only the L2 norm was asked for
    assert text.index("u L2: BELOW") < text.index("level  grid")  # the reasons, then the table
    assert isinstance(info.value, AssertionError) and not info.value.result.passed


def _crash_on_fine(case):
    if case.grid.cells[0] > 16:
        raise MemoryError("pretend the finest grid does not fit")
    return poisson.solve(case)


def test_failed_levels_fail_unless_allowed():
    with pytest.raises(AssertionError, match=r"level 2 \(32x32 cells\) failed: .*MemoryError"):
        assert_order("plate-poisson", _crash_on_fine, levels=3)
    result = assert_order("plate-poisson", _crash_on_fine, levels=3, allow_failed_levels=True)
    assert [lv.ok for lv in result.levels] == [True, True, False]


def test_unknown_fields_and_norms_are_named():
    with pytest.raises(AssertionError, match=r"no verdict for fields \['v'\]"):
        assert_order("plate-poisson", "poisson2d", fields="v", levels=2)
    with pytest.raises(ValueError, match="unknown norm"):
        assert_order("plate-poisson", "poisson2d", norms="H1", levels=2)


def test_failure_message_is_none_when_confirmed():
    result = assert_order("plate-poisson", "poisson2d", levels=2, norms=("L1", "L2", "Linf"))
    assert failure_message(result, norms=("L1", "L2", "Linf")) is None


def test_plugin_is_registered_for_pytest():
    eps = [ep for ep in entry_points(group="pytest11") if ep.name == "mmsverify"]
    assert [ep.value for ep in eps] == ["mmsverify.pytest_plugin"]


def _readme_example():
    text = README.read_text()
    section = text[text.index("## Order checks in your own test suite"):]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    failure = re.search(r"```text\n(.*?)```", section, re.S).group(1)
    return code, failure


def _pytest(folder, *args):
    proc = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", *args],
                          cwd=folder, capture_output=True, text=True, timeout=300)
    return proc.returncode, proc.stdout + proc.stderr


def test_readme_example_passes_and_its_failure_is_as_shown(tmp_path):
    code, failure = _readme_example()
    (tmp_path / "test_my_solver.py").write_text(code)
    rc, out = _pytest(tmp_path, "test_my_solver.py", "--mmsverify-reports", "reports")
    assert rc == 0, out
    assert "2 passed" in out
    reports = sorted(p.name for p in (tmp_path / "reports").iterdir())
    assert reports == ["test_my_solver.py_test_rod_solver_with_the_fixture.html",
                       "test_my_solver.py_test_rod_solver_with_the_fixture.json"]
    data = json.loads((tmp_path / "reports" / reports[1]).read_text())
    assert data["outcome"] == "pass" and len(data["levels"]) == 5

    # the mistake the README describes, and the failure it shows
    broken = code.replace('b = mms.source("u", x[1:-1])', 'b = mms.source("u", x[:-2])')
    assert broken != code
    (tmp_path / "test_my_solver.py").write_text(broken)
    rc, out = _pytest(tmp_path, "test_my_solver.py", "-k", "second_order")
    assert rc == 1
    lines = [ln.rstrip() for ln in out.splitlines()]
    for shown in failure.splitlines():
        if shown.strip() not in ("E       ...", ""):
            assert shown.rstrip() in lines, f"README shows a line the run does not print: {shown!r}"
    assert "mmsverify/testing.py" not in out  # __tracebackhide__: the user's line, not ours
