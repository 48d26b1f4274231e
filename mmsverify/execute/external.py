"""Run an external program as the solver of a study.

:class:`ExternalSolver` is a solver callable (picklable, so it also runs in
worker processes) that, for each level,

1. writes a *case file* into the level's folder: grid size, box, level,
   time interval, boundary kinds, the output path and free parameters (see
   :func:`write_case`; TOML by default, JSON on request);
2. runs a command given as an argument list, never through a shell, with
   placeholders ``{case}``, ``{out}``, ``{dir}``, ``{level}``, ``{problem}``
   and ``{hash}`` filled in; the program runs in its own session, and on a
   time-out its whole process group is killed. Its output (stdout and
   stderr) goes to ``output.log`` in the level's folder, at most
   ``max_log_bytes``: the first and last halves, with a line saying how
   many bytes between them were left out;
3. reads the solution the program wrote, as CSV with a header line or as
   NumPy ``.npz``/``.npy`` (see :func:`read_solution`), within a size limit.

Errors are measured at the program's own points, so any mesh works. With
``spacing="volumes"`` the grid size of a level is ``h = (V/N)**(1/d)`` from
the cell volumes the program wrote (V their sum, N their number; Celik et
al. 2008), as unstructured meshes need; the default takes h from the
case's grid.

A level that crashes, times out, writes nothing, or writes NaN or ragged
columns raises :class:`ProgramFailed` with the tail of the program's
output; the study records it and goes on with the other levels.

A program built from exported code (:mod:`mmsverify.export`) should print
a line ``content_hash = <hash>`` (the header's ``MMS_CONTENT_HASH``, the
Python module's ``CONTENT_HASH``, the Fortran module's
``mms_content_hash``). When it does, the hash is compared with the problem
being run, and a program built for another problem fails the level with
"built for another problem: rebuild" instead of a meaningless error.
"""

from dataclasses import dataclass, field
import hashlib
import io
import json
import math
import os
from pathlib import Path
import re
import select
import shutil
import signal
import stat
import string
import subprocess
import tempfile
import time
import uuid
import zipfile

import numpy as np

from mmsverify.errors import MMSError, SolverError
from mmsverify.execute.meshfiles import MESH_FORMATS, read_mesh_columns
from mmsverify.fileio import read_text, regular_file
from mmsverify.problem.record import SIDES
from mmsverify.execute.processes import kill_marked
from mmsverify.execute.solvers import Solution

__all__ = ["ExternalSolver", "ProgramFailed", "write_case", "read_case", "read_solution", "expand_command",
           "PLACEHOLDERS", "OUTPUT_FORMATS", "CASE_FORMAT_VERSION", "reported_hash"]

#: Placeholders a command template may use.
PLACEHOLDERS = ("case", "out", "dir", "level", "problem", "hash")
#: Solution file formats the reader understands.
OUTPUT_FORMATS = ("csv", "npz", "npy") + MESH_FORMATS
#: Version number written into every case file.
CASE_FORMAT_VERSION = 1
_KEY = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


class ProgramFailed(SolverError):
    """An external program crashed, timed out or wrote an unusable solution.

    Attributes
    ----------
    kind : str
        ``"timeout"``, ``"crash"``, ``"no output"``, ``"bad output"``, ``"nan"`` or ``"wrong problem"``.
    tail : str
        The last part of the program's combined stdout and stderr.
    """

    def __init__(self, kind, message, tail=""):
        text = message + (f"\n--- end of the program's output ---\n{tail.rstrip()}" if tail.strip() else "")
        super().__init__(text)
        self.kind, self.tail = kind, tail


# -- case files -----------------------------------------------------------
def _case_data(case, output, output_format, params):
    grid, problem = case.grid, case.problem
    data = {
        "format": CASE_FORMAT_VERSION, "problem": problem.name, "problem_hash": problem.content_hash(),
        "level": grid.level, "dim": grid.dim, "coordinates": [str(c) for c in problem.coords],
        "fields": list(problem.field_names), "cells": [int(n) for n in grid.cells],
        "lower": [float(v) for v in grid.lower], "upper": [float(v) for v in grid.upper],
        "spacing": [float(v) for v in grid.spacing], "h": float(grid.h),
        "output": str(output), "output_format": output_format,
    }
    if grid.transient:
        data.update(t_start=float(grid.t_start), t_end=float(grid.t_end), steps=int(grid.steps),
                    dt=float(grid.dt))
    data["boundary"] = {f: [problem.boundaries[(f, s)] for s in SIDES[:2 * grid.dim]] for f in problem.field_names}
    if problem.robin:
        data["robin"] = {s: float(a) for s, a in sorted(problem.robin.items())}
    data["param"] = dict(params or {})
    return data


def _toml_value(v, where):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
    if isinstance(v, str):
        return _toml_string(v, where)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(e, where) for e in v) + "]"
    raise SolverError(f"{where}: case-file values are numbers, text, booleans or lists of them; got {v!r}")


def _toml_string(text, where):
    """A TOML basic string: characters outside the Basic Multilingual Plane written as they are (JSON's
    surrogate-pair escapes are not valid TOML), quotes, backslashes and control characters escaped."""
    if any("\ud800" <= c <= "\udfff" for c in text):
        raise SolverError(f"{where}: the text {text!r} holds a lone surrogate, which no UTF-8 file can hold")
    return '"' + "".join(_TOML_ESCAPES.get(c) or (f"\\u{ord(c):04x}" if c < " " or c == "\x7f" else c)
                         for c in text) + '"'


_TOML_ESCAPES = {'"': '\\"', "\\": "\\\\", "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}


def _toml_key(key, where):
    """A bare key when TOML allows one, else a quoted key (a field named in letters beyond ASCII)."""
    return key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else _toml_string(key, where)


def write_case(case, directory, output, *, fmt="toml", params=None):
    """Write the case file of one level into ``directory``; returns its path.

    The file is flat ``key = value`` TOML (``case.toml``) that a few lines of
    C or Fortran can read, or the same data as JSON (``case.json``)::

        format = 1
        problem = "plate-poisson"
        problem_hash = "356d...c95ec"
        level = 2
        dim = 2
        coordinates = ["x", "y"]
        fields = ["u"]
        cells = [32, 32]
        lower = [0.0, 0.0]
        upper = [1.0, 1.0]
        spacing = [0.03125, 0.03125]
        h = 0.03125
        output = "/.../solution.csv"
        output_format = "csv"
        boundary.u = ["dirichlet", "neumann", "dirichlet", "dirichlet"]
        param.omega = 1.9

    Transient problems add ``t_start``, ``t_end``, ``steps`` and ``dt``.
    ``boundary.<field>`` lists the sides in the order x_min, x_max, y_min,
    y_max, z_min, z_max. A problem with Robin sides adds the coefficient
    of each, ``robin.x_max = 2.5``: the program's boundary condition is
    ``F(u).n + alpha u = g``, with ``g`` from the exported ``flux_<field>_<side>``
    and ``exact_<field>`` (:mod:`mmsverify.outputs.export`).
    """
    where = f"case file for level {case.grid.level}"
    for k in params or {}:
        if not isinstance(k, str) or not _KEY.fullmatch(k):
            raise SolverError(f"{where}: parameter name {k!r} must be an identifier (letters, digits, _)")
    data = _case_data(case, output, Path(output).suffix.lstrip(".") or "csv", params)
    directory = Path(directory)
    if fmt == "json":
        path, text = directory / "case.json", json.dumps(data, indent=2) + "\n"
    elif fmt == "toml":
        lines = ["# mmsverify case file: one level of a manufactured-solution study.",
                 "# Solve the problem on this grid and write the solution to `output`."]
        for k, v in data.items():
            if isinstance(v, dict):
                lines += [f"{k}.{_toml_key(sub, where)} = {_toml_value(sv, where)}" for sub, sv in v.items()]
            else:
                lines.append(f"{k} = {_toml_value(v, where)}")
        path, text = directory / "case.toml", "\n".join(lines) + "\n"
    else:
        raise SolverError(f"unknown case-file format {fmt!r}; use 'toml' or 'json'")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.unlink(missing_ok=True)  # a link planted under this name is removed, not followed
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)
    return path


def read_case(path):
    """Read a case file (TOML or JSON by suffix) into a dict; for programs written in Python."""
    path = Path(path)
    text = read_text(path, "case file", 1 << 24)
    if path.suffix == ".json":
        return json.loads(text)
    import tomllib
    return tomllib.loads(text)


# -- commands -------------------------------------------------------------
def expand_command(template, values):
    """Fill the placeholders of an argument list; ``{{`` and ``}}`` are literal braces.

    Raises :class:`SolverError` naming an unknown placeholder.

    Examples
    --------
    >>> expand_command(["./solve", "--case={case}", "{{x}}"], {"case": "c.toml"})
    ['./solve', '--case=c.toml', '{x}']
    """
    out = []
    for arg in template:
        parts = []
        try:
            parsed = list(string.Formatter().parse(arg))
        except ValueError as exc:
            raise SolverError(f"command argument {arg!r}: {exc}; write literal braces as {{{{ and }}}}") from None
        for literal, name, spec, conv in parsed:
            parts.append(literal)
            if name is None:
                continue
            if name not in PLACEHOLDERS or spec or conv:
                raise SolverError(f"command argument {arg!r}: unknown placeholder {{{name}}}; use one of "
                                  + ", ".join(f"{{{p}}}" for p in PLACEHOLDERS))
            if name in values:
                parts.append(str(values[name]))
        out.append("".join(parts))
    return out


class _Run:
    def __init__(self, returncode, timed_out, seconds, tail):
        self.returncode, self.timed_out, self.seconds, self.tail = returncode, timed_out, seconds, tail


def _kill_group(proc, grace=0.5):
    """Stop the program's whole process group: TERM, a short grace, then KILL."""
    for sig, wait in ((signal.SIGTERM, grace), (signal.SIGKILL, None)):
        try:
            os.killpg(proc.pid, sig)
        except (ProcessLookupError, PermissionError):
            break
        try:
            proc.wait(timeout=wait)
            if wait is not None:
                break
        except subprocess.TimeoutExpired:
            continue
    if proc.poll() is None:
        proc.wait()


def _tail(path, chars):
    try:
        with open(path, "rb") as fh:
            fh.seek(0, os.SEEK_END)
            size = fh.tell()
            fh.seek(max(0, size - 4 * chars))
            text = fh.read().decode("utf-8", errors="replace")
    except OSError:
        return ""
    return text[-chars:]


class _BoundedLog:
    """Writes a program's output to ``fh``, at most about ``limit`` bytes of it.

    The first half of the limit goes to the file as it arrives; the last
    half is held in memory and written by :meth:`finish` after a line
    ``... N bytes omitted ...`` when anything in between was dropped.
    """

    def __init__(self, fh, limit):
        self._fh, self._keep_tail = fh, limit // 2
        self._head_left = limit - self._keep_tail
        self._tail = bytearray()
        self.omitted = 0

    def write(self, chunk):
        if self._head_left > 0:
            head, chunk = chunk[:self._head_left], chunk[self._head_left:]
            self._fh.write(head)
            self._fh.flush()  # readable while the program runs
            self._head_left -= len(head)
        if chunk:
            self._tail += chunk
            extra = len(self._tail) - self._keep_tail
            if extra > 0:
                del self._tail[:extra]
                self.omitted += extra

    def finish(self):
        if self.omitted:
            self._fh.write(f"\n... {self.omitted} bytes omitted (the log keeps the first and last "
                           f"{self._keep_tail} bytes; raise max_log_bytes for more) ...\n".encode())
        self._fh.write(self._tail)
        self._tail = bytearray()


def _copy_output(proc, log, deadline):
    """Copy the program's output into ``log`` until it exits; False if ``deadline`` comes first."""
    fd = proc.stdout.fileno()
    while True:
        left = None if deadline is None else deadline - time.monotonic()
        if left is not None and left <= 0:
            return proc.poll() is not None
        ready, _, _ = select.select([fd], [], [], 0.2 if left is None else min(0.2, left))
        if ready:
            chunk = os.read(fd, 1 << 16)
            if not chunk:  # every writer closed its end: only the exit is left to wait for
                try:
                    proc.wait(timeout=left)
                    return True
                except subprocess.TimeoutExpired:
                    return False
            log.write(chunk)
        if proc.poll() is not None:  # children left holding the pipe are killed with the group
            return True


def _drain(stream, log, idle=0.1, most=1.0):
    """Read what is left in the pipe once the program's group is gone (writers that escaped it aside)."""
    fd, end = stream.fileno(), time.monotonic() + most
    while time.monotonic() < end and select.select([fd], [], [], idle)[0]:
        chunk = os.read(fd, 1 << 16)
        if not chunk:
            return
        log.write(chunk)


def _run_program(args, cwd, timeout, env, log_path, tail_chars, log_limit):
    """Run the program in a session of its own; whatever happens, nothing it started outlives this call.

    The group kill takes the program and the children that stayed in its
    session. A descendant that started a session of its own (``setsid``,
    a daemon) leaves the group but keeps the environment, so a unique
    ``MMSVERIFY_RUN`` mark is set there and every process carrying it is
    killed at the end (see :mod:`mmsverify.execute.processes`): simpler than
    tracking parents, and it holds when the orphan is re-parented to init.
    """
    marker = f"{uuid.uuid4().hex}"
    env = {**env, "MMSVERIFY_RUN": marker}
    start = time.perf_counter()
    deadline = None if timeout is None else time.monotonic() + timeout
    Path(log_path).unlink(missing_ok=True)  # a link planted under this name is removed, not followed
    with open(log_path, "wb") as fh:
        log = _BoundedLog(fh, log_limit)
        proc = subprocess.Popen(args, cwd=cwd, env=env, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                                stderr=subprocess.STDOUT, start_new_session=True)
        timed_out = False
        try:
            if not _copy_output(proc, log, deadline):
                timed_out = True
                _kill_group(proc)
        except BaseException:  # interrupted (Ctrl-C, a level deadline): leave nothing running
            _kill_group(proc, grace=0.1)
            raise
        finally:
            try:  # children the program left behind in its group
                os.killpg(proc.pid, signal.SIGKILL)
            except (ProcessLookupError, PermissionError):
                pass
            kill_marked(f"MMSVERIFY_RUN={marker}".encode())  # and those that left its session
            proc.wait()
            try:
                _drain(proc.stdout, log)
            finally:
                proc.stdout.close()
                log.finish()
    return _Run(proc.returncode, timed_out, time.perf_counter() - start, _tail(log_path, tail_chars))


# -- solution files -------------------------------------------------------
_REPORTED_HASH = re.compile(rb"^[ \t]*(?:mms_)?content_hash[ \t]*[=:][ \t]*[\"']?(?:sha256:)?([0-9a-f]{12,64})\b",
                            re.IGNORECASE | re.MULTILINE)


def reported_hash(log_path):
    """The problem content hash a program printed (``content_hash = <hex>``) in its log, or None."""
    try:
        with open(log_path, "rb") as fh:
            head = fh.read(1 << 16)   # the program prints it first; the log keeps its first half whole
    except OSError:
        return None
    found = _REPORTED_HASH.search(head)
    return found.group(1).decode().lower() if found else None


def _check_handshake(log_path, problem, where, tail):
    """Fail the level when the program reports the content hash of another problem."""
    said = reported_hash(log_path)
    if said is None:
        return
    own = problem.content_hash()
    if not own.startswith(said):
        raise ProgramFailed("wrong problem", f"{where}: built for another problem: the program reports content "
                                             f"hash {said[:12]}, this problem's is {own[:12]}; rebuild it from "
                                             f"`mmsverify export {problem.name} --lang c` (or your language's "
                                             "export)", tail)


def _too_big(size, limit, path):
    if size > limit:
        raise ProgramFailed("bad output", f"{path} holds {size} bytes, more than the limit of {limit}; "
                                          "write fewer points or raise max_bytes")


def _regular_file(path, limit):
    """Refuse a device, pipe, socket or folder before it is opened, and a file over ``limit`` bytes."""
    try:
        size = regular_file(path, "solution file").st_size
    except MMSError as exc:
        raise ProgramFailed("bad output", str(exc)) from None
    _too_big(size, limit, path)


def _read_csv(path):
    try:
        text = read_text(path, "solution file", 1 << 40)  # the size was checked by read_solution
    except MMSError as exc:
        raise ProgramFailed("bad output", str(exc)) from None
    lines = text.splitlines()
    head = next((i for i, line in enumerate(lines) if line.strip() and not line.lstrip().startswith("#")), None)
    if head is None:
        raise ProgramFailed("bad output", f"{path} is empty; write a header line such as 'x,y,u' and one row "
                                          "per point")
    names = [n.strip() for n in lines[head].split(",")]
    if any(not _KEY.fullmatch(n) for n in names):
        raise ProgramFailed("bad output", f"{path}: the first line must name the columns, e.g. 'x,y,volume,u'; "
                                          f"got {lines[head][:80]!r}")
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise ProgramFailed("bad output", f"{path}: the header names the column(s) {', '.join(repeated)} more "
                                          "than once; name each column once")
    body = "\n".join(lines[head + 1:])
    if not any(ln.strip() and not ln.lstrip().startswith("#") for ln in lines[head + 1:]):  # loadtxt would warn
        raise ProgramFailed("bad output", f"{path} has a header but no rows")
    try:
        data = np.loadtxt(io.StringIO(body), delimiter=",", ndmin=2, comments="#", dtype=float)
    except ValueError as exc:
        raise ProgramFailed("bad output", f"{path}: rows do not match the header {names} ({exc}); every row "
                                          "needs one number per column") from None
    if data.size == 0:
        raise ProgramFailed("bad output", f"{path} has a header but no rows")
    if not text.endswith(("\n", "\r")):  # a number cut short still parses: 0.84147 of 0.8414709848
        raise ProgramFailed("bad output", f"{path} does not end with a line break, so its last row may be "
                                          "truncated (a write cut short); end every row with a newline")
    if data.shape[1] != len(names):
        raise ProgramFailed("bad output", f"{path}: rows have {data.shape[1]} columns but the header names "
                                          f"{len(names)}")
    return {n: data[:, i] for i, n in enumerate(names)}


def _read_npz(path, limit):
    try:
        with zipfile.ZipFile(path) as z:
            _too_big(sum(i.file_size for i in z.infolist()), limit, path)
        with np.load(path, allow_pickle=False) as data:
            return {k: np.asarray(data[k]) for k in data.files}
    except (zipfile.BadZipFile, ValueError, OSError, MemoryError) as exc:  # MemoryError: a header lying about size
        raise ProgramFailed("bad output", f"{path} is not a readable .npz of numeric arrays ({exc})") from None


def _read_npy(path):
    try:
        arr = np.load(path, allow_pickle=False)
    except (ValueError, OSError, MemoryError) as exc:
        raise ProgramFailed("bad output", f"{path} is not a readable .npy array ({exc})") from None
    if arr.dtype.names is None:
        raise ProgramFailed("bad output", f"{path}: a .npy solution must be a structured array with named "
                                          "columns (x, y, volume, u, ...); or write an .npz of named arrays")
    return {n: arr[n] for n in arr.dtype.names}


def _read_mesh(path, problem):
    try:
        return read_mesh_columns(path, [str(c) for c in problem.coords], problem.field_names)
    except ValueError as exc:
        raise ProgramFailed("bad output", str(exc)) from None


def read_solution(path, problem, fmt=None, *, max_bytes=1 << 30):
    """Read a solution a program wrote.

    Columns (CSV header names, ``.npz`` array names or ``.npy`` field names):
    the problem's coordinates (``x``, ``y``, ``z``; an ``.npz`` may instead
    hold ``points`` of shape (N, d)), optionally ``volume`` (the cell volume
    each point stands for), one or more of the problem's fields, and in an
    ``.npz`` optionally a scalar ``time``. Arrays of any shape are flattened;
    other columns are ignored. A ``.vtu`` mesh file gives the fields as
    point or cell data, and the points and volumes from its mesh (see
    :mod:`mmsverify.meshfiles`).

    Returns
    -------
    dict
        ``points`` (tuple of 1-D arrays), ``volume`` (array or None),
        ``values`` (dict of field to array), ``time`` (float or None) and
        ``ignored`` (names of unused columns).
    """
    path = Path(path)
    fmt = fmt or path.suffix.lstrip(".")
    if fmt not in OUTPUT_FORMATS:
        raise SolverError(f"unknown solution format {fmt!r}; use one of {', '.join(OUTPUT_FORMATS)}")
    _regular_file(path, max_bytes)
    try:
        if fmt in MESH_FORMATS:
            cols = _read_mesh(path, problem)
        else:
            cols = {"csv": _read_csv, "npy": _read_npy}[fmt](path) if fmt != "npz" else _read_npz(path, max_bytes)
    except UnicodeDecodeError:
        raise ProgramFailed("bad output", f"{path} is not UTF-8 text; write CSV as plain text") from None
    coords = [str(c) for c in problem.coords]
    time_value = cols.pop("time", None)
    if "points" in cols:
        if np.asarray(cols["points"]).dtype.kind not in "iuf":
            raise ProgramFailed("bad output", f"{path}: 'points' is not numeric; write real floating-point numbers")
        pts = np.asarray(cols.pop("points"), dtype=float)
        if pts.ndim != 2 or pts.shape[1] != len(coords):
            raise ProgramFailed("bad output", f"{path}: 'points' must have shape (N, {len(coords)}), "
                                              f"got {pts.shape}")
        cols.update({c: pts[:, i] for i, c in enumerate(coords)})
    missing = [c for c in coords if c not in cols]
    if missing:
        raise ProgramFailed("bad output", f"{path}: no column for coordinate(s) {missing}; found {sorted(cols)}")
    fields = [f for f in problem.field_names if f in cols]
    if not fields:
        raise ProgramFailed("bad output", f"{path}: no column for any field of {problem.name} "
                                          f"({', '.join(problem.field_names)}); found {sorted(cols)}")
    arrays = {}
    for name in coords + fields + (["volume"] if "volume" in cols else []):
        kind = np.asarray(cols[name]).dtype.kind
        if kind not in "iuf":  # float() would drop imaginary parts and parse text silently
            what = {"c": "complex", "b": "boolean", "U": "text", "S": "text"}.get(kind, "non-numeric")
            raise ProgramFailed("bad output", f"{path}: column {name!r} is not numeric ({what} values); write "
                                              "real floating-point numbers")
        arrays[name] = np.asarray(cols[name], dtype=float).ravel()
    sizes = {n: a.size for n, a in arrays.items()}
    if len(set(sizes.values())) != 1:
        raise ProgramFailed("bad output", f"{path}: columns have different lengths {sizes}; write one value "
                                          "per point in every column")
    if arrays[coords[0]].size == 0:
        raise ProgramFailed("bad output", f"{path} holds no points")
    for name in fields:
        bad = int((~np.isfinite(arrays[name])).sum())
        if bad:
            raise ProgramFailed("nan", f"{path}: field {name!r} has {bad} NaN/Inf value(s) of "
                                       f"{arrays[name].size}; the program diverged or left entries unset")
    for name in coords + (["volume"] if "volume" in arrays else []):
        if not np.isfinite(arrays[name]).all():
            raise ProgramFailed("bad output", f"{path}: column {name!r} contains NaN/Inf")
    volume = arrays.get("volume")
    if volume is not None and ((volume < 0).any() or volume.sum() <= 0):
        raise ProgramFailed("bad output", f"{path}: cell volumes must be non-negative and not all zero")
    if time_value is not None:
        time_value = np.asarray(time_value, dtype=float)
        if time_value.size != 1 or not np.isfinite(time_value).all():
            raise ProgramFailed("bad output", f"{path}: 'time' must be one finite number")
        time_value = float(time_value.ravel()[0])
    return {"points": tuple(arrays[c] for c in coords), "volume": volume,
            "values": {f: arrays[f] for f in fields}, "time": time_value,
            "ignored": sorted(set(cols) - set(arrays))}


# -- the solver -----------------------------------------------------------
def _safe(name):
    return re.sub(r"[^A-Za-z0-9_.-]", "_", name)


def _file_digest(path, limit=1 << 28):
    try:
        p = Path(path)
        if not p.is_file() or p.stat().st_size > limit:
            return None
        return hashlib.sha256(p.read_bytes()).hexdigest()[:16]
    except OSError:
        return None


@dataclass(frozen=True)
class ExternalSolver:
    """A solver that runs an external program once per level.

    Parameters
    ----------
    command : sequence of str
        Program and arguments, e.g. ``["./poisson2d", "{case}"]``; never run
        through a shell. Placeholders: ``{case}`` (case file), ``{out}``
        (where to write the solution), ``{dir}`` (the level's folder),
        ``{level}``, ``{problem}``, ``{hash}``.
    fmt : {"csv", "npz", "npy"}
        Format of the solution file (see :func:`read_solution`).
    timeout : float, optional
        Seconds per level; the program's process group is killed after it.
        A study's own time limit (``run_study(timeout=...)``) also applies:
        it kills the worker process that runs this solver, which kills the
        program first.
    workdir : path, optional
        Study folder; each level gets
        ``<problem>-<hash>/<solver>-<digest>/level-<k>-<cells>/`` with its case
        file, output log and solution, kept for inspection.
        By default a temporary folder per level, removed afterwards.
    case_format : {"toml", "json"}
    params : dict, optional
        Free parameters written to the case file as ``param.<name>``.
    env : dict, optional
        Extra environment variables (the case file's path is always in
        ``MMSVERIFY_CASE``).
    spacing : {"grid", "volumes"}
        Where h comes from: the case's grid, or ``(V/N)**(1/d)`` from the
        ``volume`` column (for unstructured meshes; one row per cell).
    max_bytes : int
        Largest solution file read.
    max_log_bytes : int
        Most of the program's output kept in ``output.log`` (1 MiB by
        default): the first and last halves, and a line
        ``... N bytes omitted ...`` between them.
    tail_chars : int
        How much of the program's output a failure message keeps.
    cwd : path, optional
        Working directory of the program: by default the current directory
        when the solver is created (so relative paths in ``command`` work as
        typed); ``"{dir}"`` runs it in each level's folder.
    label : str, optional
        Name in reports (default ``external:<program>``).
    formal_order : float, optional
        The program's design order, if it states one.
    """

    command: tuple
    fmt: str = "csv"
    timeout: float = None
    workdir: str = None
    case_format: str = "toml"
    params: dict = field(default_factory=dict)
    env: dict = field(default_factory=dict)
    spacing: str = "grid"
    max_bytes: int = 1 << 30
    max_log_bytes: int = 1 << 20
    tail_chars: int = 2000
    cwd: str = None
    label: str = None
    formal_order: float = None

    def __post_init__(self):
        cmd = self.command
        if isinstance(cmd, (str, bytes)) or not cmd or not all(isinstance(a, str) for a in cmd):
            raise SolverError(f"give the external command as a list of arguments, e.g. ['./solver', '{{case}}'] "
                              f"(it never runs through a shell); got {cmd!r}")
        object.__setattr__(self, "command", tuple(cmd))
        if self.cwd != "{dir}":
            object.__setattr__(self, "cwd", os.path.abspath(self.cwd or os.getcwd()))
        object.__setattr__(self, "params", dict(self.params or {}))
        object.__setattr__(self, "env", {str(k): str(v) for k, v in (self.env or {}).items()})
        expand_command(self.command, {})  # unknown placeholders fail now, not per level
        if self.fmt not in OUTPUT_FORMATS:
            raise SolverError(f"unknown solution format {self.fmt!r}; use one of {', '.join(OUTPUT_FORMATS)}")
        if self.case_format not in ("toml", "json"):
            raise SolverError(f"unknown case-file format {self.case_format!r}; use 'toml' or 'json'")
        if self.spacing not in ("grid", "volumes"):
            raise SolverError(f"spacing must be 'grid' or 'volumes', got {self.spacing!r}")
        if isinstance(self.max_log_bytes, bool) or not isinstance(self.max_log_bytes, int) or self.max_log_bytes < 2:
            raise SolverError(f"max_log_bytes must be a whole number of bytes, at least 2; got {self.max_log_bytes!r}")
        if self.timeout is not None and not self.timeout > 0:
            raise SolverError(f"the timeout must be a positive number of seconds, got {self.timeout!r}")

    @property
    def name(self):
        return self.label or f"external:{Path(self.command[0]).name}"

    def identity(self):
        """Text that changes when the program or its settings change (for the level cache).

        Every argument naming an existing file (the program, a script) is
        identified by the SHA-256 of its content, so rebuilding the program
        invalidates cached levels.
        """
        files = {}
        base = Path(self.cwd) if self.cwd != "{dir}" else Path.cwd()
        for arg in self.command:
            if "{" in arg:
                continue
            if (base / arg).is_file():
                found = base / arg
            else:
                found = shutil.which(arg) if os.sep not in arg else None
            digest = _file_digest(found) if found else None
            if digest:
                files[arg] = digest
        return json.dumps({"command": self.command, "fmt": self.fmt, "params": self.params, "env": self.env,
                           "spacing": self.spacing, "files": files}, sort_keys=True, default=repr)

    def __call__(self, case):
        grid, problem = case.grid, case.problem
        location = f"problem {problem.name}, level {grid.level} ({grid.describe()})"
        where = f"{location}, program {self.command[0]}"
        try:
            return self._call(case, where)
        except SolverError as exc:
            exc.location = location  # a study replaces it with its own, which names the solver too
            raise

    def _call(self, case, where):
        grid, problem = case.grid, case.problem
        if self.workdir:
            folder = (Path(self.workdir) / f"{_safe(problem.name)}-{problem.content_hash()[:10]}" /
                      f"{_safe(self.name)}-{hashlib.sha256(self.identity().encode()).hexdigest()[:8]}")
            level_dir = folder / f"level-{grid.level}-{'x'.join(map(str, grid.cells))}"
            level_dir.mkdir(parents=True, exist_ok=True)
            level_dir = level_dir.resolve()
            root = Path(self.workdir).resolve()
            if not level_dir.is_relative_to(root) or not level_dir.is_dir():
                raise SolverError(f"{where}: the level's folder leads to {level_dir}, outside the study folder "
                                  f"{root} (a link stands in its place); remove it and run again")
        else:
            level_dir = Path(tempfile.mkdtemp(prefix=f"mmsverify-level{grid.level}-")).resolve()
        try:
            return self._run(case, level_dir, where)
        finally:
            if not self.workdir:
                shutil.rmtree(level_dir, ignore_errors=True)

    def _run(self, case, level_dir, where):
        grid, problem = case.grid, case.problem
        out = level_dir / f"solution.{self.fmt}"
        out.unlink(missing_ok=True)  # never read a previous run's file
        case_path = write_case(case, level_dir, out, fmt=self.case_format, params=self.params)
        args = expand_command(self.command, {"case": case_path, "out": out, "dir": level_dir, "level": grid.level,
                                             "problem": problem.name, "hash": problem.content_hash()})
        env = {**os.environ, **self.env, "MMSVERIFY_CASE": str(case_path)}
        limit = self.timeout
        try:
            cwd = level_dir if self.cwd == "{dir}" else self.cwd
            run = _run_program(args, cwd, limit, env, level_dir / "output.log", self.tail_chars,
                               self.max_log_bytes)
        except FileNotFoundError:
            raise ProgramFailed("crash", f"{where}: cannot start {args[0]!r}: no such program; give its path "
                                         "(e.g. ./solver) or put it on PATH") from None
        except PermissionError:
            raise ProgramFailed("crash", f"{where}: cannot start {args[0]!r}: not executable; "
                                         f"run chmod +x {args[0]}") from None
        if run.timed_out:
            raise ProgramFailed("timeout", f"{where}: no result within {limit:g} s; its process group was killed",
                                run.tail)
        _check_handshake(level_dir / "output.log", problem, where, run.tail)
        if run.returncode != 0:
            how = (f"was killed by signal {signal.Signals(-run.returncode).name}" if run.returncode < 0
                   else f"exited with code {run.returncode}")
            raise ProgramFailed("crash", f"{where}: the program {how}", run.tail)
        try:
            mode = os.lstat(out).st_mode
        except FileNotFoundError:
            raise ProgramFailed("no output", f"{where}: the program finished but wrote no {out.name} "
                                             f"(expected at {out}, passed as {{out}} and in the case file)",
                                run.tail) from None
        if not stat.S_ISREG(mode):  # a link may lead out of the study folder; a pipe would block the read
            what = ("symbolic link" if stat.S_ISLNK(mode) else "directory" if stat.S_ISDIR(mode) else
                    "named pipe" if stat.S_ISFIFO(mode) else "device or socket")
            raise ProgramFailed("bad output", f"{where}: {out} is a {what}, not a regular file; write the "
                                              "solution itself at {out}", run.tail)
        try:
            sol = read_solution(out, problem, self.fmt, max_bytes=self.max_bytes)
        except ProgramFailed as exc:
            raise ProgramFailed(exc.kind, f"{where}: {exc}", run.tail) from None
        info = {"program_seconds": run.seconds, "output_tail": run.tail[-500:], "ignored_columns": sol["ignored"]}
        if self.workdir:
            info["folder"] = str(level_dir)
        if self.spacing == "volumes":
            if sol["volume"] is None:
                raise ProgramFailed("bad output", f"{where}: spacing='volumes' needs a 'volume' column in "
                                                  f"{out.name}", run.tail)
            info["h"] = float((sol["volume"].sum() / sol["volume"].size) ** (1.0 / grid.dim))
        return Solution(values=sol["values"], points=sol["points"], weights=sol["volume"], time=sol["time"],
                        info=info)
