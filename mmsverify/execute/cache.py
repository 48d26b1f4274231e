"""Content-addressed store of finished levels, so studies can be rerun and resumed.

A level's key is the SHA-256 of everything that decides its result: the
problem's content hash, the solver's identity (:func:`solver_identity`),
the grid (box, cells, time interval and steps) and the case options. Its
record is one JSON file ``levels/<key>.json`` under the cache folder,
written to a temporary file and moved into place with :func:`os.replace`,
so a study killed at any moment leaves either the whole record or none.
The record is then flushed to the disk (``fsync``) by a background thread,
off the study's path: a power cut before that flush can at worst leave an
empty record, which is read as missing and the level run again.
A temporary file left by a writer killed mid-write is removed the next time
a cache on that folder is opened (see :class:`LevelCache`); one that may
still belong to a running writer is never touched.

Only successful levels are stored; failed ones are tried again on the next
run.

Examples
--------
>>> import tempfile
>>> from mmsverify import Case, derive, plan_grids
>>> cache = LevelCache(tempfile.mkdtemp())
>>> grid = plan_grids("plate-poisson", levels=2)[0]
>>> len(cache.key(Case(grid, derive("plate-poisson"), {"mode": "combined"}), "my-solver"))
64
"""

import functools
import hashlib
import inspect
import json
import os
from pathlib import Path
import queue
import time
import _thread

from mmsverify.execute.solvers import solver_name

__all__ = ["LevelCache", "solver_identity", "CACHE_FORMAT"]

#: Version of the record layout; part of every key.
CACHE_FORMAT = 1

# A temporary record whose writer is not running on this machine is removed
# once it is this old (seconds). The wait covers writers on other machines
# sharing the folder (their pids mean nothing here); a write takes milliseconds.
_TMP_GRACE = 60.0
# A temporary record this old (seconds) is removed whoever wrote it.
_TMP_MAX_AGE = 3600.0


def _source_digest(obj):
    target = inspect.unwrap(obj)
    if not (inspect.isfunction(target) or inspect.ismethod(target) or inspect.isclass(target)):
        target = type(target)
    try:
        path = inspect.getsourcefile(target)
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()[:16] if path else None
    except (TypeError, OSError):
        return None


def solver_identity(solve):
    """Text identifying a solver and its code, for cache keys.

    An object with an ``identity()`` method (such as
    :class:`~mmsverify.execute.external.ExternalSolver`) describes itself. Otherwise
    the name is combined with the SHA-256 of the file that defines the
    solver, so editing that file invalidates its cached levels;
    :func:`functools.partial` arguments are included. A solver without a
    source file is identified by name only; pass ``resume=False`` after
    changing it.
    """
    ident = getattr(solve, "identity", None)
    if callable(ident) and not inspect.isclass(solve):
        return f"{solver_name(solve)}|{ident()}"
    parts, target = [], solve
    while isinstance(target, functools.partial):
        parts.append(repr((target.args, sorted(target.keywords.items()))))
        target = target.func
    return "|".join([solver_name(target), _source_digest(target) or "no-source"] + parts)


def _grid_data(grid):
    return {"lower": list(grid.lower), "upper": list(grid.upper), "cells": list(grid.cells),
            "t_start": grid.t_start, "t_end": grid.t_end, "steps": grid.steps}


def _tmp_path(path):
    """Temporary file for writing record ``path``: ``.<key>.<pid>.<ns>.tmp`` beside it."""
    return path.with_name(f".{path.stem}.{os.getpid()}.{time.monotonic_ns()}.tmp")


def _tmp_writer(name):
    """The writer's pid in a name made by :func:`_tmp_path`, or None for any other name."""
    parts = name[1:-len(".tmp")].split(".") if name.startswith(".") and name.endswith(".tmp") else []
    return int(parts[1]) if len(parts) == 3 and parts[1].isdigit() else None


def _running(pid):
    """False only when no process ``pid`` exists on this machine."""
    if os.name == "nt":  # os.kill would terminate it; assume it runs (the age rule still applies)
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists but belongs to someone else, or cannot be asked
        return True
    return True


def _remove_stale_temporaries(folder):
    """Remove the abandoned temporary records in ``folder``; returns how many.

    A temporary file is abandoned when it is at least ``_TMP_MAX_AGE``
    seconds old, or at least ``_TMP_GRACE`` seconds old and its writer (the
    pid in its name) is not running on this machine. Files that vanish or
    cannot be removed meanwhile are left alone.
    """
    now = time.time()
    removed = 0
    for tmp in folder.glob(".*.tmp"):
        try:
            age = now - tmp.stat().st_mtime
            if age < _TMP_GRACE:
                continue
            pid = _tmp_writer(tmp.name)
            if age >= _TMP_MAX_AGE or (pid is not None and pid != os.getpid() and not _running(pid)):
                tmp.unlink()
                removed += 1
        except OSError:  # renamed into place by its writer, removed by another process, or not ours
            continue
    return removed


class LevelCache:
    """Finished levels on disk, by content.

    Opening a cache removes temporary records abandoned by writers that were
    killed mid-write: those whose writing process no longer runs on this
    machine (after a minute's grace, for writers on other machines sharing
    the folder) and any older than an hour.

    Parameters
    ----------
    directory : path
        Created if missing. Safe to share between studies and processes.
    """

    def __init__(self, directory):
        self.directory = Path(directory)
        self._levels = self.directory / "levels"
        self._levels.mkdir(parents=True, exist_ok=True)
        _remove_stale_temporaries(self._levels)

    def __repr__(self):
        return f"LevelCache({str(self.directory)!r})"

    def __len__(self):
        return sum(1 for _ in self._levels.glob("*.json"))

    def key(self, case, solver_id):
        """Content key of one level (hex SHA-256)."""
        blob = json.dumps({"format": CACHE_FORMAT, "problem": case.problem.content_hash(), "solver": solver_id,
                           "grid": _grid_data(case.grid), "options": case.options},
                          sort_keys=True, default=repr)
        return hashlib.sha256(blob.encode()).hexdigest()

    def path(self, key):
        return self._levels / f"{key}.json"

    def load(self, key, grid):
        """The stored result for ``key`` as a LevelResult on ``grid``, or None.

        A record that cannot be read is treated as missing (and recomputed).
        """
        from mmsverify.study.refinement import LevelResult
        try:
            rec = json.loads(self.path(key).read_text(encoding="utf-8"))
            r = rec["result"]
            if rec.get("key") != key or r["status"] != "ok":
                return None
            return LevelResult(grid.level, grid, float(r["h"]), "ok", r["errors"], float(r["seconds"]),
                               int(r["n_points"]), r["scale"], f"reused from the level cache ({key[:12]})",
                               quantities=r.get("quantities", {}), info=r.get("info", {}))
        except (OSError, ValueError, KeyError, TypeError):
            return None

    def store(self, key, result, case=None, solver_id=None):
        """Write a successful level atomically; returns the record's path."""
        rec = {
            "format": CACHE_FORMAT, "key": key, "written": time.strftime("%Y-%m-%dT%H:%M:%S%z"),
            "problem": case.problem.name if case is not None else None,
            "problem_hash": case.problem.content_hash() if case is not None else None,
            "solver": solver_id, "grid": _grid_data(result.grid), "level": result.level,
            "result": {"h": result.h, "status": result.status, "errors": result.errors, "seconds": result.seconds,
                       "n_points": result.n_points, "scale": result.scale, "quantities": result.quantities,
                       "info": _plain(result.info)},
        }
        path = self.path(key)
        tmp = _tmp_path(path)
        try:
            with open(tmp, "w", encoding="utf-8") as fh:
                json.dump(rec, fh, indent=1)
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)
        _flusher().put(path)
        return path


@functools.lru_cache(maxsize=None)
def _flusher():
    """The queue of records waiting for the disk, served by one thread for the life of the process.

    One bare thread (``_thread``), not a ``threading.Thread`` per record:
    ``Thread.start`` waits until the new thread runs, which with the cores
    busy (a solve's BLAS threads, the design checks' child process) took
    1 to 4 ms each time. Nothing here needs that handshake; like a daemon
    thread it ends with the process.
    """
    todo = queue.SimpleQueue()
    _thread.start_new_thread(_flush_all, (todo,))
    return todo


def _flush_all(todo):
    while True:
        path = todo.get()
        try:
            _flush(path)
        except Exception:  # noqa: BLE001  (one record not flushed must not stop the flushing of the others)
            pass


def _flush(path):
    """Push a finished record to the disk (the rename already made it whole for every reader)."""
    try:
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
    except OSError:  # removed meanwhile, or a file system without fsync: nothing to keep
        pass


if hasattr(os, "register_at_fork"):  # a forked child has no flush thread: it starts its own when it needs one
    os.register_at_fork(after_in_child=_flusher.cache_clear)


def _plain(info):
    """The JSON-safe part of a solver's info dict (numbers, text, flags, lists of them)."""
    out = {}
    for k, v in info.items():
        try:
            json.dumps(v)
        except (TypeError, ValueError):
            v = repr(v)
        out[str(k)] = v
    return out
