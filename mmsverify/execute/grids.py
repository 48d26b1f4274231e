"""Structured grid levels and refinement sequences.

A :class:`Grid` describes one level of a study: a box in 1 to 3 dimensions
split into ``cells`` intervals per direction, and for transient problems an
end time and a number of time steps. Solvers choose their own points (nodes
or cell centres) on it; the representative size is ``h = (V/N)**(1/d)``
(Celik et al. 2008), which is the spacing itself for square cells.
"""

from dataclasses import dataclass, field
import math

import numpy as np

from mmsverify.errors import GridError

__all__ = ["Grid", "refinement", "check_refinement"]


@dataclass(frozen=True)
class Grid:
    """One level of a refinement study.

    Attributes
    ----------
    level : int
        Index in the study, 0 for the coarsest.
    lower, upper : tuple of float
        Corners of the box, one entry per space dimension.
    cells : tuple of int
        Number of intervals per direction.
    t_start, t_end : float or None
        Time interval for transient problems.
    steps : int or None
        Number of time steps for transient problems.

    Examples
    --------
    >>> g = Grid(0, (0.0, 0.0), (1.0, 2.0), (10, 20))
    >>> g.spacing, g.h
    ((0.1, 0.1), 0.1)
    """

    level: int
    lower: tuple
    upper: tuple
    cells: tuple
    t_start: float = None
    t_end: float = None
    steps: int = None
    options: dict = field(default_factory=dict, compare=False)

    def __post_init__(self):
        if not (len(self.lower) == len(self.upper) == len(self.cells)) or not 1 <= len(self.cells) <= 3:
            raise GridError(f"level {self.level}: lower, upper and cells need 1 to 3 entries each, got "
                            f"{self.lower}, {self.upper}, {self.cells}")
        for lo, hi in zip(self.lower, self.upper):
            if not hi > lo:
                raise GridError(f"level {self.level}: upper corner {self.upper} must exceed lower {self.lower}")
        for n in self.cells:
            if int(n) != n or n < 1:
                raise GridError(f"level {self.level}: cell counts must be positive integers, got {self.cells}")
        if self.steps is not None and (int(self.steps) != self.steps or self.steps < 1):
            raise GridError(f"level {self.level}: the number of time steps must be a positive integer, got {self.steps}")

    @property
    def dim(self):
        """Number of space dimensions."""
        return len(self.cells)

    @property
    def spacing(self):
        """Cell size per direction."""
        return tuple((hi - lo) / n for lo, hi, n in zip(self.lower, self.upper, self.cells))

    @property
    def volume(self):
        """Volume (length, area) of the box."""
        return math.prod(hi - lo for lo, hi in zip(self.lower, self.upper))

    @property
    def n_cells(self):
        """Total number of cells."""
        return math.prod(self.cells)

    @property
    def h(self):
        """Representative grid size ``(V/N)**(1/d)``."""
        return (self.volume / self.n_cells) ** (1.0 / self.dim)

    @property
    def transient(self):
        return self.t_end is not None

    @property
    def dt(self):
        """Time step, or None for a steady problem."""
        if not self.transient or not self.steps:
            return None
        return (self.t_end - self.t_start) / self.steps

    def nodes(self, axis):
        """Node coordinates along one axis (``cells + 1`` values)."""
        return np.linspace(self.lower[axis], self.upper[axis], self.cells[axis] + 1)

    def centres(self, axis):
        """Cell-centre coordinates along one axis (``cells`` values)."""
        x = self.nodes(axis)
        return 0.5 * (x[1:] + x[:-1])

    def describe(self):
        """Short text such as ``64x64 cells, 128 steps``."""
        text = "x".join(str(n) for n in self.cells) + " cells"
        if self.steps:
            text += f", {self.steps} steps"
        return text


def refinement(lower, upper, base_cells, levels, ratio=2.0, *, t_start=None, t_end=None,
               base_steps=None, time_ratio=None):
    """Build a sequence of grids refined by a constant ratio.

    Parameters
    ----------
    lower, upper : sequence of float
        Box corners.
    base_cells : int or sequence of int
        Cells per direction on the coarsest level.
    levels : int
        Number of levels (at least 2).
    ratio : float
        Refinement ratio in space (> 1). Non-integer ratios round the cell
        counts, so the realised ratio is checked and reported by ``h``.
    t_start, t_end, base_steps : optional
        Time interval and coarsest number of steps for transient problems.
    time_ratio : float, optional
        Refinement ratio of the number of time steps per level; ``1`` keeps
        the time step fixed (a spatial study), and the default ties it to the
        space ratio. Set it to ``ratio**(p_space/p_time)`` to keep the two
        error contributions in step.

    Returns
    -------
    list of Grid

    Examples
    --------
    >>> [g.cells for g in refinement((0,), (1,), 8, 3)]
    [(8,), (16,), (32,)]
    """
    dim = len(lower)
    if np.ndim(base_cells) == 0:
        base_cells = (int(base_cells),) * dim
    if levels < 2:
        raise GridError(f"a study needs at least 2 levels, got {levels}; use 3 or more for an order fit")
    if not ratio > 1:
        raise GridError(f"the refinement ratio must exceed 1, got {ratio}")
    transient = t_end is not None
    if transient and base_steps is None:
        raise GridError("a transient study needs base_steps (time steps on the coarsest level)")
    if time_ratio is None:
        time_ratio = ratio
    grids = []
    for k in range(levels):
        cells = tuple(max(1, int(round(n * ratio ** k))) for n in base_cells)
        steps = int(round(base_steps * time_ratio ** k)) if transient else None
        grids.append(Grid(k, tuple(map(float, lower)), tuple(map(float, upper)), cells,
                          t_start=t_start, t_end=t_end, steps=steps))
    check_refinement(grids)
    return grids


def check_refinement(grids, where="grid sequence"):
    """Raise :class:`GridError` unless every level refines the previous one.

    Each level must have at least as many cells in every direction (or time
    steps), strictly more in total, and the same box and time interval.
    """
    if len(grids) < 2:
        raise GridError(f"{where}: at least 2 levels are needed, got {len(grids)}")
    for a, b in zip(grids, grids[1:]):
        if (a.lower, a.upper, a.t_start, a.t_end) != (b.lower, b.upper, b.t_start, b.t_end):
            raise GridError(f"{where}: levels {a.level} and {b.level} cover different domains; "
                            "every level must solve the same problem")
        finer_space = all(nb >= na for na, nb in zip(a.cells, b.cells))
        finer_time = (a.steps or 0) <= (b.steps or 0)
        more = b.n_cells > a.n_cells or (b.steps or 0) > (a.steps or 0)
        if not (finer_space and finer_time and more):
            raise GridError(f"{where}: level {b.level} ({b.describe()}) does not refine level {a.level} "
                            f"({a.describe()}); order the levels coarse to fine with a ratio above 1")
