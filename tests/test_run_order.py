"""The ``mmsverify run`` command checks the solver's name before any other work."""

from mmsverify import cli
from mmsverify.design import checks as design


def test_a_bad_solver_name_fails_before_the_design_checks(monkeypatch, capsys):
    started = []
    monkeypatch.setattr(design, "design_warnings", lambda *a, **k: started.append(a) or [])
    code = cli.console(["run", "plate-poisson", "no_such_module_here:solve", "--levels", "2"])
    assert code == 2 and "no_such_module_here" in capsys.readouterr().err
    assert started == []


def test_design_warnings_are_printed_ahead_of_the_table(monkeypatch, capsys):
    monkeypatch.setattr(design, "design_warnings", lambda *a, **k: ["design: a seeded warning"])
    code = cli.console(["run", "plate-poisson", "poisson2d", "--levels", "2"])
    err, out = capsys.readouterr()[::-1]
    assert code != 2 and "warning: design: a seeded warning" in err and "plate-poisson" in out   # the study ran
