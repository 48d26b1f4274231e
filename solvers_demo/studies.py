"""Run a study of a demo solver against the orders the solver itself states.

A problem file states the order of the scheme it was written for; a demo
solver states its own (``formal_order`` in space, ``time_order`` for time
stepping). :func:`verify` copies the solver's orders into the problem
before calling :func:`mmsverify.run_study`, so a combined space-time study
ties the time steps to the cells by the solver's own ratio of orders, and
the verdict is judged against the order the solver claims.
"""

from mmsverify import run_study
from mmsverify.problem.derive import get_problem

__all__ = ["verify", "problem_for"]


def problem_for(problem, solver):
    """The problem with its formal orders replaced by the ones ``solver`` states."""
    problem = get_problem(problem)
    changes = {"space_order": solver.formal_order}
    if problem.transient and getattr(solver, "time_order", None):
        changes["time_order"] = solver.time_order
    return problem.with_changes(**changes)


def verify(solver, problem, refinement=None, **kwargs):
    """:func:`mmsverify.run_study` of ``solver`` on ``problem`` judged against the solver's orders.

    ``refinement`` (a number of levels or a Refinement) and the keyword
    arguments (judging, running, options) go to ``run_study``.

    Examples
    --------
    >>> from solvers_demo.fd.diffusion import FDDiffusion
    >>> verify(FDDiffusion(), "plate-poisson", 4).passed
    True
    """
    return run_study(problem_for(problem, solver), solver, refinement, **kwargs)
