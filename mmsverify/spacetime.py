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
estimated from the other study (its finest error scaled by the formal
order); when it is not below 2% of the smallest error being
measured, the study is run once more with the frozen resolution refined
enough (at most three times, 16 times each), unless the caller fixed it.
"""

from dataclasses import dataclass

from .errors import GridError
from .problem import get_problem
from .solvers import resolve_solver
from .study import design_orders, run_study

__all__ = ["SpaceTimeResult", "run_space_time"]


@dataclass(frozen=True)
class SpaceTimeResult:
    """The three studies of a transient solver."""

    space: object
    time: object
    combined: object

    @property
    def passed(self):
        return self.space.passed and self.time.passed and self.combined.passed

    def summary(self):
        """One line per study: what was fixed, what was refined, verdicts."""
        rows = []
        for label, r in (("time", self.time), ("space", self.space), ("combined", self.combined)):
            status = "PASS" if r.passed else "FAIL"
            g = r.levels[-1].grid
            fixed = (f"cells fixed at {'x'.join(map(str, g.cells))}" if label == "time"
                     else f"steps fixed at {g.steps}" if label == "space" else "steps tied to h")
            worst = min((v for v in r.verdicts if v.norm == "L2"), key=lambda v: v.observed or 0, default=None)
            obs = f"observed {worst.observed:.2f}" if worst and worst.observed is not None else "no order"
            rows.append(f"  {label:<9} {status}  formal {r.formal_order:g}, {obs} (L2, worst field); {fixed}")
        return "\n".join(rows)

    def __str__(self):
        head = "PASS" if self.passed else "FAIL"
        parts = [f"{head}  space and time orders of {self.combined.solver} on {self.combined.problem}",
                 self.summary(), ""]
        for label, r in (("Temporal study", self.time), ("Spatial study", self.space),
                         ("Combined study", self.combined)):
            parts += [f"== {label} ==", str(r), ""]
        return "\n".join(parts)


def run_space_time(problem, solver, *, levels=4, base_cells=None, base_steps=None, ratio=2.0,
                   fine_cells=None, fine_steps=None, **kwargs):
    """Measure the space and time orders of a transient solver separately.

    Parameters
    ----------
    problem, solver
        As for :func:`~mmsverify.study.run_study`; the problem must be transient.
    levels, base_cells, base_steps, ratio
        The refinement plan shared by the three studies.
    fine_cells, fine_steps : int, optional
        The frozen resolution of the time and space studies (defaults: two
        refinements beyond the finest combined level).
    **kwargs
        Passed to every :func:`run_study` (tolerance, executor, ...).

    Returns
    -------
    SpaceTimeResult
    """
    problem = get_problem(problem)
    if not problem.transient:
        raise GridError(f"{problem.name} is steady; a space-time study needs t = [t0, t1] in [domain]")
    s = problem.study
    base_cells = int(base_cells or s.get("base_cells", 8))
    base_steps = int(base_steps or s.get("base_steps", 8))
    p_space, p_time, _ = design_orders(problem, resolve_solver(solver))
    tie = p_space / p_time
    user_cells, user_steps = fine_cells is not None, fine_steps is not None
    if fine_cells is None:
        fine_cells = int(round(base_cells * ratio ** (levels + 1)))
    if fine_steps is None:
        fine_steps = int(round(base_steps * ratio ** ((levels + 1) * tie)))
    common = dict(levels=levels, ratio=ratio, **kwargs)
    time_study = run_study(problem, solver, mode="time", base_cells=fine_cells, base_steps=base_steps, **common)
    space_study = run_study(problem, solver, mode="space", base_cells=base_cells, base_steps=fine_steps, **common)
    # Each study's frozen error, estimated from the other study's finest error and formal order, must sit
    # well below the errors it measures; when it does not, freeze finer once and run that study again.
    for _ in range(_ROUNDS):
        more_cells = 1.0 if user_cells else _refine_frozen(time_study, space_study, p_space, "h")
        if more_cells > 1:
            fine_cells = int(round(fine_cells * more_cells))
            time_study = run_study(problem, solver, mode="time", base_cells=fine_cells, base_steps=base_steps,
                                   **common)
        more_steps = 1.0 if user_steps else _refine_frozen(space_study, time_study, p_time, "dt")
        if more_steps > 1:
            fine_steps = int(round(fine_steps * more_steps))
            space_study = run_study(problem, solver, mode="space", base_cells=base_cells, base_steps=fine_steps,
                                    **common)
        if more_cells == 1 and more_steps == 1:
            break
    combined = run_study(problem, solver, mode="combined", base_cells=base_cells, base_steps=base_steps, **common)
    return SpaceTimeResult(space_study, time_study, combined)


_MARGIN = 0.02     # a frozen error 2% of the finest measured one bends a second order by under 0.02 (log2(4.02/1.02))
_MAX_FACTOR = 16   # refine the frozen resolution at most this much at once
_ROUNDS = 3        # and at most this many times


def _finest_l2(result):
    ok = [lv for lv in result.levels if lv.ok and lv.errors]
    if not ok:
        return None, None
    f = next(iter(ok[-1].errors))
    return ok[-1], ok[-1].errors[f]["L2"]


def _refine_frozen(measuring, other, order, axis):
    """Factor by which the frozen resolution of ``measuring`` should grow (1 when it is fine already)."""
    lv_m, e_m = _finest_l2(measuring)
    lv_o, e_o = _finest_l2(other)
    if lv_m is None or lv_o is None or not e_m > 0 or not e_o > 0:
        return 1.0
    if axis == "h":   # spatial error frozen in the temporal study
        frozen, measured = lv_m.grid.h, lv_o.grid.h
    else:             # temporal error frozen in the spatial study
        frozen, measured = lv_m.grid.dt, lv_o.grid.dt
    estimate = e_o * (frozen / measured) ** order
    if estimate <= _MARGIN * e_m:
        return 1.0
    return min(_MAX_FACTOR, (estimate / (_MARGIN * e_m)) ** (1.0 / order))
