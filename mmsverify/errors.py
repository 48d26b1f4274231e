"""Exceptions raised by mmsverify.

Every error says *where* (file, line, field, level) and *what to do*.
All derive from :class:`MMSError` so a caller can catch one type.
"""

__all__ = [
    "MMSError",
    "ProblemError",
    "ExpressionError",
    "GridError",
    "SolverError",
    "AnalysisError",
]


class MMSError(Exception):
    """Base class of every error that mmsverify raises on purpose."""


class ProblemError(MMSError):
    """A manufactured problem (file or object) is malformed or inconsistent."""


class ExpressionError(ProblemError):
    """An expression in a problem file is refused by the safe parser."""


class GridError(MMSError):
    """A grid sequence is not a valid refinement."""


class SolverError(MMSError):
    """A solver crashed, hung or returned something unusable."""


class AnalysisError(MMSError):
    """The numbers given cannot support the requested analysis."""
