"""The mmsverify program keeps its start-up objects from the garbage collector; in-process callers do not.

``mmsverify.cli.console`` (the program's entry) is ``main(own_process=True)``:
objects made before the work starts live until the exit, so they are frozen
(``gc.freeze``) and no full collection walks them in the middle of a study.
A study command imports the solver's module first, so it is frozen too and
a bad solver name fails before any work. ``gc.freeze``/``gc.unfreeze`` are
replaced by recorders here, so the test process itself is never frozen.
"""

import argparse
import gc
from pathlib import Path
import sys
import textwrap

import pytest

from mmsverify import cli
from mmsverify.cli import _designbg

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture
def collector(monkeypatch):
    calls = []
    monkeypatch.setattr(gc, "freeze", lambda: calls.append("freeze"))
    monkeypatch.setattr(gc, "unfreeze", lambda: calls.append("unfreeze"))
    return calls


def test_only_the_program_freezes(collector, capsys):
    assert cli.main(["list"]) == 0 and collector == []
    assert cli.console(["list"]) == 0 and collector == ["freeze"]


def test_a_bad_solver_name_fails_before_the_design_checks_start(collector, monkeypatch, capsys):
    started = []
    monkeypatch.setattr(_designbg, "start_design_warnings", lambda *a, **k: started.append(a))
    code = cli.console(["run", "plate-poisson", "no_such_module_here:solve", "--levels", "2"])
    assert code == 2 and "no_such_module_here" in capsys.readouterr().err
    assert started == []


def test_the_solvers_module_is_loaded_when_the_objects_are_frozen(monkeypatch, tmp_path, capsys):
    (tmp_path / "probe_solver_mod.py").write_text(textwrap.dedent("""
        from solvers_demo.fd.poisson import solve
    """))
    monkeypatch.syspath_prepend(str(tmp_path))
    loaded = []
    monkeypatch.setattr(gc, "freeze", lambda: loaded.append("probe_solver_mod" in sys.modules))
    monkeypatch.setattr(gc, "unfreeze", lambda: None)
    try:
        code = cli.console(["run", "plate-poisson", "probe_solver_mod:solve", "--levels", "2", "--quiet"])
    finally:
        sys.modules.pop("probe_solver_mod", None)
    assert code in (0, 1) and loaded[0] is False and loaded[1] is True   # at start, then after the import


@pytest.mark.parametrize("own, expected", [(False, ["freeze", "unfreeze"]), (True, ["freeze"])])
def test_the_design_checks_undo_only_a_freeze_of_their_own(collector, tmp_path, monkeypatch, own, expected):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path))   # not cached: worked out in a child
    args = argparse.Namespace(problem=str(DATA / "quadratic-poisson.toml"), formal_order=None, mode="combined",
                              own_process=own)
    pending = _designbg.start_design_warnings(args)
    if pending is None:
        pytest.skip("this process cannot fork safely (threads running)")
    pending.finish()
    assert collector == expected
