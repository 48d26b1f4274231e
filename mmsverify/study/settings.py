"""What a study runs, how it judges and how it runs: three small records.

:func:`~mmsverify.study.refinement.run_study` takes them instead of a long
list of keyword arguments, so callers that pass a study on (the command
line, baselines, the space-time study, batches, the pytest helper) hand on
three objects::

    run_study(problem, solver, Refinement(levels=5, base_cells=16),
              Judging(norms=("L2",)), Running(workers=2, cache_dir="cache"))

Each record has a default for every field; ``Refinement.of`` also accepts a
number of levels or a sequence of grids.
"""

from collections.abc import Sequence
from dataclasses import dataclass

from mmsverify.errors import GridError
from mmsverify.execute.grids import Grid

__all__ = ["Refinement", "Judging", "Running", "MODES"]

MODES = ("combined", "space", "time")


@dataclass(frozen=True)
class Refinement:
    """Which levels a study runs.

    Parameters
    ----------
    levels, base_cells, ratio : optional
        The plan (defaults from the problem's ``[study]`` table, else 4, 8, 2).
    mode : {"combined", "space", "time"}
        How transient problems refine time (see :func:`~mmsverify.study.refinement.plan_grids`).
    base_steps : int, optional
        Time steps of the coarsest level.
    grids : sequence of Grid, optional
        An explicit sequence instead of the plan; must be a refinement.
    cells : sequence of int, optional
        A list of resolutions instead of the plan (cells per direction, one
        level each, any ratios between them; ``cells`` in ``[study]`` is the
        default when no plan is given). See :mod:`mmsverify.execute.resolutions`.
    """

    levels: int | None = None
    base_cells: object = None
    ratio: float | None = None
    mode: str = "combined"
    base_steps: int | None = None
    grids: tuple | None = None
    cells: tuple | None = None

    def __post_init__(self):
        if self.mode not in MODES:
            raise GridError(f"unknown mode {self.mode!r}; choose from {', '.join(MODES)}")
        for name in ("grids", "cells"):
            if getattr(self, name) is not None:
                object.__setattr__(self, name, tuple(getattr(self, name)))

    @classmethod
    def of(cls, value):
        """A Refinement from None, a Refinement, a number of levels or a sequence of grids."""
        if value is None:
            return cls()
        if isinstance(value, cls):
            return value
        if isinstance(value, int) and not isinstance(value, bool):
            return cls(levels=value)
        if isinstance(value, Sequence) and value and all(isinstance(g, Grid) for g in value):
            return cls(grids=tuple(value))
        raise GridError(f"a refinement is a Refinement, a number of levels or a list of Grid objects; got {value!r}")


@dataclass(frozen=True)
class Judging:
    """How the observed orders are judged.

    Parameters
    ----------
    formal_order, tolerance : float, optional
        Override the problem's ``[order]`` values (and the solver's stated order).
    norms : sequence of str, optional
        Norms that get a verdict, for every field (default: the solver's
        ``judged_norms``, else all).
    rules : mapping or sequence, optional
        Per field, norm or quantity orders and tolerances, as in the problem
        file's ``[order.by]`` table.
    """

    formal_order: float | None = None
    tolerance: float | None = None
    norms: tuple | None = None
    rules: object = None

    @classmethod
    def of(cls, value):
        return cls() if value is None else value


@dataclass(frozen=True)
class Running:
    """How the levels run.

    Parameters
    ----------
    executor : concurrent.futures.Executor or dask.distributed.Client, optional
        Run levels through it (the solver must then be picklable).
    workers : int, optional
        Without ``executor``: a local pool of this many processes.
    timeout : float, optional
        Seconds allowed per level (see :mod:`mmsverify.execute.runner`).
    cache_dir : path, optional
        Keep finished levels there by content (see :mod:`mmsverify.execute.cache`).
    resume : bool
        With ``cache_dir``: reuse stored levels (default); False recomputes them.
    progress : callable, optional
        Called as ``progress(level_result)`` after each level.
    """

    executor: object = None
    workers: int | None = None
    timeout: float | None = None
    cache_dir: object = None
    resume: bool = True
    progress: object = None

    @classmethod
    def of(cls, value):
        return cls() if value is None else value
