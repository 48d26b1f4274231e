"""Command-line interface: ``mmsverify COMMAND ...`` or ``python -m mmsverify``.

Each command lives in its own module ``_<name>.py`` with a ``register``
function that adds its sub-parser and sets ``func``. Exit codes:

* 0: every verdict confirmed (or the command succeeded)
* 1: the evidence says an order is off (a fitted interval outside the tolerance), or a level failed
* 2: bad input (problem file, solver, grid sequence, data, a tolerance at or above half the formal
  order), or a study in which no level ran
* 3: inconclusive: the levels cannot decide (an error floor, too few levels in the asymptotic range,
  errors at round-off)

Other installed packages may add commands through the entry-point group
``mmsverify.commands`` (name = "module:register"); the demo package adds
``mistakes`` so.
"""

import argparse
import importlib
import signal
import sys

from mmsverify.errors import MMSError
from mmsverify.execute.processes import end_on_signal

__all__ = ["main", "console", "EXIT_OK", "EXIT_FAIL", "EXIT_INPUT", "EXIT_INCONCLUSIVE"]

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_INCONCLUSIVE = 0, 1, 2, 3

# Command modules, in the order `--help` lists them.
_COMMANDS = ("_demo", "_run", "_derive", "_list", "_split", "_export", "_report", "_baseline", "_estimate", "_audit")
#: Entry-point group of commands other packages add: name = "module:register".
COMMAND_GROUP = "mmsverify.commands"


def _plugin_commands():
    """Commands registered by installed packages: name -> entry point (loaded only when used)."""
    from importlib.metadata import entry_points
    found = {}
    for ep in entry_points(group=COMMAND_GROUP):
        found.setdefault(ep.name, ep)
    return found


def comma_choices(text, allowed, what):
    """Split ``"a, b"`` into a tuple, refusing names outside ``allowed`` with a ValueError naming them."""
    chosen = tuple(n.strip() for n in text.split(",") if n.strip())
    unknown = [n for n in chosen if n not in allowed]
    if unknown or not chosen:
        raise ValueError(f"unknown {what}(s) {', '.join(unknown) or '(none)'}; choose from {', '.join(allowed)}")
    return chosen


def build_parser():
    """The argument parser with every command, built-in and contributed by installed packages."""
    parser = argparse.ArgumentParser(
        prog="mmsverify",
        description="Prove a PDE solver converges at its design order with manufactured solutions, "
                    "and estimate the discretization error left in a real simulation.",
        epilog="Exit codes: 0 confirmed, 1 order not confirmed, 2 bad input or no level ran, 3 inconclusive.")
    parser.add_argument("--version", action="version", version=f"%(prog)s {__import__('mmsverify').__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in _COMMANDS:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    for name, ep in _plugin_commands().items():
        if name not in sub.choices:
            try:
                ep.load()(sub)
            except Exception as exc:  # a broken plugin must not take the built-in commands down
                print(f"mmsverify: warning: command {name!r} from {ep.value} could not be loaded: {exc}",
                      file=sys.stderr)
    from mmsverify.cli.progress import add_verbosity_options
    add_verbosity_options(parser)
    for command in sub.choices.values():
        add_verbosity_options(command, sub=True)
    return parser


def main(argv=None, *, own_process=False):
    """Run the command line; returns the exit code.

    ``own_process=True`` says that this process runs this one command and
    then exits (the ``mmsverify`` program, ``python -m mmsverify``): SIGTERM
    and SIGHUP then end it like Ctrl-C (through
    :class:`~mmsverify.execute.processes.Terminated`, a ``KeyboardInterrupt``), so that the clean-up on the way out runs: worker
    processes and external programs (with everything they started) are
    killed and temporary level folders removed. In-process callers (tests,
    notebooks) keep their own signal handlers.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_INPUT
    args.own_process = own_process
    if own_process:
        for sig in (signal.SIGTERM, getattr(signal, "SIGHUP", None)):
            if sig is not None:
                signal.signal(sig, end_on_signal)
    from mmsverify.cli.progress import configure_logging, verbosity
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
