"""Command-line interface: ``mmsverify COMMAND ...`` or ``python -m mmsverify``.

Each command lives in its own module ``_<name>.py`` with a ``register``
function that adds its sub-parser and sets ``func``. Exit codes:

* 0: every verdict confirmed (or the command succeeded)
* 1: a verdict failed (observed order off the formal order)
* 2: bad input (problem file, solver, grid sequence, data), or a study in which no level ran
* 3: inconclusive (levels failed or errors at round-off; nothing to judge)

Only the chosen command's module is imported: ``main`` hands its arguments
to :func:`build_parser`, which builds the sub-parser of that command alone
when the first argument names one (after ``--verbose``/``--quiet``), and
every sub-parser otherwise (``--help``, no command, an unknown command), so
the top-level help and argparse's list of valid choices stay complete.
"""

import argparse
import importlib
import signal
import sys

from ..errors import MMSError
from ..processes import end_on_signal

__all__ = ["main", "console", "EXIT_OK", "EXIT_FAIL", "EXIT_INPUT", "EXIT_INCONCLUSIVE"]

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_INCONCLUSIVE = 0, 1, 2, 3

# Command modules, in the order `--help` lists them.
_COMMANDS = ("_demo", "_run", "_derive", "_list", "_split", "_export", "_report", "_baseline", "_estimate", "_audit", "_catalogue")
# Command names (and aliases) whose module is not `_<name>`; a command missing here and
# from this rule is still found, by building every sub-parser.
_MODULE_OF = {"mistakes": "_catalogue"}
# Top-level options that may come before the command name and take no value.
_PLAIN_OPTIONS = ("--verbose", "--quiet")


def comma_choices(text, allowed, what):
    """Split ``"a, b"`` into a tuple, refusing names outside ``allowed`` with a ValueError naming them."""
    chosen = tuple(n.strip() for n in text.split(",") if n.strip())
    unknown = [n for n in chosen if n not in allowed]
    if unknown or not chosen:
        raise ValueError(f"unknown {what}(s) {', '.join(unknown) or '(none)'}; choose from {', '.join(allowed)}")
    return chosen


def _command_module(name):
    """The module in ``_COMMANDS`` that registers command ``name``, or None."""
    module = _MODULE_OF.get(name, f"_{name}")
    return module if module in _COMMANDS else None


def _chosen_module(argv):
    """The module of the command ``argv`` names, or None when every sub-parser is needed."""
    for token in argv:
        if token not in _PLAIN_OPTIONS:  # the first other token is the command, or needs all
            return _command_module(token) if isinstance(token, str) else None
    return None


def build_parser(argv=None):
    """The argument parser; with ``argv``, only the sub-parser of the command it names.

    Parameters
    ----------
    argv : list of str, optional
        The arguments the parser will read. When the first of them (after
        ``--verbose``/``--quiet``) is a command, only that command's module
        is imported and registered; otherwise, and without ``argv``, every
        command is. The parser must then be used on these arguments only.
    """
    parser = argparse.ArgumentParser(
        prog="mmsverify",
        description="Prove a PDE solver converges at its design order with manufactured solutions, "
                    "and estimate the discretization error left in a real simulation.",
        epilog="Exit codes: 0 confirmed, 1 order not confirmed, 2 bad input or no level ran, 3 inconclusive.")
    parser.add_argument("--version", action="version", version=f"%(prog)s {__import__('mmsverify').__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    chosen = None if argv is None else _chosen_module(argv)
    for name in (chosen,) if chosen else _COMMANDS:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    from ..progress import add_verbosity_options
    add_verbosity_options(parser)
    for command in sub.choices.values():
        add_verbosity_options(command, sub=True)
    return parser


def main(argv=None, *, own_process=False):
    """Run the command line; returns the exit code.

    ``own_process=True`` says that this process runs this one command and
    then exits (the ``mmsverify`` program, ``python -m mmsverify``): SIGTERM
    and SIGHUP then end it like Ctrl-C (through
    :class:`~mmsverify.processes.Terminated`, a ``KeyboardInterrupt``), so that the clean-up on the way out runs: worker
    processes and external programs (with everything they started) are
    killed and temporary level folders removed. In-process callers (tests,
    notebooks) keep their own signal handlers.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(argv)
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_INPUT
    args.own_process = own_process
    if own_process:
        for sig in (signal.SIGTERM, getattr(signal, "SIGHUP", None)):
            if sig is not None:
                signal.signal(sig, end_on_signal)
    from ..progress import configure_logging, verbosity
    configure_logging(verbosity(args))
    try:
        return int(args.func(args) or 0)
    except MMSError as exc:
        print(f"mmsverify: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt as exc:
        signum = getattr(exc, "signum", None)
        print("mmsverify: interrupted" + (f" by {signal.Signals(signum).name}" if signum else ""), file=sys.stderr)
        return 128 + (signum or signal.SIGINT)
    except BrokenPipeError:  # output piped into `head` and the like: stop quietly
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 141


def console(argv=None):
    """Entry of the ``mmsverify`` program and of ``python -m mmsverify``: :func:`main` in a process of its own."""
    return main(argv, own_process=True)
