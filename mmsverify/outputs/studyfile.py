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

from mmsverify.errors import MMSError
from mmsverify.fileio import load_json_file, write_atomic
from mmsverify.execute.grids import Grid
from mmsverify.execute.norms import NORMS
from mmsverify.study.refinement import NORMS_SOURCES, LevelResult, StudyResult, rejudge
from mmsverify.analysis.verdict import Verdict
from mmsverify.render.wording import level_rows
from mmsverify.render._quantities import quantity_rows
from mmsverify.render.text import CAUTION

__all__ = ["FORMAT", "FORMAT_VERSION", "CSV_COLUMNS", "study_to_data", "study_from_data", "write_json",
           "read_json", "write_csv", "csv_text"]

FORMAT = "mmsverify.study.refinement"
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


def _need(data, key, where):
    if key not in data:
        raise MMSError(f"{where}: missing key {key!r}; the file is not a complete mmsverify study "
                       f"(write it with `mmsverify report ... --json` or mmsverify.outputs.studyfile.write_json)")
    return data[key]


def study_from_data(data, where="study data"):
    """Rebuild a :class:`StudyResult` from :func:`study_to_data` output.

    Raises
    ------
    MMSError
        When the data is not a study of a format version this release reads.
    """
    if not isinstance(data, dict):
        raise MMSError(f"{where}: expected a JSON object, got {type(data).__name__}")
    if data.get("format") != FORMAT:
        raise MMSError(f"{where}: not an mmsverify study file (format {data.get('format')!r}, expected "
                       f"{FORMAT!r}); `mmsverify run --json` output lacks the grid boxes, write a full file "
                       "with `mmsverify report PROBLEM SOLVER --json PATH`")
    if data.get("format_version") != FORMAT_VERSION:
        raise MMSError(f"{where}: format version {data.get('format_version')!r} is not supported by this "
                       f"release (reads version {FORMAT_VERSION}); rerun the study to write a new file")
    levels = []
    for i, d in enumerate(_need(data, "levels", where)):
        w = f"{where}, level entry {i}"
        grid = Grid(int(_need(d, "level", w)), tuple(_need(d, "lower", w)), tuple(_need(d, "upper", w)),
                    tuple(int(n) for n in _need(d, "cells", w)), t_start=d.get("t_start"), t_end=d.get("t_end"),
                    steps=d.get("steps"))
        levels.append(LevelResult(grid.level, grid, float(_need(d, "h", w)), _need(d, "status", w),
                                  {f: dict(e) for f, e in d.get("errors", {}).items()}, float(d.get("seconds", 0.0)),
                                  int(d.get("n_points", 0)), dict(d.get("scale", {})), d.get("message", ""),
                                  quantities={q: dict(v) for q, v in d.get("quantities", {}).items()},
                                  info=dict(d.get("info", {}))))
    # the stored verdicts give only what was judged and by which rule: the statuses are judged again
    # from the stored errors (study.rejudge), never taken on the file's word
    known = {f.name for f in dataclasses.fields(Verdict)}
    needed = ("field", "norm", "formal", "tolerance")
    verdicts = []
    for i, v in enumerate(_need(data, "verdicts", where)):
        missing = [k for k in needed if k not in v]
        if missing:
            raise MMSError(f"{where}, verdict entry {i}: missing {missing}")
        try:
            formal, tol = float(v["formal"]), float(v["tolerance"])
        except (TypeError, ValueError):
            raise MMSError(f"{where}, verdict entry {i}: formal and tolerance must be numbers") from None
        kept = {k: v[k] for k in known if k in v and k not in ("interval", "left_out")}
        kept.update(formal=formal, tolerance=tol, at_least=bool(v.get("at_least", False)),
                    observed=v.get("observed"), status=v.get("status", ""), reason=v.get("reason", ""))
        verdicts.append(Verdict(**kept))
    conflicts = []
    for i, c in enumerate(data.get("order_conflicts", [])):
        w = f"{where}, order_conflicts entry {i}"
        conflicts.append({"axis": str(_need(c, "axis", w)), "solver": float(_need(c, "solver", w)),
                          "problem": float(_need(c, "problem", w)), "used_for": str(_need(c, "used_for", w))})
    missing = {str(q): tuple(int(k) for k in lv) for q, lv in data.get("missing_quantities", {}).items()}
    judged, norms_source = _judged_norms(data, where)
    from mmsverify.problem.rules import parse_rules
    rules = parse_rules(data.get("rules", {}), f"{where}, rules")
    return rejudge(StudyResult(_need(data, "problem", where), _need(data, "solver", where), _need(data, "mode", where),
                       float(_need(data, "formal_order", where)), float(_need(data, "tolerance", where)),
                       tuple(levels), tuple(verdicts), data.get("problem_hash", ""), data.get("source", ""),
                       data.get("order_source", "problem"), missing, tuple(conflicts), judged, norms_source, rules))


def _judged_norms(data, where):
    """The judged norms per field and their source; files written before they were recorded give ``{}``,
    ``"default"`` (no note, the verdicts say which norms were judged)."""
    judged = data.get("judged_norms", {})
    source = data.get("norms_source", "default")
    if not isinstance(judged, dict) or source not in NORMS_SOURCES:
        raise MMSError(f"{where}: judged_norms must map fields to norms and norms_source be one of "
                       f"{', '.join(NORMS_SOURCES)}; got {judged!r} and {source!r}; rerun the study to write a "
                       "new file")
    out = {}
    for f, norms in judged.items():
        if not isinstance(norms, list) or not norms or any(n not in NORMS for n in norms):
            raise MMSError(f"{where}: judged_norms of field {f} must be a list of norms among "
                           f"{', '.join(NORMS)}, got {norms!r}; rerun the study to write a new file")
        out[str(f)] = tuple(norms)
    return out, source


def write_json(result, path):
    """Write the study as JSON (see ``docs/json-schema.md``); returns the Path."""
    return write_atomic(path, json.dumps(study_to_data(result), indent=2, allow_nan=False) + "\n")


def read_json(path):
    """Read a study written by :func:`write_json`."""
    return study_from_data(load_json_file(path), str(path))


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
            for n in NORMS if lv.ok else ("",):
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
