"""Design warnings of ``run``, worked out beside the study the first time.

The design checks (:mod:`mmsverify.design.checks`) of a problem content never seen
on this machine take about 0.1 s of sympy work, a few percent of a short
study, and are then cached. Seen before, their warnings are printed at
once, ahead of the study, as always. Not seen before, they are worked out
in a forked child process on another core while the study runs, and
printed as soon as they are ready: after the next level that finishes, or
at the end of the study, before its table. Where forking is not safe
(not Linux, threads other than mmsverify's own running), where no process
can be started, or when the child fails, the parent works them out itself,
as before.
"""

import gc
import os
import pickle
import select
import sys
import threading
import warnings

__all__ = ["start_design_warnings", "BACKGROUND"]

#: Work out uncached design warnings in a child process (False: in this process, ahead of the study).
BACKGROUND = True


def _orders(args):
    order = getattr(args, "formal_order", None)
    return {"time_order": order} if getattr(args, "mode", None) == "time" else {"formal_order": order}


def _show(lines, stream):
    for w in lines:
        print(f"warning: {w}", file=stream)
    stream.flush()


class _Pending:
    """Warnings being worked out in a child; :meth:`poll` prints them when ready, :meth:`finish` waits."""

    def __init__(self, pid, fd, problem, kw, thaw):
        self.pid, self.fd, self.problem, self.kw = pid, fd, problem, kw
        self.thaw = thaw   # unfreeze the collector when done (it had nothing frozen before)
        self.done = False

    def poll(self, before=None):
        """Print the warnings if the child has finished (never waits); ``before`` runs first if there are any."""
        if not self.done and select.select([self.fd], [], [], 0)[0]:
            self.finish(before)

    def finish(self, before=None):
        """Wait for the child and print its warnings (worked out here if the child failed)."""
        if self.done:
            return
        self.done = True
        chunks = []
        try:
            while True:
                chunk = os.read(self.fd, 1 << 16)
                if not chunk:
                    break
                chunks.append(chunk)
        finally:
            os.close(self.fd)
            os.waitpid(self.pid, 0)
            if self.thaw:
                gc.unfreeze()
        try:
            kind, value = pickle.loads(b"".join(chunks))
        except Exception:  # the child died before it wrote: do the work here
            from mmsverify._designcache import cached_design_warnings
            kind, value = "ok", cached_design_warnings(self.problem, **self.kw)
        if kind != "ok":    # an interruption of the study reached the child too: nothing to add
            value = [] if value == "KeyboardInterrupt" else [f"the design checks could not run: {value}"]
        if value:
            if before is not None:
                before()
            _show(value, sys.stderr)


def _child(problem, kw, fd):
    try:
        os.nice(10)   # background work: the study in the parent comes first on the cores
    except OSError:
        pass
    try:
        warnings.simplefilter("ignore")
        from mmsverify._designcache import cached_design_warnings
        result = ("ok", cached_design_warnings(problem, **kw))
    except BaseException as exc:  # noqa: BLE001  (reported by the parent)
        result = ("error", str(exc) or type(exc).__name__)
    try:
        from mmsverify import _diskcache
        _diskcache.flush()       # the warnings' cache entry, before an exit that runs no exit handlers
        data = pickle.dumps(result)
        while data:
            data = data[os.write(fd, data):]
    finally:
        os._exit(0)   # no clean-up of the parent's state (buffers, atexit handlers)


def _other_threads():
    """Threads besides the main one and mmsverify's own (the derivation cache's writer), which forking tolerates.

    (The level cache's flush thread is a bare one, not listed here; it holds nothing a child uses.)
    """
    return [t for t in threading.enumerate()
            if t is not threading.main_thread() and not t.name.startswith("mmsverify-")]


def start_design_warnings(args, problem=None):
    """Print the design warnings of ``args.problem`` now if cached, else start them beside the study.

    ``problem`` is that problem when the caller has read it already.

    Returns None, or a pending object whose ``poll()`` and ``finish()`` print them.
    """
    from mmsverify._designcache import cached_design_warnings, cached_only
    from mmsverify.problem.record import get_problem
    problem, kw = get_problem(args.problem if problem is None else problem), _orders(args)
    hit = cached_only(problem, **kw)
    if hit is not None:
        _show(hit, sys.stderr)
        return None
    if not (BACKGROUND and sys.platform.startswith("linux") and not _other_threads()):
        _show(cached_design_warnings(problem, **kw), sys.stderr)
        return None
    sys.stdout.flush()
    sys.stderr.flush()
    # Objects created so far leave the garbage collector's view while the child lives: a collection
    # in this process would otherwise touch every one of them and copy all the memory the two share
    # (copy-on-write), slowing the study more than the checks take. A process that runs one command
    # has frozen them already for good (mmsverify.cli.main); only a freeze made here is undone.
    # (gc.get_freeze_count() would tell, but it walks every frozen object: milliseconds.)
    thaw = not getattr(args, "own_process", False)
    gc.freeze()
    try:
        read, write = os.pipe()
        with warnings.catch_warnings():
            # Python 3.12+ warns of any fork with threads running. The only threads here are
            # mmsverify's own (see _other_threads) and native library pools: the derivation cache's
            # writer queue is made anew in the child (_diskcache, os.register_at_fork), the level
            # flush thread holds nothing the child uses, and OpenBLAS re-initialises after a fork.
            warnings.filterwarnings("ignore", r"This process .* is multi-threaded", DeprecationWarning)
            pid = os.fork()
    except OSError:   # no process or pipe to spare: work them out here, as before
        if thaw:
            gc.unfreeze()
        _show(cached_design_warnings(problem, **kw), sys.stderr)
        return None
    if pid == 0:
        os.close(read)
        _child(problem, kw, write)
    os.close(write)
    return _Pending(pid, read, problem, kw, thaw)
