"""Progress of long studies, and the verbosity of the command line.

:class:`LevelProgress` is the ``progress`` callback of
:func:`~mmsverify.study.refinement.run_study`. It stays silent for studies that finish
within a few seconds, when the output is not a terminal and in CI (the
environment variable ``CI`` is set, as most CI services do), so logs and
pipes get only the results. ``--verbose`` prints one line per level
everywhere; ``--quiet`` prints nothing but the outcome.

Verbosity is one of :data:`QUIET`, :data:`NORMAL`, :data:`VERBOSE`.
"""

import argparse
import logging
import os
import sys
import time

__all__ = ["QUIET", "NORMAL", "VERBOSE", "LevelProgress", "add_verbosity_options", "verbosity",
           "configure_logging", "progress_for", "interactive"]

QUIET, NORMAL, VERBOSE = 0, 1, 2

#: Seconds a study runs before the live display appears.
DELAY = 2.0


def interactive(stream):
    """True when ``stream`` is a terminal and not in CI (``CI`` unset or empty/"false"/"0")."""
    if os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no"):
        return False
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty and isatty())
    except ValueError:  # closed stream
        return False


class LevelProgress:
    """Report each finished level of a study.

    Parameters
    ----------
    total : int, optional
        Number of levels, when known, for ``level 3/5``.
    label : str
        What is running, e.g. ``"plate-poisson / poisson2d"``.
    verbosity : int
        :data:`QUIET` (nothing), :data:`NORMAL` (a live line on a terminal
        once the study has run :data:`DELAY` seconds) or :data:`VERBOSE`
        (one line per level on any stream).
    stream : file, optional
        Default ``sys.stderr`` (results go to stdout).
    clock : callable, optional
        Seconds since an arbitrary start; for tests.

    Examples
    --------
    >>> import io
    >>> out = io.StringIO()
    >>> p = LevelProgress(2, "demo", VERBOSE, stream=out, clock=iter([0.0, 1.5, 3.0]).__next__)
    >>> from mmsverify.execute.grids import Grid
    >>> from mmsverify.execute.level import LevelResult
    >>> p(LevelResult(0, Grid(0, (0.0,), (1.0,), (8,)), 0.125, "ok", seconds=1.2))
    >>> print(out.getvalue().strip())
    demo: 1/2 levels run; level 0 done (8 cells, solver 1.2 s; 1.5 s elapsed)
    """

    def __init__(self, total=None, label="study", verbosity=NORMAL, stream=None, clock=time.monotonic):
        self.total = total
        self.label = label
        self.verbosity = verbosity
        self.stream = sys.stderr if stream is None else stream
        self._clock = clock
        self._start = clock()
        self._done = 0
        self._live = verbosity == NORMAL and interactive(self.stream)
        self._shown = False

    def _line(self, lv):
        count = f"{self._done}/{self.total}" if self.total else f"{self._done}"
        what = "done" if lv.ok else "FAILED"
        cached = ", from the cache" if lv.message.startswith("reused from the level cache") else ""
        plural = "" if self._done == 1 and not self.total else "s"
        return (f"{self.label}: {count} level{plural} run; level {lv.level} {what} ({lv.grid.describe()}, solver "
                f"{lv.seconds:.2g} s{cached}; {self._clock() - self._start:.1f} s elapsed)")

    def __call__(self, level_result):
        self._done += 1
        if self.verbosity == QUIET:
            return
        if self.verbosity >= VERBOSE:
            print(self._line(level_result), file=self.stream, flush=True)
            return
        if not self._live:
            return
        if not self._shown and self._clock() - self._start < DELAY:
            return
        self.stream.write("\r\x1b[2K" + self._line(level_result))
        self.stream.flush()
        self._shown = True
        if self.total and self._done >= self.total:
            self.close()

    def close(self):
        """End the live line so later output starts on a fresh line."""
        if self._shown:
            self.stream.write("\r\x1b[2K")
            self.stream.flush()
            self._shown = False


def add_verbosity_options(parser, sub=False):
    """Add ``--verbose`` and ``--quiet`` to a parser (skipped where either exists already).

    With ``sub=True`` (a command's sub-parser) the defaults are suppressed,
    so ``mmsverify --quiet run ...`` and ``mmsverify run ... --quiet`` both work.
    Nested sub-parsers (``baseline check``) get them too.
    """
    for action in parser._actions:  # argparse keeps no public list of actions
        if isinstance(action, argparse._SubParsersAction):
            for child in action.choices.values():
                add_verbosity_options(child, sub=True)
    taken = {s for a in parser._actions for s in a.option_strings}
    if taken & {"--verbose", "--quiet"}:
        return
    group = parser.add_mutually_exclusive_group()
    extra = {"default": argparse.SUPPRESS} if sub else {}
    group.add_argument("--verbose", action="store_true", help="more detail: one line per level, what runs when", **extra)
    group.add_argument("--quiet", action="store_true", help="only the outcome and errors; no progress", **extra)


def verbosity(args):
    """:data:`QUIET`, :data:`NORMAL` or :data:`VERBOSE` from parsed arguments."""
    if getattr(args, "quiet", False):
        return QUIET
    if getattr(args, "verbose", False):
        return VERBOSE
    return NORMAL


def configure_logging(level):
    """Send the ``mmsverify`` logger to stderr at a level matching the verbosity."""
    logger = logging.getLogger("mmsverify")
    logger.setLevel({QUIET: logging.ERROR, NORMAL: logging.WARNING, VERBOSE: logging.INFO}[level])
    if not any(isinstance(h, _Stderr) for h in logger.handlers):
        handler = _Stderr()
        handler.setFormatter(logging.Formatter("mmsverify: %(levelname)s: %(message)s"))
        logger.addHandler(handler)
    return logger


class _Stderr(logging.Handler):
    """Writes to the current ``sys.stderr`` (which test runners and callers may swap)."""

    def emit(self, record):
        try:
            print(self.format(record), file=sys.stderr)
        except Exception:  # logging must never break the command
            self.handleError(record)


def progress_for(args, total=None, label="study", stream=None):
    """A :class:`LevelProgress` for a command, honouring ``--verbose``/``--quiet``."""
    return LevelProgress(total, label, verbosity(args), stream)
