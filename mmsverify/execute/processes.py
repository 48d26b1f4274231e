"""Processes the tool starts, and how it makes sure that every one of them ends.

Two kinds of process run a study's work:

* **level workers** (:class:`Worker`): a Python process that runs one level
  at a time for the tool and lives for the study. A level with a time limit
  always runs in one, so that the limit is enforced from outside: when it
  passes, the worker gets SIGTERM (which ends it with :class:`Terminated`, so an
  external program it runs is killed and its temporary folder removed) and,
  after a short grace, SIGKILL, with every process it started.
* **external programs** (:mod:`mmsverify.execute.external`): started in a session of
  their own and killed as a group.

Neither a process group nor a session holds a program that calls ``setsid``
itself, so the tool also finds what is left by two marks that such a
program cannot shed by accident:

* a worker is a *child subreaper* (Linux ``prctl``): a process it started
  that is orphaned (a daemon's double fork) is re-parented to the worker,
  not to init, so the worker's tree of descendants holds all of them;
* an external program gets a unique ``MMSVERIFY_RUN`` variable in its
  environment, which every descendant inherits whatever session it starts;
  :func:`kill_marked` kills every process whose environment carries it.

A tree or a marked set is first stopped (SIGSTOP), then read again until
no new process shows up, then killed: a process stopped cannot fork
between the reading and the kill. Both use ``/proc`` and work on Linux;
elsewhere only the group kill applies.

Worker processes are started by ``forkserver`` where the platform has it
(never a fork of this process, which may run threads of a library) and by
``spawn`` elsewhere; both are safe on every supported Python.
"""

import multiprocessing
import os
from pathlib import Path
import signal
import sys
import time
import traceback

__all__ = ["Worker", "Terminated", "end_on_signal", "mp_context", "adopt_environment", "kill_tree", "kill_marked", "descendants", "become_subreaper"]

_PROC = Path("/proc")
_PR_SET_CHILD_SUBREAPER = 36  # from <linux/prctl.h>
GRACE = 0.5  # seconds between SIGTERM and SIGKILL of a worker
STARTUP = 60.0  # seconds a worker may take to start and receive a task (imports of the solver's module)


def mp_context():
    """The multiprocessing context of every pool of the tool: forkserver on Linux, else spawn."""
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" in methods and sys.platform.startswith("linux"):
        ctx = multiprocessing.get_context("forkserver")
        # Workers start from a server that has imported the runner (NumPy with it) once.
        ctx.set_forkserver_preload(["mmsverify.execute.runner"])
        try:
            from multiprocessing import forkserver
            forkserver.ensure_running()
            return ctx
        except OSError:  # its socket cannot be made (a TMPDIR path too long for a Unix socket)
            pass
    return multiprocessing.get_context("spawn")


def become_subreaper():
    """Make orphaned descendants of this process its children (Linux; elsewhere nothing)."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(_PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def _parents():
    """{pid: parent pid} of every process visible in /proc."""
    found = {}
    for entry in _PROC.iterdir() if _PROC.is_dir() else ():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_bytes()
        except OSError:
            continue
        # Fields after the command name, which is in parentheses and may hold anything.
        fields = stat[stat.rfind(b")") + 2:].split()
        if len(fields) > 1:
            found[int(entry.name)] = int(fields[1])
    return found


def descendants(pid):
    """Every process below ``pid`` in the process tree (children, their children, ...)."""
    parents, found = _parents(), set()
    frontier = {pid}
    while frontier:
        frontier = {p for p, pp in parents.items() if pp in frontier and p not in found}
        found |= frontier
    return found


def _signal(pids, sig):
    for p in pids:
        try:
            os.kill(p, sig)
        except (ProcessLookupError, PermissionError):
            pass


def _stop_and_kill(find):
    """Stop what ``find()`` returns until nothing new appears, then kill it all."""
    stopped = set()
    for _ in range(100):
        new = find() - stopped
        if not new:
            break
        _signal(new, signal.SIGSTOP)
        stopped |= new
    _signal(stopped, signal.SIGKILL)
    return stopped


def kill_tree(pid, *, include_root=False):
    """Kill every descendant of ``pid`` (and ``pid`` itself with ``include_root``)."""
    roots = {pid} if include_root else set()
    known = set(roots)

    def find():
        # Descendants of everything seen so far: a member whose parent died is still found.
        parents = _parents()
        frontier = set(known) | {pid}
        while frontier:
            frontier = {p for p, pp in parents.items() if pp in frontier and p not in known}
            known.update(frontier)
        return {p for p in known if p in parents}
    return _stop_and_kill(find)


def kill_marked(marker):
    """Kill every process of this user whose environment holds ``marker`` (bytes ``NAME=value``)."""
    if not _PROC.is_dir():
        return set()
    me = os.getpid()

    def find():
        found = set()
        for entry in _PROC.iterdir():
            if not entry.name.isdigit() or int(entry.name) == me:
                continue
            try:
                env = (entry / "environ").read_bytes()
            except OSError:  # gone, or another user's
                continue
            if marker in env.split(b"\0"):
                found.add(int(entry.name))
        return found
    return _stop_and_kill(find)


class Terminated(KeyboardInterrupt):
    """SIGTERM or SIGHUP received: unwinds like Ctrl-C, so every clean-up on the way out runs."""

    def __init__(self, signum):
        super().__init__(signum)
        self.signum = signum


def end_on_signal(signum, frame):
    """Signal handler of SIGTERM and SIGHUP in the tool and its workers."""
    raise Terminated(signum)


# -- level workers ------------------------------------------------------------

def adopt_environment(environ):
    """Take the tool's environment as it is now (a forkserver child has the server's, from its start)."""
    if dict(os.environ) != environ:
        os.environ.clear()
        os.environ.update(environ)
        import tempfile
        tempfile.tempdir = None  # temporary folders follow the tool's TMPDIR


def _serve(conn, environ, initializer, initargs):
    """Main loop of a worker: run ``fn(*args)`` for each task received, send back the outcome."""
    adopt_environment(environ)
    signal.signal(signal.SIGTERM, end_on_signal)
    signal.signal(signal.SIGHUP, end_on_signal)
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C reaches the tool, which stops the workers
    become_subreaper()
    if initializer is not None:
        initializer(*initargs)
    try:
        _loop(conn)
    except Terminated:  # the tool stops this worker; what the task started is gone already
        pass


def _loop(conn):
    while True:
        try:
            task = conn.recv()
        except (EOFError, OSError):
            return
        if task is None:
            return
        fn, args = task
        conn.send(("started", None))  # the limit counts from here, not from the worker's start-up
        try:
            outcome = ("ok", fn(*args))
        except Terminated:
            raise
        except BaseException as exc:  # noqa: BLE001 - sent back to the tool, which decides
            outcome = ("error", exc)
        finally:
            kill_tree(os.getpid())  # whatever the task started and left behind
            _reap()
        try:
            conn.send(outcome)
        except Exception as exc:  # an outcome that cannot be pickled
            text = "".join(traceback.format_exception_only(type(exc), exc)).strip()
            conn.send(("error", RuntimeError(f"the worker could not send its result back ({text})")))


def _reap():
    """Collect the exit status of children that ended (orphans re-parented here included)."""
    while True:
        try:
            pid, _ = os.waitpid(-1, os.WNOHANG)
        except ChildProcessError:
            return
        if pid == 0:
            return


class Worker:
    """One Python process that runs tasks for the tool, one at a time, and can always be stopped.

    ``submit(fn, *args)`` sends a task; ``conn`` becomes readable when its
    outcome arrives (``receive()`` then returns ``("ok", value)`` or
    ``("error", exception)``), and ``sentinel`` when the process dies.
    :meth:`stop` ends the process and everything it started.
    """

    def __init__(self, initializer=None, initargs=(), environ=None):
        ctx = mp_context()
        self.conn, child = ctx.Pipe()
        environ = dict(os.environ) if environ is None else environ
        self.process = ctx.Process(target=_serve, args=(child, environ, initializer, initargs), name="mmsverify-worker")
        self.process.start()
        child.close()
        self.task, self.deadline = None, None

    @property
    def sentinel(self):
        return self.process.sentinel

    def submit(self, fn, *args, task=None, timeout=None):
        self.conn.send((fn, args))
        self.task, self.timeout = task, timeout
        # Until the worker says it started the task (its start-up and imports done), a longer allowance.
        self.deadline = None if timeout is None else time.monotonic() + timeout + STARTUP

    def receive(self):
        """The task's outcome, or None when the message only said that the task started."""
        kind, value = self.conn.recv()
        if kind == "started":
            self.deadline = None if self.timeout is None else time.monotonic() + self.timeout
            return None
        self.task, self.deadline = None, None
        return kind, value

    def stop(self, grace=GRACE):
        """End the worker: politely when idle, else SIGTERM, then SIGKILL of its whole tree after ``grace``."""
        proc = self.process
        if proc.pid is None:
            return
        if self.task is None and proc.is_alive():
            try:
                self.conn.send(None)
            except OSError:
                pass
            proc.join(grace)
        if proc.is_alive():
            tree = descendants(proc.pid)  # before it dies and they are re-parented
            _signal({proc.pid}, signal.SIGTERM)
            proc.join(grace)
            kill_tree(proc.pid, include_root=True)
            for p in tree:
                kill_tree(p, include_root=True)
        proc.join()
        self.conn.close()
