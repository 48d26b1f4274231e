"""Order checks inside a test suite: one assertion, a readable failure.

::

    from mmsverify.testing import assert_order

    def test_my_solver_is_second_order():
        assert_order("plate-poisson", my_solver, order=2)

On failure the assertion error shows each failed verdict with its reason
and the full table of levels, errors and orders, so the test log alone is
enough to see what went wrong. The pytest fixture ``order_check`` (from
:mod:`mmsverify.pytest_plugin`, registered automatically when mmsverify is
installed) wraps the same function and can also write a report per check.

This module does not import pytest; the assertion works under any runner.
"""

from mmsverify.execute.norms import NORMS
from mmsverify.study.refinement import run_study

__all__ = ["OrderCheckError", "assert_order", "failure_message"]


class OrderCheckError(AssertionError):
    """An order check failed; ``result`` holds the study for further inspection."""

    def __init__(self, message, result):
        super().__init__(message)
        self.result = result


def _selected(result, fields, norms):
    return [v for v in result.verdicts if v.norm in norms and (fields is None or v.field in fields)]


def failure_message(result, fields=None, norms=("L2",), allow_failed_levels=False):
    """Why ``result`` fails the check, or None when it passes.

    Parameters
    ----------
    result : StudyResult
    fields : sequence of str, optional
        Fields to check (default all).
    norms : sequence of str
        Norms to check.
    allow_failed_levels : bool
        Accept a study in which some levels failed, if the rest confirm the order.

    Returns
    -------
    str or None
    """
    checked = _selected(result, fields, norms)
    problems = []
    if not checked:
        have = ", ".join(sorted({f"{v.field} {v.norm}" for v in result.verdicts})) or "none"
        problems.append(f"no verdict for fields {list(fields) if fields else 'all'} and norms {list(norms)} "
                        f"(verdicts: {have}); check the field names, or see why the levels failed below")
    for v in checked:
        if not v.ok:
            problems.append(f"{v.field} {v.norm}: {v.status.upper()} - {v.reason}")
    if result.failed_levels and not allow_failed_levels:
        for lv in result.failed_levels:
            first = lv.message.splitlines()[0] if lv.message else ""
            problems.append(f"level {lv.level} ({lv.grid.describe()}) failed: {first} "
                            "(pass allow_failed_levels=True to judge the other levels)")
    if not problems:
        return None
    head = f"order check failed: {result.problem} solved by {result.solver}, formal order {result.formal_order:g}"
    return "\n".join([head] + [f"  {p}" for p in problems] + ["", str(result)])


def assert_order(problem, solver, order=None, *, norms=("L2",), fields=None, tolerance=None, levels=None,
                 base_cells=None, ratio=None, mode="combined", allow_failed_levels=False, **study_options):
    """Assert that ``solver`` converges at ``order`` on ``problem``; return the study.

    Parameters
    ----------
    problem : Problem, path or bundled name
    solver : callable, ``"module:function"`` or bundled name
    order : float, optional
        Expected order (default: the problem's formal order).
    norms : sequence of str
        Norms that must confirm the order (default L2 only; use
        ``mmsverify.execute.norms.NORMS`` for all three).
    fields : sequence of str, optional
        Fields to check (default all).
    tolerance : float, optional
        Allowed ``|observed - order|`` (default: the problem's).
    levels, base_cells, ratio, mode : optional
        Refinement plan, as for :func:`~mmsverify.study.refinement.run_study`.
    allow_failed_levels : bool
        By default any failed level fails the check.
    **study_options
        Further keywords for :func:`~mmsverify.study.refinement.run_study`.

    Returns
    -------
    StudyResult

    Raises
    ------
    OrderCheckError
        (an ``AssertionError``) with the failed verdicts and the table.
    """
    __tracebackhide__ = True  # pytest shows the caller's line, not this function
    norms = (norms,) if isinstance(norms, str) else tuple(norms)
    unknown = [n for n in norms if n not in NORMS]
    if unknown:
        raise ValueError(f"unknown norm(s) {unknown}; choose from {', '.join(NORMS)}")
    if isinstance(fields, str):
        fields = (fields,)
    result = run_study(problem, solver, levels=levels, base_cells=base_cells, ratio=ratio, mode=mode,
                       tolerance=tolerance, formal_order=order, **study_options)
    message = failure_message(result, fields, norms, allow_failed_levels)
    if message:
        raise OrderCheckError(message, result)
    return result
