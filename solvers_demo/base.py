"""The small base class every demo solver shares.

A demo solver is a frozen dataclass: its fields are the scheme's options
(boundary treatment, flux, grid family, linear solver, ...) and one field,
``mistake``, switches on a seeded mistake by name. Calling the object with a
:class:`mmsverify.Case` does the bookkeeping here (checks the problem fits,
applies ``case.options`` that name a field, times the run, records the
options in ``Solution.info``); the numerics live in the subclass's
``_solve``.

Examples
--------
>>> from solvers_demo.fd.diffusion import FDDiffusion
>>> s = FDDiffusion(neumann="one-sided")
>>> s.formal_order, s.name
(1, "FDDiffusion(neumann='one-sided')")
"""

from dataclasses import dataclass, fields, replace
import time
from typing import ClassVar

import numpy as np

from mmsverify import SolverError

__all__ = ["DemoSolver", "node_weights", "check_choice"]


def check_choice(owner, option, value, allowed):
    """Raise :class:`SolverError` unless ``value`` is one of ``allowed``."""
    if value not in allowed:
        raise SolverError(f"{owner}: option {option}={value!r} is not known; use one of "
                          f"{', '.join(repr(a) for a in allowed)}")


@dataclass(frozen=True)
class DemoSolver:
    """Bookkeeping shared by the demo solvers.

    Subclasses set the class attributes ``operators`` (problem operators
    they solve), ``dims`` (space dimensions), ``steady``/``unsteady``
    (whether they accept steady and transient problems), ``MISTAKES``
    (seeded mistake name -> what it does) and ``CHOICES`` (option ->
    allowed values), and implement ``_solve(case)``. A scheme whose order
    claim holds only in some norms for a field says so in ``judged_norms``
    (field name -> tuple of norms; fields not named are judged in every
    norm; see :func:`mmsverify.study.refinement.judged_norms`).

    Attributes
    ----------
    mistake : str
        Name of a seeded mistake from ``MISTAKES``, or ``""`` for the correct scheme.
    """

    operators: ClassVar[tuple] = ()
    dims: ClassVar[tuple] = (1, 2, 3)
    steady: ClassVar[bool] = True
    unsteady: ClassVar[bool] = False
    MISTAKES: ClassVar[dict] = {}
    CHOICES: ClassVar[dict] = {}
    judged_norms: ClassVar[dict] = {}

    mistake: str = ""

    def __post_init__(self):
        self._validate()

    def _validate(self):
        owner = type(self).__name__
        if self.mistake and self.mistake not in self.MISTAKES:
            raise SolverError(f"{owner}: no seeded mistake {self.mistake!r}; known: "
                              f"{', '.join(self.MISTAKES) or 'none'}")
        for option, allowed in self.CHOICES.items():
            check_choice(owner, option, getattr(self, option), allowed)

    # -- identity -----------------------------------------------------------
    @property
    def formal_order(self):
        """Design order in space of the configured scheme."""
        raise NotImplementedError

    @property
    def name(self):
        """Readable name with the options that differ from the defaults."""
        parts = [f"{f.name}={getattr(self, f.name)!r}" for f in fields(self)
                 if getattr(self, f.name) != f.default]
        return f"{type(self).__name__}({', '.join(parts)})"

    def configured(self, options):
        """A copy with every entry of ``options`` that names one of its fields applied."""
        own = {f.name for f in fields(self)}
        changes = {k: v for k, v in (options or {}).items() if k in own}
        return replace(self, **changes) if changes else self

    # -- the call -----------------------------------------------------------
    def __call__(self, case):
        solver = self.configured(case.options)
        problem = case.problem
        owner = type(solver).__name__  # messages: the scheme's name, not a Python repr of its options
        if problem.operator not in solver.operators:
            raise SolverError(f"{owner} solves operator(s) {', '.join(solver.operators)}; problem "
                              f"{problem.name} uses {problem.operator!r}; pick a solver for that operator")
        if case.grid.dim not in solver.dims:
            raise SolverError(f"{owner} works in {', '.join(map(str, solver.dims))} dimension(s); problem "
                              f"{problem.name} is {case.grid.dim}-D")
        if problem.transient and not solver.unsteady:
            raise SolverError(f"{owner} is a steady solver; problem {problem.name} is transient")
        if not problem.transient and not solver.steady:
            raise SolverError(f"{owner} is a time-stepping solver; problem {problem.name} is steady")
        start = time.perf_counter()
        sol = solver._solve(case)
        info = dict(sol.info, solver=solver.name, formal_order=solver.formal_order,
                    seconds=time.perf_counter() - start)
        if solver.mistake:
            info["mistake"] = solver.mistake
        return replace(sol, info=info)

    def _solve(self, case):
        raise NotImplementedError


def node_weights(grid, shape=None):
    """Trapezoid weights (volume per node) of a node-centred tensor grid."""
    weights = np.ones(())
    for a in range(grid.dim):
        w = np.full(grid.cells[a] + 1, grid.spacing[a])
        w[[0, -1]] *= 0.5
        weights = np.multiply.outer(weights, w)
    return weights
