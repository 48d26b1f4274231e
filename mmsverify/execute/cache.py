"""Content-addressed store of finished levels, so studies can be rerun and resumed.

A level's key is the SHA-256 of everything that decides its result: the
problem's content hash, the solver's identity (:func:`solver_identity`),
the grid (box, cells, time interval and steps) and the case options. Its
record is one JSON file ``levels/<key>.json`` under the cache folder,
written to a temporary file and moved into place with :func:`os.replace`,
so a study killed at any moment leaves either the whole record or none;
the record is flushed to the disk (``fsync``) before the rename, in line.
Records are data: every one is checked on reading by :func:`read_record`
(a regular file of this user, of bounded size, whose JSON has the expected
types and finite numbers); a record that fails is treated as missing, the
level is run again and a warning names the file and the entry. A cache
folder owned by another user or writable by others is refused.
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
import math
import stat
import sys
import sysconfig
import time
import warnings

from mmsverify.errors import MMSError
from mmsverify.execute.solvers import solver_name

__all__ = ["LevelCache", "solver_identity", "code_digest", "read_record", "BadRecord", "CACHE_FORMAT"]

#: Version of the record layout; part of every key.
CACHE_FORMAT = 1

# A temporary record whose writer is not running on this machine is removed
# once it is this old (seconds). The wait covers writers on other machines
# sharing the folder (their pids mean nothing here); a write takes milliseconds.
_TMP_GRACE = 60.0
# A temporary record this old (seconds) is removed whoever wrote it.
_TMP_MAX_AGE = 3600.0


def _module_file(module):
    path = getattr(module, "__file__", None)
    return Path(path).resolve() if path else None


@functools.lru_cache(maxsize=None)
def _installed_roots():
    """Folders whose modules are not the user's project: the standard library and installed packages."""
    names = ("stdlib", "platstdlib", "purelib", "platlib")
    roots = {Path(p).resolve() for p in (sysconfig.get_paths().get(n) for n in names) if p}
    roots |= {Path(p).resolve() for p in sys.path if p and ("site-packages" in p or "dist-packages" in p)}
    return tuple(roots)


def _imported_names(path, package):
    """Absolute names of the modules a source file imports (from its syntax tree; nothing is run)."""
    import ast
    import importlib.util
    try:
        tree = ast.parse(path.read_bytes())
    except (OSError, SyntaxError, ValueError):
        return []
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                try:
                    base = importlib.util.resolve_name("." * node.level + base, package or "")
                except (ImportError, ValueError):
                    continue
            names.append(base)
            names += [f"{base}.{a.name}" for a in node.names if a.name != "*"]
    return names


@functools.lru_cache(maxsize=None)
def _package_version(top):
    """The installed version of the package that provides top-level module ``top`` (None if unknown).

    The distribution is usually named like the module; the full map of
    distributions (slow to build) is read only when it is not.
    """
    from importlib import metadata
    try:
        return f"{top}=={metadata.version(top)}"
    except (metadata.PackageNotFoundError, ValueError):
        pass
    try:
        dists = metadata.packages_distributions().get(top) or []
        return ",".join(f"{d}=={metadata.version(d)}" for d in dists) or None
    except (metadata.PackageNotFoundError, ValueError):
        return None


def code_digest(module_name):
    """Digest of a module's code: its file, the user's modules it imports, versions of installed packages.

    Modules are followed through their ``import`` statements (read from the
    syntax tree) as long as their files lie outside the standard library
    and the installed packages; an installed package counts by its version.
    Only modules already imported are followed (the solver's import made
    them so). Returns None when the module has no source file.
    """
    roots = _installed_roots()
    first = sys.modules.get(module_name)
    if first is None or _module_file(first) is None:
        return None
    seen, files, versions, todo = set(), {}, {}, [module_name]
    while todo:
        name = todo.pop()
        if name in seen:
            continue
        seen.add(name)
        mod = sys.modules.get(name)
        path = _module_file(mod) if mod is not None else None
        if path is None:
            continue   # built in, a namespace, or a name inside a module rather than a module
        top = name.split(".")[0]
        if top == "mmsverify" and name != module_name:   # the tool itself: the key's CACHE_FORMAT covers it
            continue
        if top in sys.stdlib_module_names:
            continue   # the standard library counts through the Python version, below
        if any(path.is_relative_to(r) for r in roots):
            versions[top] = _package_version(top) or "unknown"
            if name != module_name:
                continue
        try:
            files[name] = hashlib.sha256(path.read_bytes()).hexdigest()
        except OSError:
            continue
        package = mod.__name__ if hasattr(mod, "__path__") else mod.__name__.rpartition(".")[0]
        todo += _imported_names(path, package)
    blob = json.dumps({"files": files, "packages": versions, "python": sys.version}, sort_keys=True)
    return hashlib.sha256(blob.encode()).hexdigest()[:16]


def _source_digest(obj):
    target = inspect.unwrap(obj)
    if not (inspect.isfunction(target) or inspect.ismethod(target) or inspect.isclass(target)):
        target = type(target)
    module = getattr(target, "__module__", None)
    return code_digest(module) if module else None


def solver_identity(solve):
    """Text identifying a solver and its code, for cache keys.

    An object with an ``identity()`` method (such as
    :class:`~mmsverify.execute.external.ExternalSolver`, which hashes the program's
    file) describes itself. Otherwise the name is combined with
    :func:`code_digest` of the module that defines the solver: its file,
    every module of the user's project it imports (directly or not) and the
    versions of the installed packages they import, so editing any of them
    or upgrading a library invalidates cached levels;
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


#: Largest record read (bytes); a level's record is a few kB.
MAX_RECORD_BYTES = 1 << 20
_MAX_DEPTH = 8
_HEX = set("0123456789abcdef")


class BadRecord(ValueError):
    """A level record that is not what this release writes; the message names the file and the entry."""


def _number(value, where, *, minimum=None, integer=False):
    ok = (isinstance(value, int) if integer else isinstance(value, (int, float))) and not isinstance(value, bool)
    if not ok or abs(value) > 1e300 or (not integer and not math.isfinite(value)):
        shown = f"a number of {len(str(value))} digits" if ok and isinstance(value, int) else repr(value)[:60]
        raise BadRecord(f"{where}: expected a finite {'whole number' if integer else 'number'}, got {shown}")
    if minimum is not None and value < minimum:
        raise BadRecord(f"{where}: expected at least {minimum}, got {value!r}")
    return int(value) if integer else float(value)


def _table(value, where):
    if not isinstance(value, dict):
        raise BadRecord(f"{where}: expected a table (JSON object), got {type(value).__name__}")
    return value


def _depth(value, where, depth=0):
    if depth > _MAX_DEPTH:
        raise BadRecord(f"{where}: nested deeper than {_MAX_DEPTH} levels")
    items = value.items() if isinstance(value, dict) else enumerate(value) if isinstance(value, list) else ()
    for k, v in items:
        _depth(v, f"{where}.{k}", depth + 1)


def _open_regular(path, limit):
    """The bytes of ``path``, refusing links, special files (devices, pipes) and files over ``limit`` unread."""
    flags = os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0)
    st = os.lstat(path)
    if not stat.S_ISREG(st.st_mode):
        what = "a symbolic link" if stat.S_ISLNK(st.st_mode) else "not a regular file"
        raise BadRecord(f"{path}: {what}; a record is a plain file written by this tool")
    _check_owner(path, st, "record")
    if st.st_size > limit:
        raise BadRecord(f"{path}: {st.st_size} bytes, more than a record holds ({limit})")
    fd = os.open(path, flags)
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):   # replaced between the look and the open
            raise BadRecord(f"{path}: not a regular file")
        with os.fdopen(fd, "rb", closefd=False) as fh:
            data = fh.read(limit + 1)
    finally:
        os.close(fd)
    if len(data) > limit:
        raise BadRecord(f"{path}: more than {limit} bytes")
    return data


def _check_owner(path, st, what):
    """Refuse a file or folder another user owns or others may write (it could hold planted results)."""
    if os.name == "nt":
        return
    if st.st_uid != os.getuid():
        raise BadRecord(f"{path}: the cache {what} belongs to another user (uid {st.st_uid}); use a cache "
                        "folder of your own")
    if st.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
        raise BadRecord(f"{path}: the cache {what} is writable by other users; run chmod go-w on it")


def _reject_constant(name):
    raise ValueError(f"{name} is not a number JSON allows")


_RECORD_KEYS = ("format", "key", "written", "problem", "problem_hash", "solver", "grid", "level", "result")
_RESULT_KEYS = ("h", "status", "errors", "seconds", "n_points", "scale", "quantities", "info")


def _known(table, keys, where, prefix):
    unknown = sorted(set(table) - set(keys))
    if unknown:
        raise BadRecord(f"{where}: unknown entry '{prefix}{unknown[0][:40]}'")


def read_record(path, key, grid=None):
    """Read and check one level record; returns its ``result`` table.

    With ``grid``, the record's grid and level must be that grid's.

    Raises
    ------
    BadRecord
        When the file is a link or a special file, belongs to another user,
        is too large or too deep, or any entry has the wrong type, a
        non-finite number or an unknown value. The message names the file
        and the entry.
    """
    raw = _open_regular(path, MAX_RECORD_BYTES)
    try:
        rec = json.loads(raw.decode("utf-8"), parse_constant=_reject_constant)
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise BadRecord(f"{path}: not a JSON record ({str(exc)[:120]})") from None
    where = str(path)
    _depth(rec, where)
    _table(rec, where)
    if rec.get("format") != CACHE_FORMAT:
        raise BadRecord(f"{where}: format {rec.get('format')!r:.40}, this release reads {CACHE_FORMAT}")
    if rec.get("key") != key:
        raise BadRecord(f"{where}: entry 'key' does not match the file's name (a record copied over another)")
    _known(rec, _RECORD_KEYS, where, "")
    for name in ("written", "problem", "problem_hash", "solver"):
        if rec.get(name) is not None and not isinstance(rec[name], str):
            raise BadRecord(f"{where}: entry {name!r}: expected text or null, got {type(rec[name]).__name__}")
    if grid is not None and (rec.get("grid") != _grid_data(grid) or rec.get("level") != grid.level):
        raise BadRecord(f"{where}: entries 'grid' and 'level' do not match the level asked for (a record copied "
                        "over another)")
    r = _table(rec.get("result"), f"{where}: entry 'result'")
    _known(r, _RESULT_KEYS, where, "result.")
    if r.get("status") != "ok":
        raise BadRecord(f"{where}: entry 'result.status' is {r.get('status')!r:.40}; only 'ok' levels are stored")
    out = {"h": _number(r.get("h"), f"{where}: entry 'result.h'", minimum=0),
           "seconds": _number(r.get("seconds"), f"{where}: entry 'result.seconds'", minimum=0),
           "n_points": _number(r.get("n_points"), f"{where}: entry 'result.n_points'", minimum=1, integer=True)}
    errors = _table(r.get("errors"), f"{where}: entry 'result.errors'")
    out["errors"] = {}
    for f, per in errors.items():
        per = _table(per, f"{where}: entry 'result.errors.{f}'")
        out["errors"][f] = {n: _number(v, f"{where}: entry 'result.errors.{f}.{n}'", minimum=0) for n, v in per.items()}
    out["scale"] = {f: _number(v, f"{where}: entry 'result.scale.{f}'", minimum=0)
                    for f, v in _table(r.get("scale", {}), f"{where}: entry 'result.scale'").items()}
    out["quantities"] = {}
    for q, d in _table(r.get("quantities", {}), f"{where}: entry 'result.quantities'").items():
        d = _table(d, f"{where}: entry 'result.quantities.{q}'")
        out["quantities"][q] = {k: _number(d.get(k), f"{where}: entry 'result.quantities.{q}.{k}'")
                                for k in ("value", "exact", "error")}
    out["info"] = _table(r.get("info", {}), f"{where}: entry 'result.info'")
    return out


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
        for folder in (self.directory, self._levels):
            st = os.lstat(folder)
            if stat.S_ISLNK(st.st_mode) and folder == self._levels:
                raise MMSError(f"{folder}: a symbolic link stands for the cache's levels folder; remove it")
            try:
                _check_owner(folder, os.stat(folder), "folder")
            except BadRecord as exc:
                raise MMSError(str(exc)) from None
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

        A missing record is None; one that :func:`read_record` refuses is
        None too (the level is recomputed and the record rewritten), with a
        warning that names the file and the entry.
        """
        from mmsverify.execute.level import LevelResult
        path = self.path(key)
        try:
            r = read_record(path, key, grid)
        except FileNotFoundError:
            return None
        except (OSError, BadRecord) as exc:
            warnings.warn(f"level cache: {exc}; the level is run again", RuntimeWarning, stacklevel=2)
            return None
        return LevelResult(grid.level, grid, r["h"], "ok", r["errors"], r["seconds"], r["n_points"], r["scale"],
                           f"reused from the level cache ({key[:12]})", quantities=r["quantities"], info=r["info"])

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
                json.dump(rec, fh, indent=1, allow_nan=False)
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
            json.dumps(v, allow_nan=False)
        except (TypeError, ValueError, RecursionError):
            v = repr(v)
        out[str(k)] = v
    return out
