"""One level: run the solver on a case, check what it returns, measure its errors.

:func:`run_level` is what the runner executes for every level, in this
process or in a worker; it never raises for a fault of the solver, which
is recorded in the :class:`LevelResult` with the reason.
"""

from dataclasses import dataclass, field
import math
import time
import traceback

import numpy as np

from mmsverify.errors import SolverError
from mmsverify.execute.grids import Grid
from mmsverify.execute.gradnorms import check_gradients, gradient_errors
from mmsverify.execute.norms import magnitude_norms
from mmsverify.execute.resolutions import level_info
from mmsverify.execute.solvers import check_solution, plain_info

__all__ = ["LevelResult", "run_level"]


@dataclass(frozen=True)
class LevelResult:
    """Outcome of one level: errors per field and norm, or why it failed."""

    level: int
    grid: Grid
    h: float
    status: str
    errors: dict = field(default_factory=dict)
    seconds: float = 0.0
    n_points: int = 0
    scale: dict = field(default_factory=dict)
    message: str = ""
    quantities: dict = field(default_factory=dict)
    info: dict = field(default_factory=dict)

    @property
    def ok(self):
        return self.status == "ok"


def run_level(solver, case, where):
    """Run one level and measure its errors; never raises for solver faults."""
    grid, mms = case.grid, case.mms
    problem = mms.problem
    h = grid.dt if (problem.transient and case.options.get("mode") == "time") else grid.h
    start = time.perf_counter()
    try:
        sol = solver(case)
        seconds = time.perf_counter() - start
        values, points, weights = check_solution(sol, problem, where, grid)
        _check_all_fields(solver, case, values, where)
        t = None
        if problem.transient:
            t = grid.t_end if sol.time is None else float(sol.time)
        errors, scale = {}, {}
        for name, v in values.items():
            exact = mms.exact(name, *points, t=t)
            scale[name] = float(np.maximum(np.max(exact), -np.min(exact)))  # max |exact|, no temporary
            if not math.isfinite(scale[name]):  # NaN and infinities reach the max or the min
                raise SolverError(_not_finite(problem, f"exact solution {name}", exact, points, t))
            # the error goes into the exact values' array, a new one, unless it could be an input's memory
            own = exact.flags.owndata and exact.shape == v.shape and not any(
                np.may_share_memory(exact, a) for a in (v, *points))
            magnitude = np.subtract(v, exact, out=exact if own else None)
            errors[name] = magnitude_norms(np.abs(magnitude, out=magnitude), weights)
        gradients = check_gradients(getattr(sol, "gradients", None), problem, values, points[0].shape, where)
        for name, g in gradients.items():
            errors[name].update(gradient_errors(mms, name, g, points, weights, errors[name]["L2"], t=t))
        quantities = {}
        for name, q in sol.quantities.items():
            exact = mms.exact_quantity(name, t=t)
            quantities[name] = {"value": float(q), "exact": exact, "error": abs(float(q) - exact)}
        return LevelResult(grid.level, grid, h, "ok", errors, seconds, int(values[next(iter(values))].size), scale,
                           quantities=quantities, info=plain_info(level_info(sol, where)))
    except SolverError as exc:
        text, own = str(exc), getattr(exc, "location", "")
        if own and text.startswith(own + ", "):  # the solver named problem and level itself: say it once
            text = f"{where}, {text[len(own) + 2:]}"
        elif not text.startswith(where):
            text = f"{where}: {text}"
        return LevelResult(grid.level, grid, h, "failed", seconds=time.perf_counter() - start,
                           message=_blame(mms, grid, where, text))
    except Exception as exc:  # the solver under test crashed: record it, keep going
        tail = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__)[-3:]).strip()
        return LevelResult(grid.level, grid, h, "failed", seconds=time.perf_counter() - start,
                           message=_blame(mms, grid, where,
                                          f"{where}: the solver raised {type(exc).__name__}: {exc}\n{tail}"))


def _check_all_fields(solver, case, values, where):
    """A field with equations that the solver did not return fails the level, unless it says it skips it.

    The statement is the solver's attribute ``not_computed`` (field names),
    read from ``solver.configured(case.options)`` when the solver has it.
    """
    missing = [f for f in case.problem.field_names if f not in values]
    if not missing:
        return
    try:
        if callable(getattr(solver, "configured", None)):
            solver = solver.configured(case.options)
        skipped = getattr(solver, "not_computed", ()) or ()
    except Exception:  # noqa: BLE001  (a property that cannot answer: nothing stated)
        skipped = ()
    skipped = (skipped,) if isinstance(skipped, str) else tuple(skipped)
    missing = [f for f in missing if f not in skipped]
    if missing:
        raise SolverError(f"{where}: the problem has equations for field(s) {', '.join(missing)}, but the solver "
                          "returned no values for them; return them, or state not_computed = "
                          f"{tuple(missing)!r} on the solver if it does not compute them")


def _not_finite(problem, what, values, points, t):
    """The message for manufactured values that are not finite at a point of the level: the problem's fault."""
    values = np.asarray(values)
    bad = np.flatnonzero(~np.isfinite(values))
    i = np.unravel_index(bad[0], values.shape)
    place = ", ".join(f"{c} = {float(np.broadcast_to(p, values.shape)[i]):.6g}" for c, p in zip(problem.coords, points))
    when = f" at t = {t:.6g}" if t is not None else ""
    return (f"the problem's {what} is {values[i]} at ({place}){when}, {bad.size} of {values.size} points; the "
            "problem, not the solver, needs fixing: a manufactured field and its source terms must be finite "
            "everywhere in the box of [domain]")


def _problem_fault(mms, grid):
    """Why the level's manufactured data is not finite on the grid's nodes, or None: asked only after a level
    failed, so that a solver fed an infinite source is not blamed for it."""
    problem = mms.problem
    try:
        points = np.meshgrid(*(grid.nodes(a) for a in range(grid.dim)), indexing="ij", sparse=True)
        for t in ((grid.t_start, grid.t_end) if problem.transient else (None,)):
            for name in problem.field_names:
                for what, fn in (("exact solution", mms.exact), ("source term", mms.source)):
                    with np.errstate(all="ignore"):  # a division by zero here is what is looked for
                        values = fn(name, *points, t=t)
                    values = np.broadcast_to(values, np.broadcast_shapes(*(p.shape for p in points)))
                    if not np.isfinite(values).all():
                        return _not_finite(problem, f"{what} of {name}", values, points, t)
    except Exception:  # the check only improves a message; a failing check leaves the solver's own
        return None
    return None


def _blame(mms, grid, where, text):
    """A failed level's message, led by the problem's fault when its manufactured data is not finite."""
    if "the problem, not the solver" in text:
        return text
    fault = _problem_fault(mms, grid)
    return text if fault is None else f"{where}: {fault}\n(the solver then reported: {text[len(where) + 2:]})"
