"""Regression mode: save a verified study as a baseline, check later runs against it.

A baseline records the problem (by content hash), the exact grids, the
formal order and the error of every field and norm on every level. It does
not depend on the solver that produced it: :func:`check_baseline` reruns
the same grids with any solver (the same one after a change, or another
implementation of the same problem) and :func:`compare` applies two rules:

1. **order**: on each field and norm, the observed order on the two finest
   levels is at least ``formal - tolerance``;
2. **error level**: on each level, each error is at most ``error_factor``
   times the baseline's.

Quantities the recorded solver reported (functionals declared under
``[quantities]``) are held to both rules too, through the error of their
value; a baseline saved before quantities were recorded checks fields only.

A level that fails, a missing field or a grid that differs also fails the
check. :class:`BaselineCheck` says which rule failed, where, by how much
and what to do; its ``passed`` drives the exit code of
``mmsverify baseline check``. The file format is described in
``docs/json-schema.md``.
"""

from dataclasses import dataclass, field as _field
import datetime
import json
import logging
import math
import os
import stat
from pathlib import Path

from mmsverify.problem.origin import problem_of_record
from mmsverify.errors import MMSError
from mmsverify.execute.grids import Grid
from mmsverify.execute.norms import NORMS
from mmsverify.problem.record import PROBLEM_DIR

__all__ = ["FORMAT", "FORMAT_VERSION", "DEFAULT_ERROR_FACTOR", "Baseline", "Finding", "BaselineCheck",
           "baseline_from_study", "save_baseline", "load_baseline", "compare", "check_baseline", "run_record",
           "recorded_solver", "check_data"]

FORMAT = "mmsverify.baseline"
FORMAT_VERSION = 2
#: Versions this release reads (1 had no ``run`` table).
READS_VERSIONS = (1, 2)

_log = logging.getLogger(__name__)

#: Allowed growth of any error over the baseline's, unless stated otherwise.
DEFAULT_ERROR_FACTOR = 2.0

_CHANGED_PROBLEM = ("{source}: the problem changed since the baseline was saved (hash {hash}, baseline "
                    "{recorded}); pass the problem file the baseline was made with, or save a new baseline")


@dataclass(frozen=True)
class Baseline:
    """A verified study, reduced to what a later run is compared with.

    Attributes
    ----------
    problem, problem_hash, source : str
        Problem name, content hash and file it was read from.
    mode : str
        Refinement mode of the study.
    formal_order, tolerance : float
        The order rule: observed order at least ``formal_order - tolerance``.
    error_factor : float
        The error rule: errors at most this many times the recorded ones.
    grids : tuple of Grid
        The levels, to be rerun exactly.
    errors : dict
        ``errors[field][norm]``: list with one error per level (None where
        the level failed).
    observed : dict
        ``observed[field][norm]``: observed order of the baseline study
        (``observed[quantity]["value"]`` for a reported quantity).
    solver : str
        The solver the baseline was recorded with (information only).
    saved : str
        ISO 8601 time of saving.
    mmsverify_version : str
    quantities : dict
        ``quantities[name]``: list with the error of a reported quantity's
        value per level (None where the level failed or did not report it);
        empty for baselines saved before quantities were recorded.
    run : dict
        How to rerun the study: ``solver`` (the name given when saving, or
        None), ``external`` (the external program's ``command`` list,
        ``output_format``, ``case_format``, ``params`` and ``spacing``, or
        None), ``options`` (the solver options) and ``timeout``. Empty for
        baselines saved before it was recorded. A check never runs the
        recorded solver or program unless told to (see
        :func:`check_baseline`).
    """

    problem: str
    problem_hash: str
    source: str
    mode: str
    formal_order: float
    tolerance: float
    error_factor: float
    grids: tuple
    errors: dict
    observed: dict
    solver: str
    saved: str = ""
    mmsverify_version: str = ""
    quantities: dict = _field(default_factory=dict)
    run: dict = _field(default_factory=dict)

    def to_data(self, folder=None):
        """Plain JSON-ready data (see ``docs/json-schema.md``).

        With ``folder`` (where the file will live), the problem file is
        recorded relative to it, and bundled problems by name only, so a
        baseline committed to a repository works on every checkout.
        """
        return {"format": FORMAT, "format_version": FORMAT_VERSION, "mmsverify_version": self.mmsverify_version,
                "saved": self.saved, "recorded_with": self.solver,
                "problem": {"name": self.problem, "hash": self.problem_hash,
                            "source": _portable(self.source, folder)},
                "mode": self.mode, "formal_order": self.formal_order,
                "rules": {"order_tolerance": self.tolerance, "error_factor": self.error_factor},
                "grids": [{"level": g.level, "lower": list(g.lower), "upper": list(g.upper), "cells": list(g.cells),
                           "t_start": g.t_start, "t_end": g.t_end, "steps": g.steps} for g in self.grids],
                "errors": self.errors, "observed": self.observed, "quantity_errors": self.quantities,
                "run": self.run}

    @classmethod
    def from_data(cls, data, where="baseline", folder=None):
        """Rebuild from :meth:`to_data` output; raise :class:`MMSError` naming what is wrong.

        Every entry is checked by type and range (see :func:`_read`); a
        relative problem path is taken relative to ``folder``.
        """
        return _read(cls, data, where, folder)

    def __str__(self):
        lines = [f"baseline of {self.problem} (hash {self.problem_hash[:12]}), recorded with {self.solver}"
                 + (f" on {self.saved}" if self.saved else ""),
                 f"  rules: observed order >= {self.formal_order:g} - {self.tolerance:g}; errors <= "
                 f"{self.error_factor:g} x recorded",
                 f"  {'level':<6} {'grid':<22}" + "".join(f"{f + ' ' + n:>12}" for f in self.errors for n in NORMS)
                 + "".join(f" {q + ' error':>15}" for q in self.quantities)]
        for i, g in enumerate(self.grids):
            cells = "".join(f"{_num(self.errors[f][n][i]):>12}" for f in self.errors for n in NORMS)
            cells += "".join(f" {_num(e[i]):>15}" for e in self.quantities.values())
            lines.append(f"  {g.level:<6} {g.describe():<22}{cells}")
        return "\n".join(lines)


def _portable(source, folder):
    """Problem path to record: empty for bundled problems, relative to ``folder`` when possible."""
    if not source or folder is None or not Path(source).is_file():
        return source
    src = Path(source).resolve()
    if src.parent == PROBLEM_DIR.resolve():
        return ""
    try:
        return os.path.relpath(src, Path(folder).resolve())
    except ValueError:  # another drive on Windows
        return str(src)


def _num(x, spec=".3e"):
    return "-" if x is None else format(x, spec)


def baseline_from_study(result, error_factor=DEFAULT_ERROR_FACTOR, tolerance=None, allow_failing=False, run=None):
    """Reduce a finished study to a :class:`Baseline`.

    Parameters
    ----------
    result : StudyResult
    error_factor : float
        Allowed growth of errors in later checks (> 1).
    tolerance : float, optional
        Order tolerance of later checks (default: the study's).
    allow_failing : bool
        Record a study that did not pass (its errors then set a weak bar).
    run : dict, optional
        How the study was run, to rerun it (see :attr:`Baseline.run` and
        :func:`run_record`).

    Raises
    ------
    MMSError
        When the study did not pass and ``allow_failing`` is False, or the
        factor is not above 1.
    """
    from mmsverify import __version__
    if not error_factor > 1:
        raise MMSError(f"the error factor must exceed 1 (it bounds later errors by factor x baseline), "
                       f"got {error_factor}")
    if not result.passed and not allow_failing:
        bad = "; ".join(str(v) for v in result.verdicts if not v.ok) or "no level succeeded"
        raise MMSError(f"the study of {result.problem} with {result.solver} did not pass ({bad}); a baseline "
                       "should record a verified state. Fix the solver, or record it anyway with --allow-failing")
    errors = {f: {n: [lv.errors[f][n] if lv.ok and f in lv.errors else None for lv in result.levels]
                  for n in NORMS} for f in result.fields}
    quantities = {q: [lv.quantities[q]["error"] if lv.ok and q in lv.quantities else None for lv in result.levels]
                  for q in result.quantities}
    observed = {}
    for v in result.verdicts:
        observed.setdefault(v.field, {})[v.norm] = v.observed
    saved = datetime.datetime.now(datetime.timezone.utc).replace(microsecond=0).isoformat()
    return Baseline(result.problem, result.problem_hash, result.source, result.mode, result.formal_order,
                    float(result.tolerance if tolerance is None else tolerance), float(error_factor),
                    tuple(lv.grid for lv in result.levels), errors, observed, result.solver, saved, __version__,
                    quantities, _read_run(_plain_run(run)) if run else {})


def run_record(solver=None, options=None, timeout=None):
    """The :attr:`Baseline.run` table for a solver name or an ExternalSolver, its options and time limit."""
    from mmsverify.execute.external import ExternalSolver
    ext = None
    if isinstance(solver, ExternalSolver):
        ext = {"command": list(solver.command), "output_format": solver.fmt, "case_format": solver.case_format,
               "params": dict(solver.params), "spacing": solver.spacing}
        solver = None
    elif solver is not None and not isinstance(solver, str):
        solver = None   # a callable has no name that reruns it; the check names its solver
    return {"solver": solver, "external": ext, "options": dict(options or {}), "timeout": timeout}


def _plain_run(run):
    try:
        return json.loads(json.dumps(run, allow_nan=False))
    except (TypeError, ValueError) as exc:
        raise MMSError(f"the study's options cannot be recorded in a baseline ({exc}); use text, numbers or "
                       "true/false") from None


def save_baseline(result, path, **kwargs):
    """Write :func:`baseline_from_study` of ``result`` to ``path`` (JSON); returns the Baseline."""
    from mmsverify.fileio import write_atomic
    base = baseline_from_study(result, **kwargs)
    write_atomic(path, json.dumps(base.to_data(Path(path).parent), indent=2, allow_nan=False) + "\n")
    return base


# -- reading a baseline: one typed reader at the boundary -------------------
#: Largest baseline file read (bytes); a baseline of 30 levels and a dozen fields is a few tens of kB.
MAX_BASELINE_BYTES = 4 << 20
_MAX_DEPTH = 10
_SCALAR = (str, int, float, bool)


class _Bad(Exception):
    """One wrong entry: ``entry`` is its dotted path, ``what`` what is wrong with it."""

    def __init__(self, entry, what):
        super().__init__(entry, what)
        self.entry, self.what = entry, what


def _table(v, entry):
    if not isinstance(v, dict):
        raise _Bad(entry, f"expected a table (JSON object), got {_kind(v)}")
    return v


def _list(v, entry, length=None, most=None):
    if not isinstance(v, list):
        raise _Bad(entry, f"expected a list, got {_kind(v)}")
    if length is not None and len(v) != length:
        raise _Bad(entry, f"expected one entry per grid level ({length}), got {len(v)}")
    if most is not None and not 1 <= len(v) <= most:
        raise _Bad(entry, f"expected 1 to {most} entries, got {len(v)}")
    return v


def _text(v, entry, empty=True):
    if not isinstance(v, str) or (not empty and not v):
        raise _Bad(entry, f"expected {'text' if empty else 'non-empty text'}, got {_kind(v)}")
    return v


def _real(v, entry, low=None, above=None, none=False):
    if v is None and none:
        return None
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not abs(v) <= 1e300:  # also NaN; no float() of a huge int
        raise _Bad(entry, f"expected a finite number{' or null' if none else ''}, got {_kind(v)}")
    if (low is not None and v < low) or (above is not None and v <= above):
        raise _Bad(entry, f"expected a number {'>= %g' % low if low is not None else '> %g' % above}, got {v!r}")
    return float(v)


def _whole(v, entry, low, none=False, high=10 ** 9):
    if v is None and none:
        return None
    if isinstance(v, bool) or not isinstance(v, int) or not low <= v <= high:
        raise _Bad(entry, f"expected a whole number from {low} to {high}{' or null' if none else ''}, got "
                          f"{_kind(v)}")
    return v


def _choice(v, entry, allowed):
    if not isinstance(v, str) or v not in allowed:
        raise _Bad(entry, f"expected one of {', '.join(map(repr, allowed))}, got {_kind(v)}")
    return v


def _kind(v):
    if isinstance(v, int) and not isinstance(v, bool) and abs(v) > 10 ** 30:
        return "a whole number of %d digits" % len(str(abs(v)))
    return repr(v) if isinstance(v, (bool, int, float)) or v is None else \
        (repr(v[:40]) if isinstance(v, str) else type(v).__name__.replace("dict", "table"))


def _scalars(v, entry):
    out = {}
    for k, x in _table(v, entry).items():
        if not isinstance(x, _SCALAR) or (isinstance(x, float) and not math.isfinite(x)):
            raise _Bad(f"{entry}.{k}", f"expected text, a finite number or true/false, got {_kind(x)}")
        out[k] = x
    return out


def _depth(v, depth=0):
    if depth > _MAX_DEPTH:
        raise _Bad("(file)", f"nested deeper than {_MAX_DEPTH} levels")
    for x in (v.values() if isinstance(v, dict) else v if isinstance(v, list) else ()):
        _depth(x, depth + 1)


def _read_run(v):
    from mmsverify.execute.external import OUTPUT_FORMATS
    if v is None or v == {}:
        return {}
    v = _table(v, "run")
    run = {"solver": None if v.get("solver") is None else _text(v["solver"], "run.solver", empty=False),
           "external": None, "options": _scalars(v.get("options", {}), "run.options"),
           "timeout": _real(v.get("timeout"), "run.timeout", above=0, none=True)}
    ext = v.get("external")
    if ext is not None:
        ext = _table(ext, "run.external")
        cmd = _list(ext.get("command"), "run.external.command", most=256)
        run["external"] = {
            "command": [_text(a, f"run.external.command[{i}]", empty=i > 0) for i, a in enumerate(cmd)],
            "output_format": _choice(ext.get("output_format", "csv"), "run.external.output_format", OUTPUT_FORMATS),
            "case_format": _choice(ext.get("case_format", "toml"), "run.external.case_format", ("toml", "json")),
            "params": _scalars(ext.get("params", {}), "run.external.params"),
            "spacing": _choice(ext.get("spacing", "grid"), "run.external.spacing", ("grid", "volumes"))}
    unknown = sorted(set(v) - {"solver", "external", "options", "timeout"})
    if unknown:
        raise _Bad(f"run.{unknown[0]}", "unknown entry")
    return run


def _read(cls, data, where, folder):
    """A :class:`Baseline` from parsed JSON, every entry checked; MMSError naming the file and the entry."""
    from mmsverify.study.refinement import MAX_LEVELS, MODES
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise MMSError(f"{where}: not an mmsverify baseline (expected format {FORMAT!r}); make one with "
                       "`mmsverify baseline save PROBLEM SOLVER -o FILE`")
    version = data.get("format_version")
    if isinstance(version, bool) or version not in READS_VERSIONS:
        raise MMSError(f"{where}: baseline format version {_kind(version)} is not read by this "
                       f"release (reads {', '.join(map(str, READS_VERSIONS))}); save the baseline again")
    try:
        _depth(data)
        grids = []
        for i, g in enumerate(_list(data.get("grids"), "grids", most=MAX_LEVELS)):
            e = f"grids[{i}]"
            g = _table(g, e)
            cells = [_whole(c, f"{e}.cells", 1) for c in _list(g.get("cells"), f"{e}.cells", most=3)]
            lower = [_real(x, f"{e}.lower") for x in _list(g.get("lower"), f"{e}.lower", length=len(cells))]
            upper = [_real(x, f"{e}.upper") for x in _list(g.get("upper"), f"{e}.upper", length=len(cells))]
            try:
                grids.append(Grid(_whole(g.get("level"), f"{e}.level", 0), tuple(lower), tuple(upper), tuple(cells),
                                  t_start=_real(g.get("t_start"), f"{e}.t_start", none=True),
                                  t_end=_real(g.get("t_end"), f"{e}.t_end", none=True),
                                  steps=_whole(g.get("steps"), f"{e}.steps", 1, none=True)))
            except (ValueError, TypeError, MMSError) as exc:
                raise _Bad(e, str(exc)) from None
        n = len(grids)
        p = _table(data.get("problem"), "problem")
        rules = _table(data.get("rules"), "rules")
        source = _text(p.get("source", ""), "problem.source")
        if source and folder is not None and not Path(source).is_absolute():
            source = str(Path(folder) / source)
        errors = {}
        for f, per in _table(data.get("errors"), "errors").items():
            per = _table(per, f"errors.{f}")
            missing = [m for m in NORMS if m not in per]
            extra = [m for m in per if m not in NORMS]
            if missing or extra:
                raise _Bad(f"errors.{f}", f"expected the norms {', '.join(NORMS)}; "
                           + (f"missing {', '.join(missing)}" if missing else f"unknown {extra[0]!r:.40}"))
            errors[f] = {m: [_real(x, f"errors.{f}.{m}[{i}]", low=0, none=True)
                             for i, x in enumerate(_list(per[m], f"errors.{f}.{m}", length=n))] for m in NORMS}
        if not errors:
            raise _Bad("errors", "no field recorded")
        observed = {f: {m: _real(x, f"observed.{f}.{m}", none=True) for m, x in _table(per, f"observed.{f}").items()}
                    for f, per in _table(data.get("observed", {}), "observed").items()}
        quantities = {q: [_real(x, f"quantity_errors.{q}[{i}]", low=0, none=True)
                          for i, x in enumerate(_list(e, f"quantity_errors.{q}", length=n))]
                      for q, e in _table(data.get("quantity_errors", {}), "quantity_errors").items()}
        return cls(_text(p.get("name"), "problem.name", empty=False), _text(p.get("hash", ""), "problem.hash"),
                   source, _choice(data.get("mode"), "mode", MODES),
                   _real(data.get("formal_order"), "formal_order", above=0),
                   _real(rules.get("order_tolerance"), "rules.order_tolerance", low=0),
                   _real(rules.get("error_factor"), "rules.error_factor", above=1), tuple(grids), errors, observed,
                   _text(data.get("recorded_with", ""), "recorded_with"), _text(data.get("saved", ""), "saved"),
                   _text(data.get("mmsverify_version", ""), "mmsverify_version"), quantities,
                   _read_run(data.get("run")))
    except _Bad as bad:
        raise MMSError(f"{where}: damaged baseline, entry {bad.entry}: {bad.what}; save it again with "
                       "`mmsverify baseline save`") from None


def _file_text(path):
    """The text of a baseline file: a regular file of bounded size (a byte-order mark is dropped)."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise MMSError(f"{path}: no such baseline file; make one with `mmsverify baseline save`") from None
    except OSError as exc:
        raise MMSError(f"{path}: cannot read the baseline file ({exc.strerror})") from None
    if not stat.S_ISREG(st.st_mode):
        raise MMSError(f"{path}: not a regular file (a folder, device, pipe or socket); give the baseline's JSON file")
    if st.st_size > MAX_BASELINE_BYTES:
        raise MMSError(f"{path}: {st.st_size} bytes, more than a baseline holds ({MAX_BASELINE_BYTES}); "
                       "is this the right file?")
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(fd, "rb") as fh:
            if not stat.S_ISREG(os.fstat(fh.fileno()).st_mode):
                raise MMSError(f"{path}: not a regular file")
            raw = fh.read(MAX_BASELINE_BYTES + 1)
    except OSError as exc:
        raise MMSError(f"{path}: cannot read the baseline file ({exc.strerror})") from None
    if len(raw) > MAX_BASELINE_BYTES:
        raise MMSError(f"{path}: more than {MAX_BASELINE_BYTES} bytes; is this the right file?")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise MMSError(f"{path}: not UTF-8 text ({exc.reason} at byte {exc.start})") from None


def _no_constant(name):
    raise ValueError(f"{name} is not a number a baseline may hold")


def load_baseline(path):
    """Read a baseline file, checking every entry (see :meth:`Baseline.from_data`)."""
    path = Path(path)
    text = _file_text(path)
    try:
        data = json.loads(text, parse_constant=_no_constant)
    except RecursionError:
        raise MMSError(f"{path}: damaged baseline: nested too deeply") from None
    except ValueError as exc:
        raise MMSError(f"{path}: cannot read it as JSON ({exc})") from None
    return Baseline.from_data(data, str(path), path.parent)


@dataclass(frozen=True)
class Finding:
    """One broken rule: ``kind`` is order, error, level, field, quantity, grid or problem.

    For a quantity, ``field`` is its name and ``norm`` is ``"value"``.
    """

    kind: str
    field: str
    norm: str
    level: int
    message: str

    def __str__(self):
        return f"{self.kind}: {self.message}"


@dataclass(frozen=True)
class BaselineCheck:
    """Outcome of comparing a run with a baseline.

    ``comparisons`` holds ``(field, norm, level, baseline error, current
    error)`` for every level both runs solved (a quantity as ``(name,
    "value", ...)``); ``findings`` the broken
    rules; ``passed`` is True when there are none.
    """

    baseline: Baseline
    result: object
    error_factor: float
    tolerance: float
    norms: tuple
    findings: tuple
    comparisons: tuple
    notes: tuple = ()

    @property
    def passed(self):
        return not self.findings

    def summary(self):
        """The outcome and the broken rules, without the table of errors."""
        return str(self).split("\n\n")[0]

    def __str__(self):
        b, r = self.baseline, self.result
        floor = b.formal_order - self.tolerance
        head = "NO REGRESSION" if self.passed else "REGRESSION"
        lines = [f"{head}  {b.problem}: solver {r.solver} against the baseline recorded with {b.solver}"
                 + (f" ({b.saved})" if b.saved else ""),
                 f"  rules: observed order >= {floor:g} (formal {b.formal_order:g} - tolerance {self.tolerance:g}); "
                 f"every error <= {self.error_factor:g} x baseline; norms {', '.join(self.norms)}"]
        for f in self.findings:
            lines.append(f"  !! {f.kind:<7} {f.message}")
        if self.passed:
            lines.append(f"  ok  {len(self.norms) * len(b.errors) + len(b.quantities)} order checks and "
                         f"{len(self.comparisons)} error "
                         "comparisons within the rules")
        lines += [f"  note: {n}" for n in self.notes]
        if self.comparisons:
            lines.append("")
            w = max([6] + [len(c[0]) for c in self.comparisons])
            lines.append(f"  {'field':<{w}} {'norm':<5} {'level':<6} {'baseline':>11} {'current':>11} {'ratio':>8}")
            for f, n, lv, e0, e1 in self.comparisons:  # the broken rules are listed once, above
                ratio = e1 / e0 if e0 > 0 else float("inf")
                lines.append(f"  {f:<{w}} {n:<5} {lv:<6} {e0:>11.3e} {e1:>11.3e} {ratio:>8.2f}")
        if not self.passed:
            lines.append("")
            lines.append("  If the change is intended (a new scheme, a new problem, other grids), record a new "
                         "baseline with `mmsverify baseline save`; otherwise the solver has regressed.")
        return "\n".join(lines)


def compare(baseline, result, error_factor=None, tolerance=None, norms=None):
    """Compare a finished study with a baseline (no solver run).

    Parameters
    ----------
    baseline : Baseline
    result : StudyResult
        A study on the baseline's grids.
    error_factor, tolerance : float, optional
        Override the baseline's rules.
    norms : sequence of str, optional
        Norms to check (default all). Without it, the order rule applies in
        the norms the study judged each field in (a solver may state them,
        see :func:`mmsverify.study.refinement.judged_norms`) and the error rule in all.

    Returns
    -------
    BaselineCheck
    """
    factor = float(baseline.error_factor if error_factor is None else error_factor)
    tol = float(baseline.tolerance if tolerance is None else tolerance)
    from mmsverify.problem.rules import check_rule     # a band as wide as half the order would pass a wrong order
    check_rule(baseline.formal_order, tol, f"baseline of {baseline.problem}, order rule")
    chosen = norms is not None
    norms = tuple(norms or NORMS)
    unknown = [n for n in norms if n not in NORMS]
    if unknown:
        raise MMSError(f"unknown norm(s) {', '.join(unknown)}; choose from {', '.join(NORMS)}")
    findings, comparisons, notes = [], [], []
    if baseline.problem_hash and result.problem_hash and baseline.problem_hash != result.problem_hash:
        findings.append(Finding("problem", "", "", -1,
                                f"the run solved a different problem (hash {result.problem_hash[:12]}) than the "
                                f"baseline ({baseline.problem_hash[:12]}); compare runs of the same problem"))
    cells = [(g.cells, g.steps) for g in baseline.grids]
    if [(lv.grid.cells, lv.grid.steps) for lv in result.levels] != cells:
        findings.append(Finding("grid", "", "", -1, "the run used other grids than the baseline; rerun it with "
                                "check_baseline (or `mmsverify baseline check`), which uses the baseline's grids"))
        return BaselineCheck(baseline, result, factor, tol, norms, tuple(findings), ())
    verdicts = {(v.field, v.norm): v for v in result.verdicts}
    rules = (baseline.formal_order, tol, factor)
    best = 0.0
    for f, per_norm in baseline.errors.items():
        if f not in result.fields:
            findings.append(Finding("field", f, "", -1, f"field {f} is missing from the run; the baseline has it"))
            continue
        judged = norms if chosen else tuple(getattr(result, "judged_norms", {}).get(f, NORMS))
        for n in norms:
            current = [lv.errors[f][n] if lv.ok and f in lv.errors else None for lv in result.levels]
            best = max(best, _check_series(baseline, result, f, n, per_norm[n], current, verdicts.get((f, n)),
                                           rules, findings, comparisons, judge_order=n in judged))
    for q, recorded in baseline.quantities.items():
        if q not in result.quantities:
            findings.append(Finding("quantity", q, "value", -1,
                                    f"quantity {q} is missing from the run; the baseline has it (a solver reports "
                                    "it in Solution.quantities)"))
            continue
        current = [lv.quantities[q]["error"] if lv.ok and q in lv.quantities else None for lv in result.levels]
        best = max(best, _check_series(baseline, result, q, "value", recorded, current, verdicts.get((q, "value")),
                                       rules, findings, comparisons))
    for lv, recorded_ok in zip(result.levels, zip(*[baseline.errors[f][NORMS[0]] for f in baseline.errors])):
        if not lv.ok and any(e is not None for e in recorded_ok):
            first = lv.message.splitlines()[0] if lv.message else "failed"
            findings.append(Finding("level", "", "", lv.level, f"level {lv.level} ({lv.grid.describe()}) failed, "
                                    f"the baseline solved it: {first}"))
    rank = ("problem", "grid", "field", "quantity", "level", "order", "error")
    findings.sort(key=lambda f: rank.index(f.kind))
    if not findings and best > factor:
        notes.append(f"errors fell by up to {best:.1f} x; save a new baseline to hold the solver to its new level")
    return BaselineCheck(baseline, result, factor, tol, norms, tuple(findings), tuple(comparisons), tuple(notes))


def _check_series(baseline, result, f, n, recorded, current, verdict, rules, findings, comparisons,
                  judge_order=True):
    """Apply the order and error rules to one field and norm (or one quantity, norm ``"value"``).

    ``judge_order`` False: the error rule only (a norm the study measured but did not judge).
    Appends to ``findings`` and ``comparisons``; returns the largest factor
    by which an error fell (0 when none was compared).
    """
    formal, tol, factor = rules
    floor = formal - tol
    was = baseline.observed.get(f, {}).get(n)
    was_text = f"; the baseline observed {was:.2f}" if was is not None else ""
    if not judge_order:
        pass
    elif verdict is None or verdict.observed is None:
        why = verdict.reason if verdict is not None else "no verdict"
        findings.append(Finding("order", f, n, -1, f"{f} {n}: no observed order ({why})"))
    elif verdict.observed < floor:
        findings.append(Finding("order", f, n, -1,
                                f"{f} {n}: observed order {verdict.observed:.2f} is below {floor:g} (formal "
                                f"{formal:g} - tolerance {tol:g}){was_text}"))
    best = 0.0
    for lv, e0, e1 in zip(result.levels, recorded, current):
        if e0 is None or e1 is None:
            continue  # a failed level is reported once per level; an unreported quantity by its order
        comparisons.append((f, n, lv.level, e0, e1))
        if e0 > 0:
            best = max(best, e0 / e1 if e1 > 0 else float("inf"))
        if e1 > factor * e0:
            findings.append(Finding("error", f, n, lv.level,
                                    f"{f} {n} on level {lv.level} ({lv.grid.describe()}): error {e1:.3e} is "
                                    f"{e1 / e0:.1f} x the baseline's {e0:.3e}, more than the allowed {factor:g} x"))
    return best


def recorded_solver(baseline, rerun_recorded=False):
    """The solver a baseline was recorded with, when it may be rerun without being named.

    A registered solver name (see
    :func:`~mmsverify.execute.solvers.registered_solvers`) is installed
    code and is returned as it is. A
    ``module:function`` or an external program named by the file is run
    only with ``rerun_recorded=True``: a baseline is data, and data never
    chooses the code that runs. Raises MMSError otherwise.
    """
    from mmsverify.execute.external import ExternalSolver
    from mmsverify.execute.solvers import registered_solvers
    run = baseline.run or {}
    ext = run.get("external")
    name = run.get("solver") or (baseline.solver if not run else None)
    if ext is None and name in registered_solvers():
        return name
    what = (f"the external program {' '.join(ext['command'])!r}" if ext else
            f"the solver {name!r}" if name else f"{baseline.solver!r}, which cannot be rerun by name")
    if not rerun_recorded or (ext is None and not name):
        hint = (" or pass --rerun-recorded to run it" if ext or name else "")
        raise MMSError(f"the baseline was recorded with {what}; a baseline does not choose the code that runs: "
                       f"name the solver (`mmsverify baseline check FILE SOLVER` or --external COMMAND){hint}")
    if ext:
        return ExternalSolver(ext["command"], fmt=ext["output_format"], case_format=ext["case_format"],
                              params=ext["params"], spacing=ext["spacing"], timeout=run.get("timeout"))
    return name


def check_baseline(baseline, solver=None, *, problem=None, error_factor=None, tolerance=None, norms=None,
                   running=None, options=None, rerun_recorded=False):
    """Rerun the baseline's grids with a solver and compare.

    Parameters
    ----------
    baseline : Baseline or path
    solver : optional
        Callable, ``module:function``, bundled name or ExternalSolver;
        default the solver the baseline was recorded with, when it is a
        bundled one or ``rerun_recorded`` is True (see :func:`recorded_solver`).
    problem : optional
        Problem object, file or bundled name; default the baseline's file,
        else its bundled name. Its content hash must match the baseline's.
    error_factor, tolerance, norms : optional
        Override the baseline's rules (see :func:`compare`).
    running : Running, optional
        How the levels run (see :mod:`mmsverify.study.settings`); without a
        time limit of its own, the recorded one applies.
    options : dict, optional
        Solver options; default the recorded ones.
    rerun_recorded : bool
        Allow rerunning a recorded ``module:function`` or external program.

    Returns
    -------
    BaselineCheck

    Raises
    ------
    ProblemError
        When the problem's content differs from the baseline's.
    MMSError
        When no solver is named and the recorded one may not be rerun.
    """
    from mmsverify.study.refinement import run_study
    from mmsverify.study.settings import Judging, Refinement
    if not isinstance(baseline, Baseline):
        baseline = load_baseline(baseline)
    problem = problem_of_record(baseline, problem, mismatch=_CHANGED_PROBLEM)
    if solver is None:
        solver = recorded_solver(baseline, rerun_recorded)
    if options is None:
        options = (baseline.run or {}).get("options") or None
    _log.info("rerunning the %d levels of baseline %s (recorded with %s)", len(baseline.grids), baseline.problem,
              baseline.solver)
    result = run_study(problem, solver, Refinement(grids=baseline.grids, mode=baseline.mode),
                       Judging(formal_order=baseline.formal_order,
                               tolerance=baseline.tolerance if tolerance is None else tolerance),
                       running, options=options)
    return compare(baseline, result, error_factor, tolerance, norms)


def check_data(check):
    """A :class:`BaselineCheck` as plain JSON-ready data (``mmsverify baseline check --json``)."""
    b, r = check.baseline, check.result
    return {"format": "mmsverify.baseline-check", "format_version": 1, "passed": check.passed,
            "problem": b.problem, "problem_hash": b.problem_hash, "solver": r.solver, "recorded_with": b.solver,
            "rules": {"formal_order": b.formal_order, "order_tolerance": check.tolerance,
                      "error_factor": check.error_factor, "norms": list(check.norms)},
            "findings": [{"kind": f.kind, "field": f.field, "norm": f.norm, "level": f.level if f.level >= 0 else None,
                          "message": f.message} for f in check.findings],
            "comparisons": [{"field": f, "norm": n, "level": lv, "baseline": e0, "current": e1}
                            for f, n, lv, e0, e1 in check.comparisons],
            "notes": list(check.notes)}
