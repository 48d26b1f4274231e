"""The pointwise error of one level, to show where the error lives.

A study keeps only norms. :func:`pointwise_error` runs the solver once more
on one grid (by default the finest level that succeeded) and returns the
discrete minus the exact solution at the solver's own points, for the
error maps of :mod:`mmsverify.render.plots`.
"""

from dataclasses import dataclass
import logging

import numpy as np

from mmsverify.problem.origin import problem_of_record
from mmsverify.problem.derive import derive, get_problem
from mmsverify.errors import MMSError, SolverError
from mmsverify.execute.solvers import Case, check_solution, resolve_solver

__all__ = ["PointwiseError", "pointwise_error", "finest_error"]

_log = logging.getLogger(__name__)

_OTHER_PROBLEM = ("{source}: this problem's content differs from the one the study of {name} ran on (hash "
                  "{hash} vs {recorded}); pass the problem file the study used")


@dataclass(frozen=True)
class PointwiseError:
    """Discrete minus exact solution of one field on one level.

    Attributes
    ----------
    field : str
    level : int
    grid : Grid
    points : tuple of ndarray
        Coordinates, one array per space dimension, of the shape of ``error``.
    error : ndarray
        Pointwise error at the solver's points.
    time : float or None
        Time of the values for transient problems.
    """

    field: str
    level: int
    grid: object
    points: tuple
    error: np.ndarray
    time: float = None

    @property
    def dim(self):
        return len(self.points)

    @property
    def worst(self):
        """Coordinates of the largest error in magnitude."""
        i = int(np.argmax(np.abs(self.error)))
        return tuple(float(np.ravel(p)[i]) for p in self.points)

    def __str__(self):
        e = np.abs(self.error)
        where = ", ".join(f"{c:.4g}" for c in self.worst)
        return (f"pointwise error of {self.field} on level {self.level} ({self.grid.describe()}): "
                f"max {e.max():.3e} at ({where}), mean {e.mean():.3e} over {e.size} points")


def pointwise_error(problem, solver, grid, *, options=None):
    """Run ``solver`` on one grid and return the pointwise error of each field.

    Parameters
    ----------
    problem : Problem, path or bundled name
    solver : callable, ``"module:function"`` or bundled name
    grid : Grid
    options : dict, optional
        Passed to the solver in ``case.options`` (include ``mode`` as the study did).

    Returns
    -------
    dict of str to PointwiseError

    Raises
    ------
    SolverError
        When the solver fails on this grid or returns unusable values.
    """
    problem = get_problem(problem)
    solve = resolve_solver(solver)
    mms = derive(problem)
    where = f"problem {problem.name}, pointwise error on level {grid.level} ({grid.describe()})"
    _log.info("one more run of the solver on level %d (%s) for the pointwise error", grid.level, grid.describe())
    try:
        sol = solve(Case(grid, mms, dict(options or {})))
    except MMSError:
        raise
    except Exception as exc:  # the solver under test crashed
        raise SolverError(f"{where}: the solver raised {type(exc).__name__}: {exc}") from None
    values, points, _ = check_solution(sol, problem, where)
    t = None
    if problem.transient:
        t = grid.t_end if sol.time is None else float(sol.time)
    return {name: PointwiseError(name, grid.level, grid, points, v - mms.exact(name, *points, t=t), t)
            for name, v in values.items()}


def finest_error(result, solver=None, problem=None):
    """Pointwise errors on the finest successful level of a finished study.

    Parameters
    ----------
    result : StudyResult
    solver : optional
        Defaults to ``result.solver`` (a bundled name or ``module:function``).
    problem : optional
        Defaults to the study's problem file, else its bundled name. Its
        content must match the study's (checked by hash).

    Returns
    -------
    dict of str to PointwiseError
        Empty when no level succeeded.
    """
    ok = [lv for lv in result.levels if lv.ok]
    if not ok:
        return {}
    problem = problem_of_record(result, problem, mismatch=_OTHER_PROBLEM)
    return pointwise_error(problem, result.solver if solver is None else solver, ok[-1].grid,
                           options={"mode": result.mode})
