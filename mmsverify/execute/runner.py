"""Execute the levels of a study: serially, in a local process pool or any executor.

:func:`run_levels` is what :func:`~mmsverify.study.refinement.run_study` calls to get
one :class:`~mmsverify.study.refinement.LevelResult` per level:

* without an executor and ``workers`` the levels run one after another in
  this process;
* ``workers=N`` runs them in a local :class:`~concurrent.futures.ProcessPoolExecutor`
  of N processes (the solver must be picklable: a module-level function, a
  bundled name or an :class:`~mmsverify.execute.external.ExternalSolver`);
* ``executor=`` takes any :class:`concurrent.futures.Executor`, or a Dask
  ``distributed.Client`` (its ``get_executor()`` is used);
* ``cache=`` (a folder or :class:`~mmsverify.execute.cache.LevelCache`) reuses levels
  finished before and stores each new success as soon as it arrives, so a
  study killed midway resumes where it stopped.

Failures never stop a study: a level that raises, times out, returns NaN
or a wrong shape, or whose worker process dies, becomes a failed
LevelResult whose message says why.

Time limits (``timeout`` seconds per level) are enforced from outside:
a level with a limit runs in a worker process (:class:`~mmsverify.execute.processes.Worker`,
one per slot, living for the study), and the tool kills the worker and
everything it started when the limit passes, serially or with
``workers``. Nothing that runs inside the level (a solver that swallows
every exception, compiled code, a program in a session of its own) can
delay that. Levels sent to a caller's executor (a thread pool, Dask) cannot
be killed from here; the study gives up waiting on them after ``timeout``
times the number of levels plus a minute, and an
:class:`~mmsverify.execute.external.ExternalSolver` enforces its own ``timeout``.
"""

from concurrent.futures import FIRST_COMPLETED, Executor, ProcessPoolExecutor, wait
from dataclasses import replace
from multiprocessing.connection import wait as wait_ready
import os
import pickle
import shutil
import tempfile
import time
import warnings

from mmsverify.execute.cache import LevelCache, solver_identity
from mmsverify.errors import MMSError, SolverError
from mmsverify.execute.processes import GRACE, Worker, adopt_environment, mp_context
from mmsverify.execute.level import LevelResult, run_level

__all__ = ["run_levels", "as_executor", "process_pool", "farm"]

_WAIT_SLACK = 60.0   # seconds added to the overall wait when limits cannot be enforced in workers
_MAX_MESSAGE = 10_000  # characters of a failed level's message that are kept (start and end)


def _cores():
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def _start_pool_worker(environ, workers):
    adopt_environment(environ)
    _share_cores(workers)


def _share_cores(workers):
    """Worker initializer: BLAS and OpenMP thread pools get this worker's share of the cores.

    Thread counts the user set in the environment are left as they are.
    Libraries loaded later (and programs the worker starts) see the
    environment variables; those already loaded are limited through
    threadpoolctl.
    """
    if any(os.environ.get(v) for v in _THREAD_VARIABLES):
        return
    share = max(1, _cores() // workers)
    for v in _THREAD_VARIABLES:
        os.environ[v] = str(share)
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # without it the libraries already loaded keep their default
        return
    threadpool_limits(share)


def process_pool(workers):
    """A local pool of ``workers`` processes that share the cores instead of competing for them.

    Each worker limits its BLAS and OpenMP thread pools (NumPy's, SciPy's,
    and those of programs it starts) to ``cores // workers`` threads,
    unless the environment already sets ``OMP_NUM_THREADS``,
    ``OPENBLAS_NUM_THREADS`` or ``MKL_NUM_THREADS``: two workers on two
    cores that each start two BLAS threads spend time waiting on each other
    (measured in ``bench/parallel_batch.py``).
    """
    return ProcessPoolExecutor(max_workers=workers, mp_context=mp_context(),
                               initializer=_start_pool_worker, initargs=(dict(os.environ), workers))


def _failed(case, where, message):
    return LevelResult(case.grid.level, case.grid, case.grid.h, "failed", message=f"{where}: {message}")


def _shorten(text, limit=_MAX_MESSAGE):
    """A message of at most about ``limit`` characters: its start and its end, the middle left out."""
    if len(text) <= limit:
        return text
    head, tail = limit * 2 // 3, limit // 3
    return f"{text[:head]}\n[... {len(text) - head - tail} characters left out ...]\n{text[-tail:]}"


def _escaped(exc):
    """What a solver did when something other than an Exception left it, or an error could not be printed."""
    if isinstance(exc, SystemExit):
        return f"the solver called sys.exit({exc.code!r}); a solver returns a Solution or raises an exception"
    first = exc
    while first.__context__ is not None and first.__context__ is not first:
        first = first.__context__  # the solver's own error, if recording it failed
    try:
        text = str(first)
    except Exception:  # its __str__ fails too
        text = "(its message cannot be printed)"
    return f"the solver raised {type(first).__name__}: {text}"


def _execute(solve, case, where):
    """Run one level where it is sent (this process or a worker); never raises for solver faults.

    A solver that measures its own grid size (``Solution.info["h"]``, as
    :class:`~mmsverify.execute.external.ExternalSolver` does from cell volumes) sets
    the level's h, except in a time-refinement study. Only ``KeyboardInterrupt``
    (the user's) passes through; ``sys.exit`` in a solver fails its level.
    Messages are kept to about ``_MAX_MESSAGE`` characters.
    """
    try:
        result = run_level(solve, case, where)
    except KeyboardInterrupt:
        raise
    except BaseException as exc:  # SystemExit, or an error whose message fails while it is recorded
        return _failed(case, where, _shorten(_escaped(exc)))
    h = result.info.get("h")
    time_mode = case.problem.transient and case.options.get("mode") == "time"
    if result.ok and h is not None and not time_mode:
        value = None
        if not isinstance(h, bool):
            try:
                value = float(h)
            except (TypeError, ValueError, OverflowError):
                pass
        if value is None or not 0 < value < float("inf"):
            return _failed(case, where, f"the solver reported info['h'] = {_shorten(repr(h), 80)}; the grid "
                                        "size must be a positive finite number")
        result = replace(result, h=value)
    if len(result.message) > _MAX_MESSAGE:
        result = replace(result, message=_shorten(result.message))
    return result


def as_executor(executor):
    """Accept None, a :class:`concurrent.futures.Executor` or a Dask ``Client``."""
    if executor is None or isinstance(executor, Executor):
        return executor
    if callable(getattr(executor, "get_executor", None)):
        return executor.get_executor()
    raise SolverError(f"executor must be a concurrent.futures.Executor or a dask.distributed.Client, "
                      f"got {type(executor).__name__}")


def _check_picklable(solve):
    try:
        pickle.dumps(solve)
    except Exception as exc:
        raise SolverError(f"the solver {solve!r} cannot be sent to worker processes ({type(exc).__name__}: {exc}); "
                          "workers and time limits need one: use a module-level function, 'module:function' "
                          "or a bundled name, or run without workers and without a time limit") from None


def run_levels(solve, cases, wheres, *, executor=None, workers=None, timeout=None, cache=None, resume=True,
               solver_id=None, progress=None):
    """Run every case and return their LevelResults in the order given.

    Parameters
    ----------
    solve : callable
        The solver, ``solve(case) -> Solution``.
    cases, wheres : sequences
        One :class:`~mmsverify.execute.solvers.Case` and one description per level.
    executor : Executor or dask Client, optional
    workers : int, optional
        Size of a local process pool when no executor is given.
    timeout : float, optional
        Seconds per level. With a limit (or ``workers``) every level runs in
        a worker process that is killed, with all it started, when its
        time is up; the solver must then be picklable.
    cache : path or LevelCache, optional
        Where finished levels are kept.
    resume : bool
        Reuse cached levels (default); False recomputes and overwrites them.
    solver_id : str, optional
        Identity of the solver for the cache (default :func:`~mmsverify.execute.cache.solver_identity`).
    progress : callable, optional
        Called in this process as ``progress(level_result)`` for every level
        as it becomes available (reused levels first).
    """
    if timeout is not None and not timeout > 0:
        raise SolverError(f"the time limit per level must be positive, got {timeout!r}")
    if workers is not None and (int(workers) != workers or workers < 1):
        raise SolverError(f"workers must be a whole number of at least 1, got {workers!r}")
    n = len(cases)
    results, keys = [None] * n, [None] * n
    if cache is not None:
        cache = cache if isinstance(cache, LevelCache) else LevelCache(cache)
        sid = solver_id or solver_identity(solve)
        for i, case in enumerate(cases):
            keys[i] = cache.key(case, sid)
            if resume:
                results[i] = cache.load(keys[i], case.grid)
                if results[i] is not None and progress is not None:
                    progress(results[i])

    def finish(i, result):
        results[i] = result
        if cache is not None and result.ok:
            try:
                cache.store(keys[i], result, cases[i], solver_id=sid)
            except OSError as exc:  # a full disk must not lose the study itself
                warnings.warn(f"{wheres[i]}: could not store the level in {cache.directory} ({exc}); "
                              "it will be recomputed next time", RuntimeWarning, stacklevel=2)
        if progress is not None:
            progress(result)

    pending = [i for i in range(n) if results[i] is None]
    if not pending:
        return results
    pool = as_executor(executor)
    if pool is not None:
        _through(pool, solve, cases, wheres, pending, timeout, finish)
    elif workers is not None or timeout is not None:
        _check_picklable(solve)
        _in_workers(solve, cases, wheres, pending, timeout, min(int(workers or 1), len(pending)), finish)
    else:
        for i in pending:
            finish(i, _execute(solve, cases[i], wheres[i]))
    return results


def _largest_first(cases, pending):
    # The finest level dominates, so it should never wait for a worker.
    return sorted(pending, key=lambda i: -cases[i].grid.n_cells * (cases[i].grid.steps or 1))


def farm(tasks, workers, timeout, done):
    """Run ``tasks`` (``(key, fn, args)``) in ``workers`` Worker processes, at most ``timeout`` s each.

    ``done(key, kind, value)`` gets every outcome: ``"ok"`` with the value,
    ``"error"`` with the exception raised, ``"timeout"`` or ``"died"`` with
    None. A worker whose task ran out of time or that died is stopped (its
    whole process tree killed) and replaced for the next task. Every worker
    is stopped on the way out, however this function is left (an error,
    Ctrl-C, SIGTERM or SIGHUP turned into an exception by the
    command line).
    """
    queue = list(tasks)
    slots = [None] * min(workers, len(queue))
    # The workers' temporary folders (an external program's level folder) go under one folder of the
    # tool's, removed here at the end: a worker killed at its time limit cannot remove its own.
    scratch = tempfile.mkdtemp(prefix="mmsverify-workers-")
    environ = {**os.environ, "TMPDIR": scratch}
    try:
        while queue or any(w is not None and w.task is not None for w in slots):
            for k, w in enumerate(slots):
                if queue and (w is None or w.task is None):
                    if w is None:
                        w = slots[k] = Worker(_share_cores, (len(slots),), environ)
                    key, fn, args = queue.pop(0)
                    # The grace lets an external program's own time-out (and its tail of output) report first.
                    w.submit(fn, *args, task=key, timeout=None if timeout is None else timeout + GRACE)
            busy = [w for w in slots if w is not None and w.task is not None]
            deadlines = [w.deadline for w in busy if w.deadline is not None]
            left = None if not deadlines else max(0.0, min(deadlines) - time.monotonic())
            ready = set(wait_ready([w.conn for w in busy] + [w.sentinel for w in busy], timeout=left))
            for k, w in enumerate(slots):
                if w is None or w.task is None:
                    continue
                key = w.task
                if w.conn in ready:
                    try:
                        outcome = w.receive()
                    except (EOFError, OSError):
                        kind, value = "died", None
                    else:
                        if outcome is not None:
                            done(key, *outcome)
                        continue
                elif w.sentinel in ready:
                    kind, value = "died", None
                elif w.deadline is not None and time.monotonic() >= w.deadline:
                    kind, value = "timeout", None
                else:
                    continue
                w.stop()
                slots[k] = None
                done(key, kind, value)
    finally:
        for w in slots:
            if w is not None:
                w.stop()
        shutil.rmtree(scratch, ignore_errors=True)


_DIED = ("the worker process died while running this level (a crash in compiled code, a kill signal, "
         "running out of memory or os._exit)")


def _in_workers(solve, cases, wheres, pending, timeout, workers, finish):
    def done(i, kind, value):
        if kind == "ok":
            finish(i, value)
        elif kind == "timeout":
            finish(i, _failed(cases[i], wheres[i], f"no result within {timeout:g} s; the level was stopped "
                                                   "(its process and every process it started were killed)"))
        elif kind == "died":
            finish(i, _failed(cases[i], wheres[i], _DIED))
        else:
            finish(i, _failed(cases[i], wheres[i], f"the worker failed: {type(value).__name__}: {value}"))
    # one worker runs the levels coarse to fine, as a study in this process would; several take the largest
    # first, so that no worker is left with a long level at the end
    order = _largest_first(cases, pending) if workers > 1 else sorted(pending)
    farm([(i, _execute, (solve, cases[i], wheres[i])) for i in order], workers, timeout, done)


def _through(pool, solve, cases, wheres, pending, timeout, finish):
    """Levels through a caller's executor: it cannot be killed from here, so waiting has an end."""
    futures = {pool.submit(_execute, solve, cases[i], wheres[i]): i for i in _largest_first(cases, pending)}
    deadline = None if timeout is None else time.monotonic() + timeout * len(pending) + _WAIT_SLACK
    waiting = set(futures)
    while waiting:
        left = None if deadline is None else max(0.0, deadline - time.monotonic())
        done, waiting = wait(waiting, timeout=left, return_when=FIRST_COMPLETED)
        if not done:
            for fut in waiting:
                fut.cancel()
                i = futures[fut]
                finish(i, _failed(cases[i], wheres[i], f"no result after waiting {timeout * len(pending) + _WAIT_SLACK:g} "
                                  "s; the executor's worker could not be interrupted"))
            break
        for fut in done:
            i = futures[fut]
            try:
                finish(i, fut.result())
            except Exception as exc:  # the worker could not run the task at all, or died
                finish(i, _failed(cases[i], wheres[i], f"the worker failed: {type(exc).__name__}: {exc}"))
