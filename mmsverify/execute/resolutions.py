"""Resolutions a solver chooses: lists of resolutions and what a level actually ran.

Two ways out of "cells per direction in a box, times a ratio":

* a list of resolutions (``cells = [6, 10, 17, 29]`` in ``[study]``,
  ``--cells 6,10,17,29`` on the command line) gives one level per entry,
  with any ratio between them; :func:`listed_grids` builds the grids;
* a solver that builds its own mesh reports what it ran:
  ``Solution.h`` (its measured grid size, used for the orders) and
  ``Solution.unknowns`` (its count of unknowns, shown in the table) and
  ``Solution.mesh`` (a short description shown instead of the planned
  grid). :func:`level_info` keeps them in the level's ``info`` as ``"h"``,
  ``"unknowns"`` and ``"mesh"`` (``info["h"]`` set by the solver itself is
  read alike).
"""

import numbers

from mmsverify.errors import GridError, SolverError
from mmsverify.execute.grids import Grid, check_refinement

__all__ = ["level_info", "listed_grids", "planned_list", "parse_cells", "describe_level"]


def level_info(sol, where):
    """The ``info`` dict of a level: the solver's ``info`` with its reported ``h`` and ``unknowns``."""
    info = dict(sol.info) if isinstance(sol.info, dict) else {}
    h = getattr(sol, "h", None)
    if h is not None:
        info["h"] = h           # checked where the level's h is replaced (positive and finite)
    n = getattr(sol, "unknowns", None)
    if n is not None:
        if isinstance(n, bool) or not isinstance(n, numbers.Integral) or n < 1:
            raise SolverError(f"{where}: Solution.unknowns must be a positive whole number, got {n!r}")
        info["unknowns"] = int(n)
    mesh = getattr(sol, "mesh", "")
    if mesh:
        if not isinstance(mesh, str) or len(mesh) > 60 or "\n" in mesh:
            raise SolverError(f"{where}: Solution.mesh must be a short one-line text (at most 60 characters)")
        info["mesh"] = mesh
    return info


def describe_level(level):
    """The grid column of a level: the grid, and the unknowns when the solver reported them."""
    info = level.info if isinstance(level.info, dict) else {}
    text = info.get("mesh") or level.grid.describe()
    n = info.get("unknowns")
    return f"{text}, {n} unknowns" if n else text


def parse_cells(text, where="--cells"):
    """``"6,10,17,29"`` as a list of whole numbers, or a single number for ``"8"``."""
    parts = [p.strip() for p in str(text).split(",")]
    try:
        values = [int(p) for p in parts]
    except ValueError:
        raise GridError(f"{where}: give a whole number of cells or a comma-separated list of them "
                        f"(e.g. 6,10,17,29), got {text!r}") from None
    return values[0] if len(values) == 1 else values


def listed_grids(problem, cells, *, t_range=None, steps=None, where="cells"):
    """One grid per entry of ``cells`` (whole numbers, or one tuple per level for each direction).

    ``steps`` (one per level) is needed for transient problems.

    >>> from mmsverify.problem.derive import problem_from_text
    >>> p = problem_from_text('[domain]\\nx = [0, 1]\\ny = [0, 1]\\n[fields]\\nu = "x*y"')
    >>> [g.describe() for g in listed_grids(p, [6, 10, 17])]
    ['6x6 cells', '10x10 cells', '17x17 cells']
    """
    if isinstance(cells, (str, bytes)) or not hasattr(cells, "__len__") or len(cells) < 2:
        raise GridError(f"{where}: a list of resolutions needs at least 2 entries, coarse to fine; "
                        f"got {cells!r}")
    grids = []
    for k, n in enumerate(cells):
        per = (n,) * problem.dim if isinstance(n, numbers.Integral) and not isinstance(n, bool) else n
        try:
            per = tuple(per)
            ok = len(per) == problem.dim and all(isinstance(c, numbers.Integral) and not isinstance(c, bool)
                                                 and c >= 1 for c in per)
        except TypeError:
            ok = False
        if not ok:
            raise GridError(f"{where}: entry {k} ({n!r}) must be a positive whole number of cells per direction "
                            f"or a list of {problem.dim} of them")
        extra = {}
        if t_range is not None:
            extra = {"t_start": t_range[0], "t_end": t_range[1], "steps": int(steps[k])}
        grids.append(Grid(k, problem.lower, problem.upper, tuple(int(c) for c in per), **extra))
    check_refinement(grids, where)
    return grids


def planned_list(problem, cells, mode="combined", base_steps=None, orders=(2, 1)):
    """The grids of a list of resolutions; a transient problem's steps follow the cells.

    In ``combined`` mode the steps grow like ``(n_k / n_0) ** (p_space / p_time)``
    so that both errors fall at the space order; in ``space`` mode they stay
    at ``base_steps``. A list refines space only, so ``time`` mode is refused.
    """
    if not problem.transient:
        if mode not in ("combined", "space"):
            raise GridError(f"{problem.name} is steady; only spatial refinement applies (mode 'space')")
        return listed_grids(problem, cells)
    if mode == "time":
        raise GridError("a list of resolutions refines space; for a time study give levels and base steps")
    base_steps = problem.study.get("base_steps", 8) if base_steps is None else int(base_steps)
    first = _first_count(cells)
    p_space, p_time = orders
    exponent = p_space / p_time if mode == "combined" else 0.0
    steps = [max(1, int(round(base_steps * (_first_count([n]) / first) ** exponent))) for n in cells]
    return listed_grids(problem, cells, t_range=problem.t_range, steps=steps)


def _first_count(cells):
    n = cells[0]
    return float(n if isinstance(n, numbers.Number) else n[0])
