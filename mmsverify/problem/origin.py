"""The problem a saved record (a study result or a baseline) was made with.

A saved :class:`~mmsverify.study.refinement.StudyResult` or
:class:`~mmsverify.outputs.baseline.Baseline` names its problem three ways: the
file it was read from (``source``), its name (``problem``, a bundled name
for bundled problems) and its content hash (``problem_hash``). Rerunning
anything for such a record needs that problem back, and the same one:
:func:`problem_of_record` finds it and refuses a problem whose content
differs.
"""

from pathlib import Path

from mmsverify.errors import ProblemError
from mmsverify.problem.derive import get_problem

__all__ = ["problem_of_record"]


def problem_of_record(record, problem=None, *, mismatch):
    """The problem ``record`` was made with, checked by content hash.

    Parameters
    ----------
    record : object
        Anything with the attributes ``source`` (file the problem was read
        from, may be empty), ``problem`` (its name) and ``problem_hash``
        (content hash, may be empty: then nothing is checked).
    problem : Problem, path or bundled name, optional
        The problem to use instead of the recorded one; its content must
        still match the record's. By default the recorded file when it
        still exists, else the recorded name.
    mismatch : str
        The error message when the content differs, a :meth:`str.format`
        template with the fields ``source`` (the problem's file),
        ``name`` (the record's problem name), ``hash`` and ``recorded``
        (the first 12 characters of the problem's and the record's hash).

    Returns
    -------
    Problem

    Raises
    ------
    ProblemError
        When the problem's content hash differs from the record's (message
        from ``mismatch``).
    """
    if problem is None:
        problem = record.source if record.source and Path(record.source).is_file() else record.problem
    problem = get_problem(problem)
    if record.problem_hash and problem.content_hash() != record.problem_hash:
        raise ProblemError(mismatch.format(source=problem.source, name=record.problem,
                                           hash=problem.content_hash()[:12], recorded=record.problem_hash[:12]))
    return problem
