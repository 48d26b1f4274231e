"""Design warnings of `run` worked out beside the study on a first run (mmsverify.cli._designbg).

The warnings must be the same, wherever they are worked out, and printed
once: at once when cached, else after the next finished level or at the
end. The checks themselves are tested in test_design.py.
"""

import argparse
import os
import subprocess
import sys
from pathlib import Path

import pytest

from mmsverify.cli import _designbg

DATA = Path(__file__).resolve().parent / "data"
RUN = [sys.executable, "-m", "mmsverify", "run", str(DATA / "quadratic-poisson.toml"), "fd-diffusion",
       "--levels", "3", "--verbose"]


def _warnings(text):
    return [line for line in text.splitlines() if line.startswith("warning:")]


def test_first_run_prints_the_same_warnings_as_the_checks_ahead_of_the_study(tmp_path):
    env = {**os.environ, "MMSVERIFY_CACHE": str(tmp_path / "a")}
    beside = subprocess.run(RUN, capture_output=True, text=True, env=env, timeout=120)
    again = subprocess.run(RUN, capture_output=True, text=True, env=env, timeout=120)     # cached now
    inline = subprocess.run([sys.executable, "-c", "import sys; from mmsverify.cli import _designbg, main; "
                             "_designbg.BACKGROUND = False; sys.exit(main(sys.argv[1:]))", *RUN[3:]],
                            capture_output=True, text=True, env={**env, "MMSVERIFY_CACHE": str(tmp_path / "b")},
                            timeout=120)
    assert beside.returncode == again.returncode == inline.returncode
    assert _warnings(beside.stderr) and _warnings(beside.stderr) == _warnings(again.stderr) == \
        _warnings(inline.stderr)
    # cached and inline: ahead of the first level; beside the study: after a level, never twice
    for res in (again, inline):
        assert res.stderr.index("warning:") < res.stderr.index("level 0 done")
    assert beside.stderr.count("every leading truncation-error derivative") == 1


def test_warnings_come_after_the_next_level_once_ready(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path))
    args = argparse.Namespace(problem=str(DATA / "quadratic-poisson.toml"), formal_order=None, mode="combined")
    pending = _designbg.start_design_warnings(args)
    if pending is None:
        pytest.skip("this process cannot fork safely (threads running)")
    os.waitpid(pending.pid, os.WNOHANG)  # the child may still be working
    closed = []
    import select
    select.select([pending.fd], [], [], 60)       # wait until the child has written
    pending.poll(before=lambda: closed.append(True))
    assert closed == [True] and pending.done
    err = capsys.readouterr().err
    assert _warnings(err) and "every leading truncation-error derivative" in err
    pending.finish()                              # nothing more, nothing twice
    assert capsys.readouterr().err == ""


def test_a_child_that_dies_leaves_the_work_to_the_parent(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path))
    monkeypatch.setattr(_designbg, "_child", lambda problem, kw, fd: os._exit(3))
    args = argparse.Namespace(problem=str(DATA / "quadratic-poisson.toml"), formal_order=None, mode="combined")
    pending = _designbg.start_design_warnings(args)
    if pending is None:
        pytest.skip("this process cannot fork safely (threads running)")
    pending.finish()
    assert "every leading truncation-error derivative" in capsys.readouterr().err


def test_no_process_to_spare_means_the_checks_run_here(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("MMSVERIFY_CACHE", str(tmp_path))

    def refused():
        raise OSError(11, "Resource temporarily unavailable")
    monkeypatch.setattr(_designbg.os, "fork", refused)
    args = argparse.Namespace(problem=str(DATA / "quadratic-poisson.toml"), formal_order=None, mode="combined")
    assert _designbg.start_design_warnings(args) is None
    assert "every leading truncation-error derivative" in capsys.readouterr().err
