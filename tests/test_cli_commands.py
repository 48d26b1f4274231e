"""The command line lists every command, built-in and contributed through the entry-point group."""

import argparse
import importlib
import re
import sys

import pytest

from mmsverify.cli import _COMMANDS, main


def _registered():
    """{command name: help} from each built-in module's register() and the demo's contributed command."""
    out = {}
    registers = [importlib.import_module(f"mmsverify.cli.{m}").register for m in _COMMANDS]
    registers.append(importlib.import_module("solvers_demo.cli").register)
    for register in registers:
        sub = argparse.ArgumentParser().add_subparsers()
        register(sub)
        out |= {a.dest: a.help for a in sub._choices_actions}
    return out


def test_help_lists_every_command_with_its_help(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--help"])
    assert done.value.code == 0
    text = " ".join(capsys.readouterr().out.split())   # argparse wraps long help lines
    assert "mistakes" in _registered()                 # contributed by solvers_demo's entry point
    for name, helptext in _registered().items():
        assert re.search(rf"\b{re.escape(name)} {re.escape(' '.join(helptext.split()))}", text), name


def test_unknown_command_error_lists_every_command(capsys):
    with pytest.raises(SystemExit) as done:
        main(["bogus"])
    assert done.value.code == 2
    err = capsys.readouterr().err
    assert "invalid choice: 'bogus'" in err
    for name in _registered():
        assert f"'{name}'" in err


def test_main_reads_sys_argv_when_given_nothing(monkeypatch, capsys):
    monkeypatch.setattr(sys, "argv", ["mmsverify", "list"])
    assert main() == 0
    assert "plate-poisson" in capsys.readouterr().out
