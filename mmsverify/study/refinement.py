"""Plan a refinement study, run a solver on every level, judge the orders.

:func:`run_study` is the main entry point of the library::

    result = run_study("poisson2d-trig", "poisson2d", levels=4)
    print(result)          # table of levels, h, norms, orders and verdicts
    result.passed          # True when every field and norm matches

A level that fails (the solver raises, or returns NaN, a wrong shape, ...)
is recorded with the reason; the study goes on and judges what the other
levels support.
"""

from collections.abc import Mapping
import dataclasses
from dataclasses import dataclass, field
import math
import time
import traceback

import numpy as np

from mmsverify.problem.derive import derive
from mmsverify.errors import AnalysisError, GridError, MMSError, SolverError
from mmsverify.execute.gradnorms import (ALL_NORMS, check_gradients, gradient_errors, gradient_norms_ruled,
                                         norm_rules)
from mmsverify.execute.grids import Grid, check_refinement, refinement
from mmsverify.execute.norms import NORMS, magnitude_norms
from mmsverify.execute.resolutions import level_info, planned_list
from mmsverify.analysis.order import observed_orders
from mmsverify.problem.derive import get_problem
from mmsverify.execute.level import LevelResult, run_level
from mmsverify.study.settings import MODES, Judging, Refinement, Running
from mmsverify.execute.solvers import Case, check_solution, plain_info, resolve_solver, solver_name
from mmsverify.analysis.verdict import judge
from mmsverify.problem.rules import check_rule, check_rules, parse_rules, rule_for

__all__ = ["LevelResult", "StudyResult", "plan_grids", "run_level", "run_study", "judged_norms", "rejudge", "MODES",
           "NORMS_SOURCES"]

MAX_LEVELS = 30          # more levels than any study needs; beyond, the finest grid is astronomically large
MAX_CELLS = 1e9          # a level larger than this would not fit in memory on any workstation
#: Where the judged norms of a study come from: the solver's ``judged_norms``, the caller's ``norms``, or all.
NORMS_SOURCES = ("solver", "caller", "default")


@dataclass(frozen=True)
class StudyResult:
    """A finished study: levels, orders and verdicts.

    Besides the verdicts, two facts that change how a study should be read
    are kept as data and told as :attr:`notes`:

    ``missing_quantities``
        Quantity name to the successful levels whose solution did not
        report it, for quantities declared under ``[quantities]``.
    ``order_conflicts``
        One dict per axis where the solver's stated order replaced a
        different ``[order]`` value of the problem: ``axis`` (``"space"``
        or ``"time"``), ``solver`` and ``problem`` (the two orders) and
        ``used_for`` (``"verdicts"`` when it is the judged order,
        ``"grids"`` when it only shaped the time steps of the plan).

    ``warnings``
        Lines about levels that are plausible one by one but not as a
        sequence (a point count that does not grow as the grids do).

    Which norms got a verdict is kept as data too: ``judged_norms`` maps
    each field of the problem to the norms it was judged in (every norm is
    measured and tabled either way; empty for results read from files
    written before it was recorded) and ``norms_source`` says who chose
    them (one of :data:`NORMS_SOURCES`). A field judged in fewer than all
    norms gets a line in :attr:`notes`.
    """

    problem: str
    solver: str
    mode: str
    formal_order: float
    tolerance: float
    levels: tuple
    verdicts: tuple
    problem_hash: str = ""
    source: str = ""
    order_source: str = "problem"
    missing_quantities: dict = field(default_factory=dict)
    order_conflicts: tuple = ()
    judged_norms: dict = field(default_factory=dict)
    norms_source: str = "default"
    rules: tuple = ()
    warnings: tuple = ()

    def _repr_html_(self):
        """Notebook display: verdict, tables and the error figure (see :mod:`mmsverify.render.notebook`)."""
        from mmsverify.render.notebook import study_html
        return study_html(self)

    def _repr_markdown_(self):
        from mmsverify.render.notebook import study_markdown
        return study_markdown(self)

    @property
    def notes(self):
        """One-line remarks on how the study was read (not failures); empty when there are none."""
        return (tuple(self.warnings) + _quantity_notes(self) + _order_notes(self) + _norms_notes(self)
                + _cache_notes(self))

    @property
    def orders_confirmed(self):
        """True when every verdict on the levels that succeeded is confirmed."""
        return bool(self.verdicts) and all(v.ok for v in self.verdicts)

    @property
    def passed(self):
        """True when every verdict is confirmed and no level failed.

        A level that crashed, hung or returned NaN is a defect of the solver
        even when the other levels show the right order; see
        :attr:`orders_confirmed` for the verdicts alone.
        """
        return self.orders_confirmed and not self.failed_levels

    @property
    def outcome(self):
        """``"pass"``, ``"fail"`` or ``"inconclusive"``: what the study shows, as the exit codes say it.

        ``fail`` when the fitted evidence says an order is off the formal
        order (below or above) or a level failed, ``inconclusive`` when the
        levels cannot decide (an error floor, too few levels in the
        asymptotic range, errors at round-off).
        """
        if self.passed:
            return "pass"
        if any(v.status in ("below", "above") for v in self.verdicts) or self.failed_levels:
            return "fail"
        return "inconclusive"

    @property
    def failed_levels(self):
        return tuple(lv for lv in self.levels if not lv.ok)

    def level_where(self, level):
        """The location that opens the message of a failed level (problem, solver, level and grid)."""
        return _level_where(self.problem, self.solver, level.grid)

    def orders(self, field_name, norm):
        """Observed order per consecutive pair of successful levels."""
        ok = [lv for lv in self.levels if lv.ok and field_name in lv.errors]
        if len(ok) < 2:
            return np.array([])
        return observed_orders([lv.h for lv in ok], [lv.errors[field_name][norm] for lv in ok])

    def quantity_orders(self, name):
        """Observed order of a reported quantity's error per pair of successful levels."""
        ok = [lv for lv in self.levels if lv.ok and name in lv.quantities]
        if len(ok) < 2:
            return np.array([])
        return observed_orders([lv.h for lv in ok], [lv.quantities[name]["error"] for lv in ok])

    @property
    def quantities(self):
        seen = []
        for lv in self.levels:
            seen += [q for q in lv.quantities if q not in seen]
        return tuple(seen)

    @property
    def fields(self):
        seen = []
        for lv in self.levels:
            for f in lv.errors:
                if f not in seen:
                    seen.append(f)
        return tuple(seen)

    def to_dict(self):
        """Plain data (JSON-ready) with every number of the study."""
        return {
            "problem": self.problem, "problem_hash": self.problem_hash, "source": self.source,
            "solver": self.solver, "mode": self.mode, "formal_order": self.formal_order,
            "tolerance": self.tolerance, "passed": self.passed,
            "levels": [{
                "level": lv.level, "cells": list(lv.grid.cells), "steps": lv.grid.steps, "h": lv.h,
                "dt": lv.grid.dt, "status": lv.status, "message": lv.message, "seconds": lv.seconds,
                "n_points": lv.n_points, "errors": lv.errors, "quantities": lv.quantities, "info": lv.info,
            } for lv in self.levels],
            "order_source": self.order_source,
            "missing_quantities": {q: list(lv) for q, lv in self.missing_quantities.items()},
            "order_conflicts": [dict(c) for c in self.order_conflicts],
            "judged_norms": {f: list(n) for f, n in self.judged_norms.items()},
            "norms_source": self.norms_source,
            "rules": {sel: r.to_dict() for sel, r in self.rules},
            "notes": list(self.notes),
            "quantity_orders": {q: [None if not np.isfinite(p) else float(p) for p in self.quantity_orders(q)]
                                for q in self.quantities},
            "orders": {f: {n: [None if not np.isfinite(p) else float(p) for p in self.orders(f, n)]
                           for n in NORMS} for f in self.fields},
            "verdicts": [{"field": v.field, "norm": v.norm, "status": v.status, "observed": v.observed,
                          "formal": v.formal, "tolerance": v.tolerance, "reason": v.reason, "kind": v.kind,
                          "interval": None if v.interval is None else list(v.interval),
                          "at_least": v.at_least, "left_out": list(v.left_out)}
                         for v in self.verdicts],
        }

    def __str__(self):
        from mmsverify.render.text import format_study
        return format_study(self)


def _level_where(problem_name, solver_name, grid):
    return f"problem {problem_name}, solver {solver_name}, level {grid.level} ({grid.describe()})"


def _levels_text(levels):
    levels = list(levels)
    return f"level{'s' if len(levels) > 1 else ''} {', '.join(str(k) for k in levels)}"


def _cache_notes(result):
    reused = sum(lv.message.startswith("reused from the level cache") for lv in result.levels)
    if not reused:
        return ()
    return (f"{reused} level{'s' if reused != 1 else ''} from the cache (not run again); --no-cache runs "
            "every level",)


def _quantity_notes(result):
    """Declared quantities the solver left out: one line for those never reported, one per patchy one."""
    ok = [lv.level for lv in result.levels if lv.ok]
    never = [q for q, lacking in result.missing_quantities.items() if set(ok) <= set(lacking)]
    notes = []
    if never:
        notes.append(f"declared in the problem file but not reported by the solver: {', '.join(never)} "
                     f"(a solver reports {'them' if len(never) > 1 else 'it'} in Solution.quantities)")
    for q, lacking in result.missing_quantities.items():
        if q not in never:
            had = [k for k in ok if k not in lacking]
            notes.append(f"the solver reported quantity {q} on {_levels_text(had)} but not on "
                         f"{_levels_text(lacking)}; its order uses only the levels that reported it")
    return tuple(notes)


def _order_notes(result):
    """One line per axis where the solver's stated order replaced a different [order] value."""
    notes = []
    for c in result.order_conflicts:
        which = "order" if c["axis"] == "space" else "time order"
        use = ("judged against the solver's" if c["used_for"] == "verdicts"
               else "the time steps were planned with the solver's")
        notes.append(f"the solver states {which} {c['solver']:g}; the problem file's [order] {c['axis']} = "
                     f"{c['problem']:g}; {use}")
    return tuple(notes)


def _norms_notes(result):
    """One line per set of measured fields judged in fewer than all norms, saying who chose the norms."""
    how = {"solver": "as the solver states", "caller": "as the caller chose"}.get(result.norms_source)
    if how is None:
        return ()
    groups = {}
    for f in result.fields:
        judged = tuple(result.judged_norms.get(f, NORMS))
        if set(judged) != set(NORMS):
            groups.setdefault(judged, []).append(f)
    return tuple(f"{', '.join(fs)} judged in {', '.join(judged)} {how} "
                 f"({', '.join(n for n in NORMS if n not in judged)} measured, not judged)"
                 for judged, fs in groups.items())


def _missing_quantities(problem, results):
    """Declared quantity to the successful levels that did not report it (only those lacking on some)."""
    ok = [r for r in results if r.ok]
    missing = {}
    for q in problem.names("quantities"):
        lacking = tuple(r.level for r in ok if q not in r.quantities)
        if lacking:
            missing[q] = lacking
    return missing


def _order_conflicts(problem, solver, mode, *, caller, planned, base_steps):
    """Axes where the solver's stated order replaced a different [order] value, and what it was used for.

    The judged axis counts unless the caller gave the formal order; the
    other axis only where it shaped the plan (the time steps of a
    transient study planned in ``combined`` mode).
    """
    shaped_plan = planned and problem.transient and mode == "combined"
    conflicts = []
    for axis, attr, filed in (("space", "formal_order", problem.space_order),
                              ("time", "time_order", problem.time_order)):
        stated = _stated(solver, attr)
        if stated is None or filed is None or (axis == "time" and not problem.transient):
            continue
        if problem.order_given is not None and axis not in problem.order_given:
            continue        # the file states no order on this axis: nothing to disagree with
        if math.isclose(stated, float(filed), rel_tol=1e-12):
            continue
        judged = (axis == "time") == (mode == "time")
        use = "verdicts" if judged and not caller else "grids" if shaped_plan else None
        if use:
            conflicts.append({"axis": axis, "solver": stated, "problem": float(filed), "used_for": use})
    return tuple(conflicts)


def _check_levels(results, mode, wheres):
    """Check the levels as a sequence; return the results (some now failed) and warning lines.

    A level whose every error equals the previous level's on the same
    number of points did not solve its own grid (a solver that returns a
    stored or the previous solution): it fails, and so does a level with
    the previous level's number of points where the grid has more cells
    (its points did not change). Any other point count that does
    not grow as the grid's cells do is told as a warning: a solver on its
    own mesh may have been given the wrong h.
    """
    results, warnings = list(results), []
    prev = None
    for i, r in enumerate(results):
        if not r.ok:
            continue
        if prev is not None and r.n_points == prev.n_points and r.errors == prev.errors and r.errors:
            results[i] = LevelResult(
                r.level, r.grid, r.h, "failed", seconds=r.seconds, n_points=r.n_points,
                message=f"{wheres[i]}: the solution is the one of level {prev.level} (the same {r.n_points} points "
                        f"and the same errors); solve this level's grid ({r.grid.describe()}) rather than "
                        "returning a stored or the previous level's solution")
            continue
        want = r.grid.n_cells / prev.grid.n_cells if prev is not None else 1.0
        if want > 1 and r.n_points == prev.n_points:
            results[i] = LevelResult(
                r.level, r.grid, r.h, "failed", seconds=r.seconds, n_points=r.n_points,
                message=f"{wheres[i]}: the solution has the same {r.n_points} points as level {prev.level}, though "
                        f"the grid has {want:.3g} times the cells; return the solution on this level's grid "
                        f"({r.grid.describe()})")
            continue
        if prev is not None and mode != "time" and prev.n_points > 0:
            got = r.n_points / prev.n_points
            # nodes against cells: 9 -> 17 nodes is 1.89 for 2x the cells; half the growth in log is far off
            if want > 1 and abs(math.log(got) - math.log(want)) > 0.5 * math.log(want):
                warnings.append(
                    f"level {r.level} has {r.n_points} points, {got:.3g} times level {prev.level}'s, but its grid "
                    f"has {want:.3g} times the cells; if the solver builds its own mesh, h taken from the grid "
                    "may be wrong (give the grids that match the meshes, or h from the cell volumes)")
        prev = r
    return results, tuple(warnings)


def _irregular(levels):
    """Whether the solver reported the grids of ``levels`` irregular (``Solution.info["irregular"] is True``)."""
    return any(isinstance(r.info, dict) and r.info.get("irregular") is True for r in levels)


def _verdicts(problem, results, formal, tol, judged, rules=(), mode="combined"):
    """One verdict per field and judged norm (``judged``: field -> norms, as :func:`judged_norms` gives),
    then one per reported quantity, each under its rule (``rules``: see :mod:`mmsverify.problem.rules`)."""
    axis = "time" if mode == "time" else "space"
    size = "dt" if mode == "time" else "h"

    def one(name, norm, ok, errors, scale):
        p, t, at_least = rule_for(rules, name, norm, formal, tol, axis)
        return judge(name, norm, [r.h for r in ok], errors, p, t, scale=scale, levels=[r.level for r in ok],
                     at_least=at_least, axis=size, irregular=_irregular(ok), fixed=mode != "combined")

    verdicts = []
    for f in problem.field_names:
        ok = [r for r in results if r.ok and f in r.errors]
        # a gradient norm is judged where a rule gives it an order and every successful level measured it
        extra = tuple(n for n in gradient_norms_ruled(rules, f, axis) if all(n in r.errors[f] for r in ok))
        for n in (tuple(judged.get(f, NORMS)) + extra) if ok else ():
            verdicts.append(one(f, n, ok, [r.errors[f][n] for r in ok], max(r.scale[f] for r in ok)))
    for q in problem.names("quantities"):
        ok = [r for r in results if r.ok and q in r.quantities]
        if ok:
            verdicts.append(one(q, "value", ok, [r.quantities[q]["error"] for r in ok],
                                abs(ok[-1].quantities[q]["exact"]) or 1.0))
    return tuple(verdicts)


def rejudge(result):
    """The study with every verdict judged again from its stored errors, under the rule each verdict states.

    A study read from a file keeps its errors, and its verdicts say which
    order, tolerance and side they were judged by; judging again means a
    file whose verdicts were edited, or written by an older release, cannot
    pass on its word. Raises :class:`~mmsverify.errors.AnalysisError` for a
    rule :func:`~mmsverify.problem.rules.check_rule` refuses.
    """
    size = "dt" if result.mode == "time" else "h"
    fresh = []
    for v in result.verdicts:
        if v.norm == "value":
            ok = [r for r in result.levels if r.ok and v.field in r.quantities]
            errors = [r.quantities[v.field]["error"] for r in ok]
            scale = abs(ok[-1].quantities[v.field].get("exact", 1.0)) or 1.0 if ok else 1.0
        else:
            ok = [r for r in result.levels if r.ok and v.field in r.errors]
            errors = [r.errors[v.field][v.norm] for r in ok]
            scale = max((r.scale.get(v.field, 1.0) for r in ok), default=1.0)
        fresh.append(judge(v.field, v.norm, [r.h for r in ok], errors, v.formal, v.tolerance, scale=scale,
                           levels=[r.level for r in ok], at_least=v.at_least, axis=size, irregular=_irregular(ok),
                           fixed=result.mode != "combined"))
    return dataclasses.replace(result, verdicts=tuple(fresh))


def _stated(solver, name):
    """The order a solver states as attribute ``name``, as a float, or None (no statement).

    Raises
    ------
    SolverError
        When the statement is not a positive finite number (``"2"``, True,
        NaN): a statement the tool ignored would judge against another order.
    """
    try:
        value = getattr(solver, name, None)
    except Exception:  # a property that cannot answer for this solver
        return None
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not np.isfinite(value) or value <= 0:
        raise SolverError(f"solver {solver_name(solver)}: {name} = {value!r} ({type(value).__name__}) is not an "
                          f"order; state a positive number, e.g. {name} = 2")
    return float(value)


def _stated_norms(solver, problem, who):
    """Field name to the norms a solver states its order claim holds in (attribute ``judged_norms``), or None.

    Raises
    ------
    SolverError
        When the statement is not a mapping of field names to norms among
        :data:`mmsverify.execute.norms.NORMS`. Fields the problem does not have are
        left out (a solver made for other equations says so when it runs).
    """
    try:
        stated = getattr(solver, "judged_norms", None)
    except Exception:  # a property that cannot answer for this solver
        return None
    if stated is None:
        return None
    fix = ("state judged_norms as a dict of field name to a tuple of norms, e.g. {'p': ('L1', 'L2')}, or pass "
           "norms= (--norms on the command line) to choose the judged norms yourself")
    if not isinstance(stated, Mapping):
        raise SolverError(f"solver {who}: judged_norms must be a dict of field name to norms, got "
                          f"{type(stated).__name__}; {fix}")
    out = {}
    for f, norms in stated.items():
        norms = (norms,) if isinstance(norms, str) else norms
        try:
            norms = tuple(norms)
        except TypeError:
            raise SolverError(f"solver {who}: judged_norms for field {f} must be a tuple of norms, got "
                              f"{norms!r}; {fix}") from None
        unknown = [n for n in norms if n not in NORMS]
        if unknown or not norms:
            raise SolverError(f"solver {who}: judged_norms for field {f} names "
                              f"{'unknown norm(s) ' + ', '.join(map(repr, unknown)) if unknown else 'no norm'}; "
                              f"use some of {', '.join(NORMS)}, e.g. {{'{f}': ('L1', 'L2')}}")
        if f in problem.field_names:  # a field this problem lacks: the solver is not for this problem
            out[f] = tuple(n for n in NORMS if n in norms)  # the usual order, each norm once
    return out


def judged_norms(problem, solver, norms=None, who=None):
    """Norms that get a verdict, per field of ``problem``, and where they come from.

    The caller's ``norms`` (one sequence for every field) win; without
    them a solver that states ``judged_norms`` (field name to norms; other
    fields: all norms) is judged in what it states; otherwise (no
    statement, or an empty one) every field is judged in all of
    :data:`mmsverify.execute.norms.NORMS`.

    Returns
    -------
    dict, str
        Field name to a tuple of norms, and ``"caller"``, ``"solver"`` or
        ``"default"``.
    """
    problem = get_problem(problem)
    if norms is not None:
        norms = (norms,) if isinstance(norms, str) else tuple(norms)
        if not norms or set(norms) - set(NORMS):
            raise AnalysisError(f"norms to judge must be among {', '.join(NORMS)}, got "
                                f"{', '.join(map(str, norms)) or 'none'}")
        return {f: norms for f in problem.field_names}, "caller"
    stated = _stated_norms(solver, problem, solver_name(solver) if who is None else who)
    if not stated:      # None, or an empty statement: every field in every norm
        return {f: NORMS for f in problem.field_names}, "default"
    return {f: stated.get(f, NORMS) for f in problem.field_names}, "solver"


def design_orders(problem, solver):
    """Formal (space, time) orders and where they come from.

    A solver that states ``formal_order`` (and ``time_order``) as data is
    judged against what it states; otherwise the problem's ``[order]``
    table applies.
    """
    space, time_ = _stated(solver, "formal_order"), _stated(solver, "time_order")
    if space is None and time_ is None:
        return problem.space_order, problem.time_order, "problem"
    return (space if space is not None else problem.space_order,
            time_ if time_ is not None else problem.time_order, "solver")


def plan_grids(problem, levels=None, base_cells=None, ratio=None, *, mode="combined", base_steps=None,
               orders=None, cells=None):
    """The grids of a study, from arguments or the problem's ``[study]`` defaults.

    For transient problems, ``mode`` chooses how time is refined:
    ``"combined"`` ties the number of steps to h by the ratio of formal
    orders (so both errors fall at the space order), ``"space"`` keeps the
    steps fixed, ``"time"`` keeps the cells fixed and refines the steps.
    The frozen resolution (cells in ``"time"``, steps in ``"space"``) must
    be given (``base_cells``, ``base_steps``): no fixed default leaves its
    error negligible for every solver, and a frozen error that is not bends
    the measured order of a correct solver.
    :func:`~mmsverify.study.spacetime.run_space_time` (``mmsverify split``)
    sizes it from the errors it measures.
    ``orders`` = (space, time) overrides the problem's formal orders (for
    example with the orders a solver states).
    """
    problem = get_problem(problem)
    p_space, p_time = orders if orders is not None else (problem.space_order, problem.time_order)
    s = problem.study
    if cells is not None or ("cells" in s and levels is None and base_cells is None and ratio is None):
        if cells is not None and (levels, base_cells, ratio) != (None, None, None):
            raise GridError("give either a list of resolutions (cells) or levels, base cells and ratio, not both")
        return planned_list(problem, s["cells"] if cells is None else cells, mode, base_steps,
                            (p_space, p_time))
    frozen_default = {"time": base_cells is None, "space": base_steps is None}.get(mode, False)
    levels = s.get("levels", 4) if levels is None else levels
    base_cells = s.get("base_cells", 8) if base_cells is None else base_cells
    ratio = float(s.get("ratio", 2) if ratio is None else ratio)
    if isinstance(levels, bool) or int(levels) != levels or not 2 <= levels <= MAX_LEVELS:
        raise GridError(f"levels must be a whole number from 2 to {MAX_LEVELS}, got {levels!r}; "
                        "use 3 or more to see whether the order has settled")
    levels = int(levels)
    for n in np.atleast_1d(base_cells):
        if int(n) != n or n < 1:
            raise GridError(f"base cells must be positive whole numbers, got {base_cells!r}")
    if not 1 < ratio <= 16:
        raise GridError(f"the refinement ratio must exceed 1 (and be at most 16), got {ratio:g}")
    finest = np.prod(np.broadcast_to(np.asarray(base_cells, dtype=float), (problem.dim,))) * ratio ** (
        problem.dim * (levels - 1))
    if finest > MAX_CELLS:
        raise GridError(f"the finest level would have about {finest:.2g} cells, more than {MAX_CELLS:.0e}; "
                        "use fewer levels, fewer base cells or a smaller ratio")
    if mode not in MODES:
        raise GridError(f"unknown refinement mode {mode!r}; use one of {', '.join(MODES)}")
    if not problem.transient:
        if mode != "combined" and mode != "space":
            raise GridError(f"{problem.name} is steady; only spatial refinement applies (mode 'space')")
        return refinement(problem.lower, problem.upper, base_cells, levels, ratio)
    t0, t1 = problem.t_range
    base_steps = s.get("base_steps", 8) if base_steps is None else base_steps
    if isinstance(base_steps, bool) or int(base_steps) != base_steps or base_steps < 1:
        raise GridError(f"base steps must be a positive whole number, got {base_steps!r}")
    base_steps = int(base_steps)
    if frozen_default:
        frozen, option = ("cells", "base_cells") if mode == "time" else ("steps", "base_steps")
        raise GridError(f"mode {mode!r} keeps the {frozen} of {problem.name} frozen, and the error left at a "
                        f"fixed {frozen[:-1]} count can bend the {mode} order of a correct solver; give the frozen "
                        f"{frozen} ({option}), or run the space-time study (run_space_time, `mmsverify split`), "
                        f"which refines them until their error is negligible")
    if mode == "combined":
        time_ratio = ratio ** (p_space / p_time)
        return refinement(problem.lower, problem.upper, base_cells, levels, ratio, t_start=t0, t_end=t1,
                          base_steps=base_steps, time_ratio=time_ratio)
    if mode == "space":
        return refinement(problem.lower, problem.upper, base_cells, levels, ratio, t_start=t0, t_end=t1,
                          base_steps=base_steps, time_ratio=1.0)
    cells = (int(base_cells),) * problem.dim if np.ndim(base_cells) == 0 else tuple(int(n) for n in base_cells)
    grids = [Grid(k, problem.lower, problem.upper, cells, t_start=t0, t_end=t1,
                  steps=int(round(base_steps * ratio ** k))) for k in range(levels)]
    check_refinement(grids)
    return grids


def run_study(problem, solver, refinement=None, judging=None, running=None, *, options=None):
    """Run a manufactured-solution study and judge the observed orders.

    Parameters
    ----------
    problem : Problem, path or bundled name
    solver : callable, ``"module:function"`` or bundled name
    refinement : Refinement, int or sequence of Grid, optional
        Which levels run (:class:`~mmsverify.study.settings.Refinement`; a
        number of levels or an explicit grid sequence is accepted too).
    judging : Judging, optional
        How the orders are judged. Without an override the problem's
        ``[order]`` values apply, unless the solver states its own orders
        (attributes ``formal_order``, ``time_order``; see
        :func:`design_orders`). Where a stated order differs from the
        problem's ``[order]``, the result says so in its ``notes`` (data in
        ``order_conflicts``); so it does for declared quantities the solver
        did not report (``missing_quantities``). Without ``norms`` a solver
        that states ``judged_norms`` (field name to the norms its order
        claim holds in) is judged in those, other fields in all of L1, L2,
        Linf (see :func:`judged_norms`); every norm is still measured.
    running : Running, optional
        How the levels run: executor or local workers, time limit per
        level, level cache, progress callback.
    options : dict, optional
        Passed to the solver in ``case.options``. A solver whose stated
        orders depend on its options may define ``configured(options)``,
        returning the solver as those options configure it; the stated
        orders are then read from that.

    Returns
    -------
    StudyResult
    """
    plan, judge, run = Refinement.of(refinement), Judging.of(judging), Running.of(running)
    mode, grids = plan.mode, plan.grids
    problem = get_problem(problem)
    solve = resolve_solver(solver)
    mms = derive(problem)
    stating = solve
    if options and callable(getattr(solve, "configured", None)):
        try:
            stating = solve.configured(dict(options))   # the orders of the scheme the options select
        except MMSError:
            raise
        except Exception as exc:
            raise SolverError(f"{solver_name(solve)}: options {dict(options)} cannot be applied: "
                              f"{exc}") from None
    p_space, p_time, _ = design_orders(problem, stating)
    planned = grids is None
    if grids is None:
        grids = plan_grids(problem, plan.levels, plan.base_cells, plan.ratio, mode=mode, base_steps=plan.base_steps,
                           orders=(p_space, p_time), cells=plan.cells)
    else:
        grids = list(grids)
        check_refinement(grids)
        for g in grids:
            if g.dim != problem.dim:
                raise GridError(f"level {g.level} is {g.dim}-D but problem {problem.name} is {problem.dim}-D")
    formal = p_time if mode == "time" else p_space
    # where the judged order comes from: the solver only if it states that axis
    order_source = "solver" if _stated(stating, "time_order" if mode == "time" else "formal_order") is not None \
        else "problem"
    if judge.formal_order is not None:
        formal, order_source = judge.formal_order, "caller"
    formal = float(formal)
    tol = float(judge.tolerance if judge.tolerance is not None else problem.tolerance)
    check_rule(formal, tol, f"problem {problem.name}, the order rule" + (" (--tolerance)" if judge.tolerance is not None
                                                                          else ""))
    name = solver_name(solver)
    judged, norms_source = judged_norms(problem, stating, judge.norms, who=solver_name(stating))
    # the solver's orders per norm are the widest rules; the problem's [order.by] and the caller's win over them
    rules = tuple(dict({**dict(parse_rules(norm_rules(stating, problem, solver_name(stating)))),
                        **dict(getattr(problem, "order_rules", ())), **dict(parse_rules(judge.rules))}).items())
    ruled = {f: tuple(judged[f]) + gradient_norms_ruled(rules, f, "time" if mode == "time" else "space")
             for f in judged}
    check_rules(rules, {**ruled, **{q: ("value",) for q in problem.names("quantities")}}, ALL_NORMS + ("value",),
                formal, tol, "time" if mode == "time" else "space", f"problem {problem.name}, order rules")
    opts = dict(options or {}, mode=mode)
    cases = [Case(g, mms, opts) for g in grids]
    wheres = [_level_where(problem.name, name, c.grid) for c in cases]
    from mmsverify.execute.runner import run_levels
    results = run_levels(solve, cases, wheres, executor=run.executor, workers=run.workers, timeout=run.timeout,
                         cache=run.cache_dir, resume=run.resume, progress=run.progress)
    results, warnings = _check_levels(results, mode, wheres)
    verdicts = _verdicts(problem, results, formal, tol, judged, rules, mode)
    conflicts = _order_conflicts(problem, stating, mode, caller=judge.formal_order is not None, planned=planned,
                                 base_steps=plan.base_steps)
    return StudyResult(problem.name, name, mode, formal, tol, tuple(results), tuple(verdicts),
                       problem.content_hash(), problem.source, order_source,
                       _missing_quantities(problem, results), conflicts, judged, norms_source, rules, warnings)
