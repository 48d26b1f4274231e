"""A study as JSON and CSV files, with every number, and back.

The formats are documented in ``docs/json-schema.md``; the JSON is also
described by the JSON Schema ``docs/study.schema.json``. The JSON holds
everything needed to rebuild the :class:`~mmsverify.study.refinement.StudyResult`
(:func:`read_json`), so reports can be drawn later without rerunning the
solver. Its keys are a superset of :meth:`StudyResult.to_dict`.

Non-finite numbers (an undefined order) are written as ``null``, so the
files are strict JSON that any language reads.
"""

import csv
import dataclasses
import io
import json
import math
from pathlib import Path

from mmsverify.errors import GridError, MMSError
from mmsverify.fileio import (as_int, as_number, load_json_file, need, need_bool, need_choice, need_dict,
                              need_int, need_list, need_number, need_str, write_atomic)
from mmsverify.execute.grids import Grid
from mmsverify.execute.gradnorms import ALL_NORMS
from mmsverify.execute.norms import NORMS
from mmsverify.execute.level import LevelResult
from mmsverify.study.refinement import NORMS_SOURCES, StudyResult, rejudge
from mmsverify.analysis.verdict import Verdict
from mmsverify.render.wording import level_rows, shown_norms
from mmsverify.render.quantities import quantity_rows
from mmsverify.render.text import CAUTION

__all__ = ["FORMAT", "FORMAT_VERSION", "CSV_COLUMNS", "study_to_data", "study_from_data", "write_json",
           "read_json", "write_csv", "csv_text"]

FORMAT = "mmsverify.study"
FORMAT_VERSION = 1

#: Columns of the CSV file, one row per level, field and norm, then one per level and reported quantity
#: (``field`` its name, ``norm`` ``"value"``; ``value`` and ``exact`` are empty on field rows).
CSV_COLUMNS = ("problem", "solver", "mode", "level", "cells", "steps", "h", "dt", "status", "seconds",
               "n_points", "field", "norm", "error", "order", "scale", "formal_order", "tolerance",
               "verdict", "observed_order", "message", "value", "exact")


def _clean(x):
    """JSON-ready copy: tuples to lists, numpy scalars to Python, non-finite floats to None."""
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if hasattr(x, "item") and not isinstance(x, (str, bytes)):  # numpy scalar
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def _version():
    from mmsverify import __version__
    return __version__


def study_to_data(result):
    """Plain data (JSON-ready) holding every number of a study.

    Parameters
    ----------
    result : StudyResult

    Returns
    -------
    dict
        The keys of ``result.to_dict()`` plus ``format``, ``format_version``,
        ``mmsverify_version``, ``outcome``, ``caution`` and per level the
        box (``lower``, ``upper``, ``t_start``, ``t_end``) and ``scale``.
    """
    data = {"format": FORMAT, "format_version": FORMAT_VERSION, "mmsverify_version": _version(),
            "outcome": result.outcome}
    data.update(result.to_dict())
    for out, lv in zip(data["levels"], result.levels):
        g = lv.grid
        out.update({"lower": list(g.lower), "upper": list(g.upper), "t_start": g.t_start, "t_end": g.t_end,
                    "scale": dict(lv.scale)})
    data["verdicts"] = [{f.name: getattr(v, f.name) for f in dataclasses.fields(v)} for v in result.verdicts]
    data["caution"] = CAUTION
    return _clean(data)


#: Limits of a study file read back: far above what a study writes (at most 30 levels, a few fields).
MAX_STUDY_BYTES = 16 * 2**20
MAX_LEVELS = 1000
MAX_ENTRIES = 10_000
_STATUSES = ("ok", "failed")
_VERDICT_STATUSES = ("confirmed", "below", "above", "inconclusive")
_MODES = ("combined", "space", "time")
_ORDER_SOURCES = ("problem", "solver", "caller")
_AXES = ("space", "time")
_USED_FOR = ("verdicts", "grids")
_INCOMPLETE = ("; the file is not a complete mmsverify study (write it with `mmsverify report ... --json` "
               "or mmsverify.outputs.studyfile.write_json)")


def _need(data, key, where):
    try:
        return need(data, key, where)
    except MMSError as exc:
        raise MMSError(f"{exc}{_INCOMPLETE}") from None


def _require(data, keys, where):
    """Every key of ``keys`` present (the keys ``docs/study.schema.json`` requires)."""
    missing = [k for k in keys if k not in data]
    if missing:
        raise MMSError(f"{where}: missing key(s) {', '.join(map(repr, missing))}{_INCOMPLETE}")


_STUDY_KEYS = ("mmsverify_version", "outcome", "problem", "problem_hash", "source", "solver", "mode",
               "formal_order", "tolerance", "passed", "levels", "orders", "verdicts", "caution")
_LEVEL_KEYS = ("level", "cells", "steps", "h", "dt", "status", "message", "seconds", "n_points", "errors", "lower",
               "upper", "t_start", "t_end", "scale")


def _optional_number(d, key, where):
    """A finite number, or None for ``null`` (a steady problem's times)."""
    return None if d.get(key) is None else need_number(d, key, where)


def _numbers(d, key, where, label=None, **limits):
    """A dict of name to number (``null`` for an undefined one read as NaN), e.g. the three norms."""
    out = {}
    for name, value in need_dict(d, key, where, {}, max_len=MAX_ENTRIES).items():
        out[name] = as_number(value, f"{where}, {label or key}", name, **limits)
    return out


def _level(d, where):
    """One level entry as a LevelResult; every value read is checked for its type and range."""
    need(d, "level", where)  # an object, or an error naming the entry
    _require(d, _LEVEL_KEYS, where)
    _optional_number(d, "dt", where)
    lower = need_list(d, "lower", where, max_len=3)
    upper = need_list(d, "upper", where, max_len=3)
    cells = need_list(d, "cells", where, max_len=3)
    if not cells or not len(lower) == len(upper) == len(cells):
        raise MMSError(f"{where}: cells, lower and upper must list 1 to 3 values each, one per axis; got "
                       f"{len(cells)}, {len(lower)} and {len(upper)}")
    t_start, t_end = _optional_number(d, "t_start", where), _optional_number(d, "t_end", where)
    if (t_start is None) != (t_end is None) or (t_start is not None and not t_end > t_start):
        raise MMSError(f"{where}: t_start and t_end must both be null (a steady problem) or both numbers with "
                       f"t_end after t_start; got {t_start!r} and {t_end!r}")
    try:
        grid = Grid(need_int(d, "level", where, maximum=MAX_LEVELS),
                    tuple(as_number(x, f"{where}, lower") for x in lower),
                    tuple(as_number(x, f"{where}, upper") for x in upper),
                    tuple(as_int(n, f"{where}, cells", minimum=1) for n in cells),
                    t_start=t_start, t_end=t_end, steps=need_int(d, "steps", where, None, minimum=1, null=True))
    except GridError as exc:
        raise MMSError(f"{where}: {exc}") from None
    errors = {}
    for f in need_dict(d, "errors", where, {}, max_len=MAX_ENTRIES):
        e = _numbers(d["errors"], f, where, f"errors {f}", null=True)
        missing = [n for n in NORMS if n not in e]
        if missing:
            raise MMSError(f"{where}, errors {f}: missing the norm(s) {', '.join(missing)}")
        errors[f] = e
    quantities = {}
    for q in need_dict(d, "quantities", where, {}, max_len=MAX_ENTRIES):
        quantities[q] = _numbers(d["quantities"], q, where, f"quantities {q}", null=True)
        missing = [k for k in ("value", "exact", "error") if k not in quantities[q]]
        if missing:
            raise MMSError(f"{where}, quantities {q}: missing {', '.join(missing)}")
    return LevelResult(grid.level, grid, need_number(d, "h", where, positive=True), need_choice(d, "status", where, _STATUSES),
                       errors, need_number(d, "seconds", where, 0.0, minimum=0),
                       need_int(d, "n_points", where, 0, maximum=2**62), _numbers(d, "scale", where),
                       need_str(d, "message", where, ""), quantities=quantities,
                       info=dict(need_dict(d, "info", where, {}, max_len=MAX_ENTRIES)))


def _verdict(v, where):
    """One stored verdict. Only what was judged and by which rule is taken from the file: the status, the
    kind and the interval are judged again from the stored errors (:func:`rejudge`), never taken on the
    file's word; they are still checked for their types."""
    _require(v, ("field", "norm", "formal", "observed", "tolerance", "status", "reason"), where)
    need_str(v, "kind", where, "", max_len=200)
    interval = need_list(v, "interval", where, None, max_len=2) if v.get("interval") is not None else None
    if interval is not None and len(interval) != 2:
        raise MMSError(f"{where}, key 'interval': expected null or [lower, upper], got {_short(interval)}")
    for x in interval or ():
        as_number(x, f"{where}, interval", null=True)
    for k in need_list(v, "left_out", where, [], max_len=MAX_LEVELS):
        as_int(k, f"{where}, left_out", maximum=MAX_LEVELS)
    return Verdict(need_str(v, "field", where, max_len=1000), need_choice(v, "norm", where, ALL_NORMS + ("value",)),
                   need_number(v, "formal", where), need_number(v, "observed", where, math.nan, null=True),
                   need_number(v, "tolerance", where, minimum=0), need_choice(v, "status", where, _VERDICT_STATUSES, ""),
                   need_str(v, "reason", where, ""), at_least=need_bool(v, "at_least", where, False))


def _conflict(c, where):
    return {"axis": need_choice(c, "axis", where, _AXES), "solver": need_number(c, "solver", where, positive=True),
            "problem": need_number(c, "problem", where, positive=True),
            "used_for": need_choice(c, "used_for", where, _USED_FOR)}


def _check_derived(data, where):
    """Keys written for other readers and recomputed here: checked for their type only."""
    need_str(data, "mmsverify_version", where, "", max_len=200)
    need_choice(data, "outcome", where, ("pass", "fail", "inconclusive"), None)
    need_bool(data, "passed", where, None)
    need_str(data, "caution", where, "")
    for i, n in enumerate(need_list(data, "notes", where, [], max_len=MAX_ENTRIES)):
        need_str({"note": n}, "note", f"{where}, notes entry {i}")
    for f, norms in need_dict(data, "orders", where, {}, max_len=MAX_ENTRIES).items():
        for n in need_dict(data["orders"], f, f"{where}, orders", max_len=MAX_ENTRIES):
            _orders(norms, n, f"{where}, orders {f}")
    quantity_orders = need_dict(data, "quantity_orders", where, {}, max_len=MAX_ENTRIES)
    for q in quantity_orders:
        _orders(quantity_orders, q, f"{where}, quantity_orders")


def _orders(d, key, where):
    for p in need_list(d, key, where, max_len=MAX_LEVELS):
        as_number(p, f"{where}, {key}", null=True)


def study_from_data(data, where="study data"):
    """Rebuild a :class:`StudyResult` from :func:`study_to_data` output.

    This is the one validator of study data: every value the result is built
    from is checked for its type and range (finite numbers, known statuses,
    modes and norms, whole numbers where counts are meant), and the keys
    that are recomputed rather than read (``outcome``, ``passed``,
    ``orders``, ...) for their type, so a file either gives a study the
    reports can draw or an :class:`MMSError` naming ``where`` and the entry.

    Raises
    ------
    MMSError
        When the data is not a study of a format version this release reads.
    """
    if not isinstance(data, dict):
        raise MMSError(f"{where}: expected a JSON object, got {type(data).__name__}")
    if data.get("format") != FORMAT:
        raise MMSError(f"{where}: not an mmsverify study file (format {_short(data.get('format'))}, expected "
                       f"{FORMAT!r}); `mmsverify run --json` output lacks the grid boxes, write a full file "
                       "with `mmsverify report PROBLEM SOLVER --json PATH`")
    version = data.get("format_version")
    if isinstance(version, bool) or version != FORMAT_VERSION:
        raise MMSError(f"{where}: format version {_short(version)} is not supported by this "
                       f"release (reads version {FORMAT_VERSION}); rerun the study to write a new file")
    _require(data, _STUDY_KEYS, where)
    _check_derived(data, where)
    levels = tuple(_level(d, f"{where}, level entry {i}")
                   for i, d in enumerate(need_list(data, "levels", where, max_len=MAX_LEVELS)))
    verdicts = tuple(_verdict(v, f"{where}, verdict entry {i}")
                     for i, v in enumerate(_need_list(data, "verdicts", where)))
    for i, v in enumerate(verdicts):
        unmeasured = [lv.level for lv in levels if lv.ok and v.field in lv.errors and v.norm not in lv.errors[v.field]]
        if v.norm != "value" and unmeasured:
            raise MMSError(f"{where}, verdict entry {i}: a verdict in the {v.norm} norm of field {v.field}, but "
                           f"level(s) {', '.join(map(str, unmeasured))} hold no {v.norm} error of it; the file is "
                           "not as the tool wrote it: rerun the study to write a new file")
    conflicts = tuple(_conflict(c, f"{where}, order_conflicts entry {i}")
                      for i, c in enumerate(need_list(data, "order_conflicts", where, [], max_len=2)))
    missing = {}
    for q, lv in need_dict(data, "missing_quantities", where, {}, max_len=MAX_ENTRIES).items():
        w = f"{where}, missing_quantities {q}"
        missing[q] = tuple(as_int(k, w, maximum=MAX_LEVELS) for k in need_list({q: lv}, q, w, max_len=MAX_LEVELS))
        if not missing[q]:
            raise MMSError(f"{w}: expected the list of levels that did not report the quantity, got []")
    judged, norms_source = _judged_norms(data, where)
    from mmsverify.problem.rules import parse_rules
    rules = parse_rules(need_dict(data, "rules", where, {}, max_len=MAX_ENTRIES), f"{where}, rules")
    result = StudyResult(
        need_str(data, "problem", where, max_len=1000), need_str(data, "solver", where, max_len=1000),
        need_choice(data, "mode", where, _MODES), need_number(data, "formal_order", where),
        need_number(data, "tolerance", where, minimum=0), levels, verdicts,
        need_str(data, "problem_hash", where, "", max_len=200), need_str(data, "source", where, ""),
        need_choice(data, "order_source", where, _ORDER_SOURCES, "problem"), missing, conflicts, judged,
        norms_source, rules)
    try:
        return rejudge(result)
    except MMSError as exc:  # the stored errors or rules cannot be judged: say which file holds them
        raise MMSError(f"{where}: {exc}") from None


def _need_list(data, key, where):
    _need(data, key, where)
    return need_list(data, key, where, max_len=MAX_ENTRIES)


def _short(value):
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _judged_norms(data, where):
    """The judged norms per field and their source; files written before they were recorded give ``{}``,
    ``"default"`` (no note, the verdicts say which norms were judged)."""
    judged = data.get("judged_norms", {})
    source = data.get("norms_source", "default")
    if not isinstance(judged, dict) or not isinstance(source, str) or source not in NORMS_SOURCES:
        raise MMSError(f"{where}: judged_norms must map fields to norms and norms_source be one of "
                       f"{', '.join(NORMS_SOURCES)}; got {_short(judged)} and {_short(source)}; rerun the study "
                       "to write a new file")
    out = {}
    for f, norms in judged.items():
        if not isinstance(norms, list) or not norms or any(not isinstance(n, str) or n not in NORMS for n in norms):
            raise MMSError(f"{where}: judged_norms of field {f} must be a list of norms among "
                           f"{', '.join(NORMS)}, got {_short(norms)}; rerun the study to write a new file")
        out[str(f)] = tuple(norms)
    return out, source


def write_json(result, path):
    """Write the study as JSON (see ``docs/json-schema.md``); returns the Path."""
    return write_atomic(path, json.dumps(study_to_data(result), indent=2, allow_nan=False) + "\n")


def read_json(path):
    """Read a study written by :func:`write_json`; a file that is not one is an MMSError naming the entry."""
    return study_from_data(load_json_file(path, "study file", max_bytes=MAX_STUDY_BYTES), str(path))


def _level_cells(base, lv):
    return dict(base, level=lv.level, cells="x".join(map(str, lv.grid.cells)), steps=lv.grid.steps, h=lv.h,
                dt=lv.grid.dt, status=lv.status, seconds=lv.seconds, n_points=lv.n_points)


def _csv_rows(result):
    verdicts = {(v.field, v.norm): v for v in result.verdicts}
    base = {"problem": result.problem, "solver": result.solver, "mode": result.mode,
            "formal_order": result.formal_order, "tolerance": result.tolerance}
    fields = result.fields or ("",)
    for f in fields:
        rows = level_rows(result, f) if f else [{"level": lv.level} for lv in result.levels]
        for row, lv in zip(rows, result.levels):
            common = dict(_level_cells(base, lv), field=f, scale=lv.scale.get(f),
                          message=lv.message.splitlines()[0] if lv.message else "")
            for n in shown_norms(result, f) if lv.ok else ("",):
                v = verdicts.get((f, n))
                yield dict(common, norm=n, error=row.get(f"error_{n}"), order=row.get(f"order_{n}"),
                           verdict=v.status if v else "", observed_order=v.observed if v else None)
    for q in result.quantities:
        v = verdicts.get((q, "value"))
        for row, lv in zip(quantity_rows(result, q), result.levels):
            if row["reported"]:  # a failed level has its rows under the fields already
                yield dict(_level_cells(base, lv), field=q, norm="value", error=row["error"], order=row["order"],
                           value=row["value"], exact=row["exact"], verdict=v.status if v else "",
                           observed_order=v.observed if v else None, message="")


def csv_text(result):
    """The study as CSV text: one row per level, field and norm (failed levels: one row per field), then one
    per level and reported quantity (see ``docs/json-schema.md``)."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator="\n")
    w.writeheader()
    for row in _csv_rows(result):
        w.writerow({k: ("" if row.get(k) is None else (repr(row[k]) if isinstance(row[k], float) else row[k]))
                    for k in CSV_COLUMNS})
    return buf.getvalue()


def write_csv(result, path):
    """Write :func:`csv_text` to ``path``; returns the Path."""
    return write_atomic(path, csv_text(result))
