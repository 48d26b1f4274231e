"""The command line: each command is registered by its own module, and the parsers agree."""

import argparse
import contextlib
import importlib
import io
import re
import sys

import pytest

from mmsverify import cli
from mmsverify.cli import _COMMANDS, _command_module, build_parser, main

def _registered():
    """{command name: (module, help)} from each module's own register()."""
    out = {}
    for module in _COMMANDS:
        sub = argparse.ArgumentParser().add_subparsers()
        importlib.import_module(f"mmsverify.cli.{module}").register(sub)
        helps = {a.dest: a.help for a in sub._choices_actions}
        out |= {name: (module, helps.get(name)) for name in sub.choices}
    return out


def _commands_of(parser):
    subs = [a for a in parser._actions if isinstance(a, argparse._SubParsersAction)]
    return set(subs[0].choices)


def test_every_command_maps_to_the_module_that_registers_it():
    for name, (module, _) in _registered().items():
        assert _command_module(name) == module, (
            f"command {name!r} is registered by {module}; add it to _MODULE_OF in mmsverify/cli/__init__.py")


def test_a_named_command_builds_only_its_parser():
    for name, (module, _) in _registered().items():
        assert _commands_of(build_parser([name, "--help"])) == {name}
        assert _commands_of(build_parser(["--quiet", name])) == {name}
    everything = set(_registered())
    for argv in ([], ["--help"], ["-h", "run"], ["bogus"], ["--", "run"], ["--verb", "run"], ["-1", "run"]):
        assert _commands_of(build_parser(argv)) == everything, argv
    assert _commands_of(build_parser()) == everything


def _outcome(parser, argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            args = vars(parser.parse_args(argv))
            result = ("parsed", {k: v for k, v in args.items() if k != "func"}, args.get("func"))
        except SystemExit as exc:
            result = ("exit", exc.code)
    return result, out.getvalue(), err.getvalue()


@pytest.mark.parametrize("argv", [
    ["run", "plate-poisson", "poisson2d", "--levels", "3", "--quiet"], ["run", "--help"], ["run"],
    ["run", "a", "b", "--bogus"], ["--verbose", "list"], ["mistakes", "--list"], ["baseline", "check", "--help"],
    ["audit", "x.toml", "--starts", "0"], ["estimate", "--values", "1,2,3", "--h", "1,0.5,0.25"],
    ["report", "--help"], ["-h", "run"], ["bogus"], ["--version"], [],
])
def test_chosen_parser_reads_arguments_as_the_full_one(argv):
    assert _outcome(build_parser(argv), argv) == _outcome(build_parser(), argv)


def test_help_lists_every_command_with_its_help(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--help"])
    assert done.value.code == 0
    text = " ".join(capsys.readouterr().out.split())   # argparse wraps long help lines
    for name, (_, helptext) in _registered().items():
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
    seen = []
    real = cli.build_parser
    monkeypatch.setattr(cli, "build_parser", lambda argv=None: seen.append(argv) or real(argv))
    monkeypatch.setattr(sys, "argv", ["mmsverify", "list"])
    assert main() == 0 and seen == [["list"]]
    assert "plate-poisson" in capsys.readouterr().out
