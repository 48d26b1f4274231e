"""The program's own process: a bad solver name fails before any work; the design checks' freeze.

``mmsverify.cli.console`` (the program's entry) is ``main(own_process=True)``.
A study command imports the solver's module first, so a bad solver name
fails before the design checks start. ``gc.freeze``/``gc.unfreeze`` are
replaced by recorders where the design checks are started, so the test
process itself is never frozen.
"""

import argparse
import gc
from pathlib import Path

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


def test_a_bad_solver_name_fails_before_the_design_checks_start(monkeypatch, capsys):
    started = []
    monkeypatch.setattr(_designbg, "start_design_warnings", lambda *a, **k: started.append(a))
    code = cli.main(["run", "plate-poisson", "no_such_module_here:solve", "--levels", "2"])
    assert code == 2 and "no_such_module_here" in capsys.readouterr().err
    assert started == []


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
