"""Progress display: live on a terminal after a delay, silent in pipes and CI, flags."""

import io

import pytest

from mmsverify import run_study
from mmsverify.cli import build_parser
from mmsverify.execute.grids import Grid
from mmsverify.cli.progress import NORMAL, QUIET, VERBOSE, LevelProgress, interactive, verbosity
from mmsverify.study.refinement import LevelResult


class _Tty(io.StringIO):
    def isatty(self):
        return True


def _level(k, ok=True):
    g = Grid(k, (0.0,), (1.0,), (8 * 2 ** k,))
    return LevelResult(k, g, g.h, "ok" if ok else "failed", seconds=0.5)


def _ticks(*times):
    it = iter(times)
    return lambda: next(it)


def test_ci_or_pipe_is_not_interactive(monkeypatch):
    monkeypatch.delenv("CI", raising=False)
    assert interactive(_Tty()) and not interactive(io.StringIO())
    monkeypatch.setenv("CI", "true")  # common practice: CI services set CI=true
    assert not interactive(_Tty())
    monkeypatch.setenv("CI", "false")
    assert interactive(_Tty())


def test_live_line_only_after_delay_and_cleared(monkeypatch):
    monkeypatch.delenv("CI", raising=False)
    out = _Tty()
    # clock: start 0; level 1 at 0.5 s (too early, silent); level 2 at 3 s (shown, elapsed read again)
    p = LevelProgress(2, "demo", NORMAL, stream=out, clock=_ticks(0.0, 0.5, 3.0, 3.0))
    p(_level(0))
    assert out.getvalue() == ""
    p(_level(1, ok=False))
    text = out.getvalue()
    assert "demo: 2/2 levels run; level 1 FAILED (16 cells" in text and "3.0 s elapsed" in text
    assert text.startswith("\r") and text.endswith("\r\x1b[2K")  # line cleared after the last level


def test_quiet_pipe_and_ci_print_nothing(monkeypatch):
    monkeypatch.setenv("CI", "1")
    for stream, level in ((_Tty(), NORMAL), (io.StringIO(), NORMAL), (_Tty(), QUIET)):
        p = LevelProgress(1, "x", level, stream=stream, clock=_ticks(0.0, 10.0, 10.0))
        p(_level(0))
        assert stream.getvalue() == ""


def test_verbose_prints_every_level_anywhere(monkeypatch):
    monkeypatch.setenv("CI", "1")
    out = io.StringIO()
    seen = []
    p = LevelProgress(None, "plate", VERBOSE, stream=out)

    def hook(lv):
        seen.append(lv.level)
        p(lv)
    run_study("plate-poisson", "poisson2d", levels=3, progress=hook)
    assert seen == [0, 1, 2]
    lines = out.getvalue().splitlines()
    assert [ln.split(" done")[0] for ln in lines] == ["plate: 1 level run; level 0", "plate: 2 levels run; level 1",
                                                       "plate: 3 levels run; level 2"]


@pytest.mark.parametrize("argv, expected", [
    (["--quiet", "list"], QUIET), (["list", "--quiet"], QUIET), (["--verbose", "list"], VERBOSE),
    (["list", "--verbose"], VERBOSE), (["list"], NORMAL)])
def test_flags_before_or_after_the_command(argv, expected):
    assert verbosity(build_parser().parse_args(argv)) == expected


def test_flags_exclude_each_other(capsys):
    with pytest.raises(SystemExit):
        build_parser().parse_args(["list", "--quiet", "--verbose"])
    assert "not allowed with" in capsys.readouterr().err


def test_verbose_logs_to_the_current_stderr(capsys, tmp_path):
    from mmsverify.cli import main
    assert main(["baseline", "save", "plate-poisson", "poisson2d", "--levels", "4", "-o", str(tmp_path / "b.json"),
                 "--quiet"]) == 0
    capsys.readouterr()
    assert main(["--verbose", "baseline", "check", str(tmp_path / "b.json")]) == 0
    err = capsys.readouterr().err
    assert "mmsverify: INFO: rerunning the 4 levels of baseline plate-poisson" in err
    assert "4/4 levels run; level 3 done" in err
    assert main(["--quiet", "baseline", "check", str(tmp_path / "b.json")]) == 0
    assert capsys.readouterr().err == ""
