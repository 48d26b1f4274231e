"""Separate space and time orders of a transient solver.

Three studies, each with its own verdict:

* **time**: cells fixed at a fine level, time steps refined; judged
  against the formal time order, with h = dt;
* **space**: steps fixed at a large number, cells refined; judged against
  the formal space order;
* **combined**: both refined, the number of steps tied to h by the ratio
  of formal orders (``steps ~ h**(-p_space/p_time)``), so both error
  contributions fall at the space order.

The fixed resolution of the first two is taken two refinements beyond the
finest level of the combined plan. The frozen error of each is then
estimated from the other study (its finest error scaled by the order that
study measured, at most the formal one: a solver first order in time
where 2 is formal leaves a frozen time error that falls only at 1); when
it is not below 2% of the smallest error being
measured, the study is run once more with the frozen resolution refined
enough (at most three times, 16 times each), unless the caller fixed it.

That refinement has a cost budget: the cost of a rerun is estimated from
the solver seconds of the study it replaces, scaled by cells x steps, and
a rerun that would take the refinement past the budget is not started.
When a frozen error is left too large (budget spent, rounds used up, or
fixed by the caller), the result says so in its ``notes``, with the
command that freezes finer. A study that fails while the other
direction's frozen error is more than 5% of its finest error is not
failed in its own direction: it is named in ``polluted`` and the outcome
is inconclusive unless another study fails on its own evidence.
"""

import logging
import math
from dataclasses import dataclass, replace

from mmsverify.errors import GridError
from mmsverify.problem.derive import get_problem
from mmsverify.execute.solvers import resolve_solver, solver_name
from mmsverify.study.settings import Refinement, Running
from mmsverify.study.refinement import design_orders, run_study

_log = logging.getLogger(__name__)

__all__ = ["SpaceTimeResult", "run_space_time"]


@dataclass(frozen=True)
class SpaceTimeResult:
    """The three studies of a transient solver."""

    space: object
    time: object
    combined: object
    notes: tuple = ()
    polluted: tuple = ()

    @property
    def passed(self):
        return self.space.passed and self.time.passed and self.combined.passed

    @property
    def outcome(self):
        """``"pass"``; ``"fail"`` when a study fails on its own evidence; ``"inconclusive"`` otherwise: a study
        that cannot decide, or one (named in :attr:`polluted`) whose errors the other direction's swamps."""
        if self.passed:
            return "pass"
        studies = (("time", self.time), ("space", self.space), ("combined", self.combined))
        failed = [label for label, r in studies if r.outcome == "fail" and label not in self.polluted]
        return "fail" if failed else "inconclusive"

    def summary(self):
        """One line per study: what was fixed, what was refined, verdicts."""
        rows = []
        for label, r in (("time", self.time), ("space", self.space), ("combined", self.combined)):
            status = "PASS" if r.passed else "POLLUTED" if label in self.polluted else "FAIL"
            g = r.levels[-1].grid
            fixed = (f"cells fixed at {'x'.join(map(str, g.cells))}" if label == "time"
                     else f"steps fixed at {g.steps}" if label == "space" else "steps tied to h")
            worst = min((v for v in r.verdicts if v.norm == "L2"), key=lambda v: v.observed or 0, default=None)
            obs = f"observed {worst.observed:.2f}" if worst and worst.observed is not None else "no order"
            rows.append(f"  {label:<9} {status}  formal {r.formal_order:g}, {obs} (L2, worst field); {fixed}")
        return "\n".join(rows)

    def __str__(self):
        head = {"pass": "PASS", "fail": "FAIL"}.get(self.outcome, "INCONCLUSIVE")
        parts = [f"{head}  space and time orders of {self.combined.solver} on {self.combined.problem}",
                 self.summary(), ""]
        if self.notes:
            parts += [_wrap(f"note: {n}") for n in self.notes] + [""]  # the command stays on a line of its own
        for label, r in (("Temporal study", self.time), ("Spatial study", self.space),
                         ("Combined study", self.combined)):
            parts += [f"== {label} ==", str(r), ""]
        return "\n".join(parts)


def run_space_time(problem, solver, *, levels=4, base_cells=None, base_steps=None, ratio=2.0,
                   fine_cells=None, fine_steps=None, refine_budget=None, study_progress=None, judging=None,
                   running=None, options=None):
    """Measure the space and time orders of a transient solver separately.

    Parameters
    ----------
    problem, solver
        As for :func:`~mmsverify.study.refinement.run_study`; the problem must be transient.
    levels, base_cells, base_steps, ratio
        The refinement plan shared by the three studies.
    fine_cells, fine_steps : int, optional
        The frozen resolution of the time and space studies (defaults: two
        refinements beyond the finest combined level, refined further while
        the frozen error is not negligible and the budget allows).
    refine_budget : float, optional
        Solver seconds the automatic refinement of the frozen resolution may
        spend in all (default :data:`REFINE_BUDGET`, 120 s; ``math.inf`` for
        no limit). A rerun whose estimated cost (the solver seconds of the
        study it replaces, scaled by cells x steps) would pass it is not
        started, and the result's ``notes`` say so.
    study_progress : callable, optional
        Called as ``study_progress(label)`` before each study (label such as
        ``"space study, steps fixed at 4096"``); what it returns is that
        study's per-level ``progress`` callback (see :mod:`mmsverify.cli.progress`).
    judging, running, options : optional
        Passed to every :func:`run_study` (see :mod:`mmsverify.study.settings`).

    Returns
    -------
    SpaceTimeResult
    """
    given = (problem, solver)
    plan = dict(levels=levels, base_cells=base_cells, base_steps=base_steps, ratio=ratio)  # as the caller gave it
    problem = get_problem(problem)
    if not problem.transient:
        raise GridError(f"{problem.name} is steady; a space-time study needs t = [t0, t1] in [domain]")
    s = problem.study
    base_cells = int(base_cells or s.get("base_cells", 8))
    base_steps = int(base_steps or s.get("base_steps", 8))
    p_space, p_time, _ = design_orders(problem, resolve_solver(solver))
    tie = p_space / p_time
    budget = float(REFINE_BUDGET if refine_budget is None else refine_budget)
    if not budget >= 0:
        raise GridError(f"the refinement budget must be a number of seconds >= 0, got {refine_budget!r}")
    user_cells, user_steps = fine_cells is not None, fine_steps is not None
    if fine_cells is None:
        fine_cells = int(round(base_cells * ratio ** (levels + 1)))
    if fine_steps is None:
        fine_steps = int(round(base_steps * ratio ** ((levels + 1) * tie)))

    def study(mode, cells, steps):
        label = (f"time study, cells fixed at {cells}" if mode == "time" else
                 f"space study, steps fixed at {steps}" if mode == "space" else "combined study")
        run = Running.of(running)
        if study_progress is not None:
            run = replace(run, progress=study_progress(label))
        return run_study(problem, solver,
                         Refinement(levels=levels, ratio=ratio, mode=mode, base_cells=cells, base_steps=steps),
                         judging, run, options=options)

    time_study = study("time", fine_cells, base_steps)
    space_study = study("space", base_cells, fine_steps)
    # Each study's frozen error, estimated from the other study's finest error and measured order, must sit
    # well below the errors it measures; when it does not, freeze finer and run that study again, as long
    # as the estimated cost of the rerun keeps the refinement within the budget.
    frozen, studies, fixed = {"h": fine_cells, "dt": fine_steps}, {"h": time_study, "dt": space_study}, \
        {"h": user_cells, "dt": user_steps}
    formal = {"h": p_space, "dt": p_time}   # the order each frozen error falls at, by design

    def measured(axis):
        """The order the frozen error of ``axis`` falls at, from the study that measures that direction."""
        oa = "dt" if axis == "h" else "h"
        return _measured_order(studies[oa], formal[axis], _clean(studies[oa], studies[axis], formal[oa], oa))

    spent, refused = 0.0, {}

    def refine(axis):
        """Freeze this axis finer and rerun its study if its frozen error needs it and the budget allows."""
        nonlocal spent
        other = studies["dt" if axis == "h" else "h"]
        order = measured(axis)
        what = ("time study's cells", "cells of the time study") if axis == "h" else \
            ("space study's steps", "steps of the space study")
        more = 1.0 if fixed[axis] or axis in refused else _refine_frozen(studies[axis], other, order, axis)
        if more <= 1:
            return False
        old = frozen[axis]
        new = int(round(old * more))
        cost = _cost(studies[axis]) * (new / old) ** (problem.dim if axis == "h" else 1)
        if spent + cost > budget:
            refused[axis] = cost
            _log.info("frozen %s stay at %d: refining to %d would take about %s, past the refinement budget of %s",
                      what[1], old, new, _duration(cost), _duration(budget))
            return False
        _log.info("freezing the %s finer: %d -> %d (about %s)", what[0], old, new, _duration(cost))
        frozen[axis] = new
        studies[axis] = study("time", new, base_steps) if axis == "h" else study("space", base_cells, new)
        spent += _cost(studies[axis])
        return True

    for _ in range(_ROUNDS):
        refined = [refine(axis) for axis in ("h", "dt")]    # both axes, in this order, every round
        if not any(refined):
            break
    fine_cells, fine_steps = frozen["h"], frozen["dt"]
    time_study, space_study = studies["h"], studies["dt"]
    combined = study("combined", base_cells, base_steps)
    plan.update(fine_cells=fine_cells if user_cells else None, fine_steps=fine_steps if user_steps else None)
    notes, polluted, told = [], [], []
    for axis, measuring, other, fine, fixed in (("h", time_study, space_study, fine_cells, user_cells),
                                                ("dt", space_study, time_study, fine_steps, user_steps)):
        order = measured(axis)
        want = _refine_frozen(measuring, other, order, axis, cap=math.inf)
        est = _frozen_estimate(measuring, other, order, axis)
        if not measuring.passed and est is not None and est[0] > _NOTE * est[1] and not measuring.failed_levels:
            polluted.append("time" if axis == "h" else "space")
            told.append(_polluted_note(axis, est, other, order, formal[axis]))
        # a refinement the budget refused is always told; otherwise only a frozen error that bends the order
        # by about half the usual tolerance (a few percent over the margin is rounding of the last round)
        if want > 1 and (axis in refused or want > (_NOTE / _MARGIN) ** (1.0 / order)):
            why = "fixed" if fixed else "budget" if axis in refused else "rounds"
            notes.append(_frozen_note(axis, measuring, other, order, fine, want, why, refused.get(axis), budget,
                                      given, plan, problem.dim))
    return SpaceTimeResult(space_study, time_study, combined, tuple(notes + told), tuple(polluted))


#: Default solver seconds the automatic refinement of the frozen resolution may spend.
REFINE_BUDGET = 120.0
_MARGIN = 0.02     # a frozen error 2% of the finest measured one bends a second order by under 0.02 (log2(4.02/1.02))
_NOTE = 0.05       # a frozen error 5% of the finest one bends a second order by about 0.05 (log2(3.85/1)): told
_MAX_FACTOR = 16   # refine the frozen resolution at most this much at once
_ROUNDS = 3        # and at most this many times
_MIN_ORDER = 0.25  # a lower measured order is taken as this: the refinement then takes the largest step


def _finest_l2(result):
    ok = [lv for lv in result.levels if lv.ok and lv.errors]
    if not ok:
        return None, None
    f = next(iter(ok[-1].errors))
    return ok[-1], ok[-1].errors[f]["L2"]


def _cost(result):
    """Solver seconds of a study: the base of the cost estimate of a rerun."""
    return sum(lv.seconds for lv in result.levels)


def _frozen_estimate(measuring, other, order, axis):
    """(frozen error estimate, finest measured L2 error) of ``measuring``, or None when unknown."""
    lv_m, e_m = _finest_l2(measuring)
    lv_o, e_o = _finest_l2(other)
    if lv_m is None or lv_o is None or not e_m > 0 or not e_o > 0:
        return None
    if axis == "h":   # spatial error frozen in the temporal study
        frozen, measured = lv_m.grid.h, lv_o.grid.h
    else:             # temporal error frozen in the spatial study
        frozen, measured = lv_m.grid.dt, lv_o.grid.dt
    return e_o * (frozen / measured) ** order, e_m


def _refine_frozen(measuring, other, order, axis, cap=_MAX_FACTOR):
    """Factor by which the frozen resolution of ``measuring`` should grow (1 when it is fine already)."""
    est = _frozen_estimate(measuring, other, order, axis)
    if est is None or est[0] <= _MARGIN * est[1]:
        return 1.0
    return min(cap, (est[0] / (_MARGIN * est[1])) ** (1.0 / order))


def _clean(study, other, order, axis):
    """True when ``study`` (frozen along ``axis``) is not swamped by its frozen error, estimated with the
    formal ``order``: only then is the order it measures that of its own direction."""
    est = _frozen_estimate(study, other, order, axis)
    return est is None or est[0] <= _NOTE * est[1]


def _measured_order(result, formal, clean=True):
    """The order the frozen error of the other study falls at: measured, at most the formal one.

    The L2 order of the finest pair, lowest over the fields; a solver whose
    time error falls at 1 where 2 is formal leaves a frozen error that
    shrinks only at 1, and sizing the frozen steps by 2 leaves it too large.
    An order above the formal one is not trusted (a lucky pair); one that
    is not measured, or measured by a study swamped by its own frozen
    error (not ``clean``), is taken as the formal one.
    """
    if not clean:
        return float(formal)
    measured = [o[-1] for f in result.fields for o in [result.orders(f, "L2")] if len(o) and math.isfinite(o[-1])]
    if not measured:
        return float(formal)
    return max(_MIN_ORDER, min(float(formal), min(measured)))


def _polluted_note(axis, est, other, order, formal):
    """Why a failed study is not evidence against its own direction: the other direction's frozen error."""
    study, kind, other_name = (("temporal", "spatial", "space") if axis == "h" else ("spatial", "temporal", "time"))
    measured = f"measured {order:.2f}" + (f", below the formal {formal:g}" if order < formal - 1e-9 else "")
    return (f"the {study} study is polluted by {kind} error: the frozen {kind} error is an estimated "
            f"{est[0] / est[1]:.0%} of the finest error it measures (the {other_name} study's order: {measured}). "
            f"Its verdict says nothing about the {study} order; fix the {other_name} order first, or freeze finer")


def _frozen_note(axis, measuring, other, order, fine, want, why, refused_cost, budget, given, plan, dim):
    """Why a study's frozen error is left too large, what it may do to the verdict, and the command to fix it."""
    estimate, finest = _frozen_estimate(measuring, other, order, axis)
    study, kind, option = (("temporal", "spatial", "fine_cells") if axis == "h"
                           else ("spatial", "temporal", "fine_steps"))
    what = f"{fine} cells per direction" if axis == "h" else f"{fine} steps"
    # the finest measured error holds the frozen one too: judge the frozen error against the rest, which is
    # unknown (taken as a tenth) when the frozen error is nearly all of it
    rest = max(finest - estimate, 0.1 * finest)
    want = max(want, (estimate / (_MARGIN * rest)) ** (1.0 / order))
    suggest = int(fine * 2 ** math.ceil(math.log2(want)))
    cost = _cost(measuring) * (suggest / fine) ** (dim if axis == "h" else 1)
    head = (f"the {study} study's frozen {what} leave an estimated {kind} error of {estimate / finest:.0%} of the "
            f"finest error it measures ({_MARGIN:.0%} would be negligible)")
    if why == "budget":
        reason = (f"; freezing finer would have taken about {_duration(refused_cost)}, past the refinement budget "
                  f"of {_duration(budget)}")
    else:
        reason = f", after {_ROUNDS} rounds of freezing finer" if why == "rounds" else ", as the caller fixed them"
    command = _command(given, dict(plan, **{option: suggest}))
    more = " (or allow more with --refine-budget)" if why == "budget" else ""
    return (f"{head}{reason}. The {study} verdict may be polluted by the frozen error (an order that falls or "
            f"stalls at the finest levels comes from it, not from too coarse levels). To freeze finer, about "
            f"{_duration(cost)} of solver time{more}:\n{command}")


def _command(given, plan):
    """The ``split`` command line that runs ``plan``."""
    import os
    import shlex
    problem, solver = given
    words = ["mmsverify", "split",
             str(problem) if isinstance(problem, (str, os.PathLike)) else problem.name,
             solver if isinstance(solver, str) else solver_name(solver)]
    defaults = dict(levels=4, ratio=2.0)
    for key in ("levels", "base_cells", "base_steps", "ratio", "fine_cells", "fine_steps"):
        value = plan.get(key)
        if value is not None and value != defaults.get(key):
            words += [f"--{key.replace('_', '-')}", f"{value:g}" if isinstance(value, float) else str(value)]
    return " ".join(shlex.quote(w) for w in words)


def _duration(seconds):
    if seconds < 10:
        return f"{seconds:.2g} s"
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def _wrap(text, width=100):
    """Fill the first line of a note; later lines (a command to copy) are indented, never broken."""
    import textwrap
    first, *rest = text.split("\n")
    return "\n".join([textwrap.fill(first, width, subsequent_indent="  ")] + [f"    {r}" for r in rest])
