"""Content-addressed store of finished levels, so studies can be rerun and resumed.

A level's key is the SHA-256 of everything that decides its result: the
problem's content hash, the solver's identity (:func:`solver_identity`),
the grid (box, cells, time interval and steps) and the case options. Its
record is one JSON file ``levels/<key>.json`` under the cache folder,
written to a temporary file and moved into place with :func:`os.replace`,
so a study killed at any moment leaves either the whole record or none.

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
import time

from .solvers import solver_name

__all__ = ["LevelCache", "solver_identity", "CACHE_FORMAT"]

#: Version of the record layout; part of every key.
CACHE_FORMAT = 1


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
    :class:`~mmsverify.external.ExternalSolver`) describes itself. Otherwise
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


class LevelCache:
    """Finished levels on disk, by content.

    Parameters
    ----------
    directory : path
        Created if missing. Safe to share between studies and processes.
    """

    def __init__(self, directory):
        self.directory = Path(directory)
        self._levels = self.directory / "levels"
        self._levels.mkdir(parents=True, exist_ok=True)

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
        from .study import LevelResult
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
        tmp = path.with_name(f".{path.stem}.{os.getpid()}.{time.monotonic_ns()}.tmp")
        try:
            with open(tmp, "w", encoding="utf-8") as fh:
                json.dump(rec, fh, indent=1)
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)
        return path


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
