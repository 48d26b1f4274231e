"""The solver interface, its checks and the solvers registered by name.

A solver is any callable ``solve(case) -> Solution``:

1. ``case.grid`` (a :class:`~mmsverify.execute.grids.Grid`) gives the box, the
   cells per direction and, for transient problems, the time interval and
   the number of steps.
2. ``case.mms`` (a :class:`~mmsverify.problem.derive.Manufactured`) gives source
   terms, boundary kinds and data, initial data and coefficients as NumPy
   functions of coordinate arrays.
3. The solver returns the discrete solution on its own points (nodes, cell
   centres, anything) with the volume each point stands for, so errors are
   volume-weighted on non-uniform grids. Points may be full arrays or axis
   arrays that broadcast against the values (``np.ix_`` style).
4. A solver may state its design order as attributes ``formal_order``
   (space) and ``time_order``; the study checks them against the problem's.
"""

from dataclasses import dataclass, field
import importlib
from types import MappingProxyType

import numpy as np

from mmsverify.errors import SolverError

__all__ = ["Case", "Solution", "resolve_solver", "check_solution", "registered_solvers", "SOLVER_GROUP", "solver_name", "plain_info"]

#: Key of :func:`plain_info`'s note listing the entries kept as their ``repr``.
INFO_NOTE = "mmsverify_note"
_INFO_DEPTH, _INFO_ITEMS, _INFO_TEXT = 8, 10_000, 10_000


@dataclass(frozen=True)
class Case:
    """What a solver receives for one level."""

    grid: object
    mms: object
    options: dict = field(default_factory=dict)

    @property
    def problem(self):
        return self.mms.problem


@dataclass(frozen=True)
class Solution:
    """A discrete solution.

    Attributes
    ----------
    values : dict of str to ndarray
        One array per field (any subset of the problem's fields; at least one).
    points : tuple of ndarray
        Coordinates, one array per space dimension, broadcastable to each value array.
    weights : ndarray or float or None
        Volume (length, area) represented by each point; None for equal weights.
    time : float or None
        Time of the values for transient problems (default: the end time).
    info : dict
        Anything the solver wants to report (iterations, residuals).
        ``info["irregular"] = True`` says the grid is irregular at every
        level (nodes moved at random): the verdict then allows the
        pointwise norm Linf more spread (:func:`mmsverify.analysis.verdict.judge`).
    quantities : dict of str to float
        Functionals the solver computed (boundary fluxes, integrals, point
        values), compared with the problem's ``[quantities]``.
    gradients : dict of str to tuple of ndarray
        The gradient of some fields, one array per space dimension on the
        values' points; measured in the H1 seminorm, the H1 norm and the
        energy norm (see :mod:`mmsverify.gradnorms`).
    h : float or None
        The grid size the solver measured on the mesh it ran (a mesh it
        chose itself); replaces the planned grid's h in the orders. The
        older spelling ``info["h"]`` is read alike.
    unknowns : int or None
        The number of unknowns (degrees of freedom) of the level, shown in
        the table beside the grid.
    mesh : str
        A short description of a mesh the solver chose itself (e.g.
        ``"disc, 512 triangles"``); shown in the table instead of the
        planned grid.
    """

    values: dict
    points: tuple
    weights: object = None
    time: float = None
    info: dict = field(default_factory=dict)
    quantities: dict = field(default_factory=dict)
    gradients: dict = field(default_factory=dict)
    h: float = None
    unknowns: int = None
    mesh: str = ""


def plain_info(info):
    """``Solution.info`` as data that JSON holds, so that a study's files are written whatever a solver reports.

    Text, booleans, ``None``, whole and floating-point numbers (NumPy scalars
    as Python ones, non-finite ones kept for the checks and written as
    ``null``), lists and string-keyed dicts pass; small arrays become lists.
    Anything else, and containers nested deeper than 8 levels or with more
    than 10 000 items, is kept as its ``repr`` (at most 10 000 characters),
    and the key ``mmsverify_note`` says which entries were.

    >>> plain_info({"iterations": 12, "solver": object.__new__(type("Krylov", (), {"__repr__": lambda s: "K"}))})
    {'iterations': 12, 'solver': 'K', 'mmsverify_note': 'kept as text (repr), JSON cannot hold them: solver'}
    """
    if not isinstance(info, dict):
        return {}
    as_text = []

    def plain(x, where, depth):
        if x is None or isinstance(x, (bool, int, float)) and type(x) in (bool, int, float):
            return x
        if isinstance(x, str):
            return x if len(x) <= _INFO_TEXT else x[:_INFO_TEXT] + " [...]"
        if isinstance(x, np.generic) and x.dtype.kind in "biuf":
            return x.item()
        if isinstance(x, np.ndarray) and x.dtype.kind in "biuf" and x.size <= _INFO_ITEMS:
            x = x.tolist()
        if depth < _INFO_DEPTH and isinstance(x, (list, tuple)) and len(x) <= _INFO_ITEMS:
            return [plain(v, f"{where}[{i}]", depth + 1) for i, v in enumerate(x)]
        if depth < _INFO_DEPTH and isinstance(x, dict) and len(x) <= _INFO_ITEMS:
            return {str(k): plain(v, f"{where}.{k}", depth + 1) for k, v in x.items()}
        as_text.append(where)
        try:
            text = repr(x)
        except Exception as exc:  # a repr that raises is the solver's bug, not a reason to lose the study
            text = f"<{type(x).__name__} whose repr raised {type(exc).__name__}>"
        return text if len(text) <= _INFO_TEXT else text[:_INFO_TEXT] + " [...]"

    out = {str(k): plain(v, str(k), 1) for k, v in info.items()}
    if as_text:
        out[INFO_NOTE] = "kept as text (repr), JSON cannot hold them: " + ", ".join(as_text[:20])
    return out


#: Entry-point group in which packages register solvers by name ("module:attribute").
SOLVER_GROUP = "mmsverify.solvers"


def registered_solvers():
    """Solver names registered by installed packages: name -> ``"module:attribute"``.

    A package registers its solvers in the entry-point group
    :data:`SOLVER_GROUP`, the way pytest finds plugins; the demo solvers
    are registered so by ``solvers_demo``. Nothing is imported until a
    solver is resolved. When two packages register one name, the first
    found wins.
    """
    from importlib.metadata import entry_points
    found = {}
    for ep in entry_points(group=SOLVER_GROUP):
        found.setdefault(ep.name, ep.value)
    return MappingProxyType(found)


def _import_from_here(module):
    """Import a module, also from the current folder (as ``python -m`` would find it)."""
    import os
    import sys
    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as exc:
        here = os.getcwd()
        if here in sys.path or not (exc.name and module.split(".")[0] == exc.name.split(".")[0]):
            raise
        sys.path.insert(0, here)
        return importlib.import_module(module)


def resolve_solver(spec):
    """Accept a callable, ``"module:function"`` or a bundled name; return the callable."""
    if callable(spec):
        return spec
    if not isinstance(spec, str):
        raise SolverError(f"a solver is a callable, 'module:function' or a bundled name; got {spec!r}")
    registered = registered_solvers() if ":" not in spec else {}
    target = registered.get(spec, spec)
    if ":" not in target:
        raise SolverError(f"unknown solver {spec!r}; give 'module:function' or one of the registered names: "
                          f"{', '.join(registered) or '(none installed)'}")
    module, _, attr = target.partition(":")
    try:
        mod = _import_from_here(module)
    except ModuleNotFoundError as exc:
        if exc.name and module.split(".")[0] != exc.name.split(".")[0]:
            raise SolverError(f"solver module {module!r} was found, but importing it failed: it imports "
                              f"{exc.name!r}, which is not installed ({exc}); install it or fix the import") from None
        raise SolverError(f"cannot import solver module {module!r} ({exc}); check the name and that its "
                          "folder is on PYTHONPATH (run from the folder that contains it)") from None
    except SyntaxError as exc:
        raise SolverError(f"solver module {module!r} has a syntax error: {exc.filename}, line {exc.lineno}: "
                          f"{exc.msg}; fix the module and run again") from None
    except Exception as exc:  # noqa: BLE001  (any failure while the user's module runs its top level)
        raise SolverError(f"solver module {module!r} failed while being imported: {type(exc).__name__}: {exc}; "
                          "fix the module (run `python -c 'import {0}'` to see the traceback)".format(module)) from None
    fn = mod
    for part in attr.split("."):
        fn = getattr(fn, part, None)
    if not callable(fn):
        raise SolverError(f"module {module!r} has no callable {attr!r}")
    return fn


def solver_name(solver):
    """A readable, stable name for a solver callable."""
    if isinstance(solver, str):
        return solver
    name = getattr(solver, "name", None)
    if isinstance(name, str):
        return name
    mod = getattr(solver, "__module__", None) or type(solver).__module__
    qual = getattr(solver, "__qualname__", None) or type(solver).__qualname__
    return f"{mod}:{qual}"


def _finite_sum(a):
    """The sum of ``a`` when every entry is finite, else None: one pass without a temporary in the usual case."""
    with np.errstate(all="ignore"):
        total = np.add.reduce(a, axis=None)  # a NaN or an infinity makes the sum NaN or infinite
    if np.isfinite(total) or np.isfinite(a).all():  # an overflowing sum is checked entry by entry
        return total
    return None


def _all_finite(a):
    """True when every entry is finite."""
    return _finite_sum(a) is not None


_KINDS = {"c": "complex", "b": "boolean", "U": "text", "S": "text", "O": "Python object", "M": "date",
          "m": "time interval", "V": "structured"}


def _real_array(v, where, what):
    """``v`` as a float array; refuses what ``float`` would coerce silently (complex, text, bool, objects)."""
    try:
        a = np.asarray(v)
    except (TypeError, ValueError) as exc:  # ragged nested lists
        raise SolverError(f"{where}: {what} ({exc})") from None
    if a.dtype.kind not in "iuf":
        hint = "; return .real if the imaginary part is zero by design" if a.dtype.kind == "c" else ""
        raise SolverError(f"{where}: {what}: dtype {a.dtype} holds {_KINDS.get(a.dtype.kind, 'non-numeric')} "
                          f"values, not real numbers{hint}")
    return a.astype(float, copy=False)


def _warn_if_uneven(points, where):
    """Warn when points without weights are not evenly spaced: equal weights then misweigh the norms."""
    import warnings
    for i, p in enumerate(points):
        axis = np.unique(np.asarray(p))
        if axis.size < 3:
            continue
        steps = np.diff(axis)
        if steps.max() - steps.min() > 1e-6 * steps.max():
            warnings.warn(f"{where}: Solution has no weights, but its points are not evenly spaced along axis {i}; "
                          "every point counts the same in the L1 and L2 norms. Return weights (the cell volume "
                          "each point stands for)", RuntimeWarning, stacklevel=3)
            return


def check_solution(sol, problem, where, grid=None):
    """Validate a solver's return value; raise :class:`SolverError` saying what is wrong.

    Besides the form (fields, shapes, finite numbers), the content must be
    plausible for the problem: points inside the domain, weights that add
    up to the domain's measure, a time inside the time interval, and more
    than one point when the level's ``grid`` has more than one cell.

    Returns the values and weights as float arrays of one common shape and the
    points broadcast to it (weights and points as read-only broadcast views).
    """
    if not isinstance(sol, Solution):
        raise SolverError(f"{where}: the solver returned {type(sol).__name__}; return mmsverify.Solution("
                          "values={...}, points=(...), weights=...)")
    if not isinstance(sol.values, dict) or not sol.values:
        raise SolverError(f"{where}: Solution.values must be a non-empty dict of field name to array")
    unknown = set(sol.values) - set(problem.field_names)
    if unknown:
        raise SolverError(f"{where}: returned field(s) {sorted(unknown)} that the problem does not define; "
                          f"its fields are {', '.join(problem.field_names)}")
    if not isinstance(sol.points, (tuple, list)) or len(sol.points) != problem.dim:
        raise SolverError(f"{where}: Solution.points must hold {problem.dim} coordinate array(s), one per "
                          f"dimension; got {type(sol.points).__name__} of length "
                          f"{len(sol.points) if hasattr(sol.points, '__len__') else '?'}")
    values, points = {}, None
    raw_points = []
    for axis, p in zip("xyz", sol.points):
        raw_points.append(_real_array(p, where, f"the points are not numeric arrays (coordinate {axis})"))
    for name, v in sol.values.items():
        arr = _real_array(v, where, f"field {name!r} is not numeric")
        try:
            pts = np.broadcast_arrays(*raw_points, arr)
        except ValueError:
            shapes = [np.shape(p) for p in sol.points]
            raise SolverError(f"{where}: field {name!r} has shape {arr.shape}, which does not match the "
                              f"points' shapes {shapes}") from None
        if pts[-1].shape != arr.shape:
            raise SolverError(f"{where}: field {name!r} has shape {arr.shape} but the points have shape "
                              f"{pts[-1].shape}; return one value per point")
        if arr.size == 0:
            raise SolverError(f"{where}: field {name!r} is empty")
        if not _all_finite(arr):
            bad = ~np.isfinite(arr)
            raise SolverError(f"{where}: field {name!r} has {int(bad.sum())} NaN/Inf value(s) of {arr.size}; "
                              "the solver diverged or left entries unset")
        if points is not None and points[0].shape != arr.shape:
            raise SolverError(f"{where}: fields have different shapes; return each field on one set of points "
                              "or use separate solvers per staggered location")
        if points is None and not all(_all_finite(p) for p in raw_points):  # before broadcasting: cheaper
            raise SolverError(f"{where}: the points contain NaN/Inf")
        points = tuple(pts[:-1])
        values[name] = arr
    shape = points[0].shape
    _check_inside(raw_points, problem, where)
    if grid is not None and int(np.prod(shape)) == 1 and grid.n_cells > 1:
        raise SolverError(f"{where}: the solver returned a single point for a grid of {grid.n_cells} cells; "
                          "return the solution at every node or cell of the level")
    if sol.weights is None:
        weights = np.broadcast_to(1.0, shape)
        _warn_if_uneven(points, where)
    else:
        raw = _real_array(sol.weights, where, "the weights (cell volumes) are not numeric")
        try:
            weights = np.broadcast_to(raw, shape)
        except (ValueError, TypeError):
            raise SolverError(f"{where}: weights of shape {np.shape(sol.weights)} do not match the values' "
                              f"shape {shape}") from None
        # checked before broadcasting; with no negative entry the sum is positive exactly when one entry is
        total = _finite_sum(raw)
        if total is None or raw.min() < 0 or not total > 0:
            raise SolverError(f"{where}: weights (cell volumes) must be finite, non-negative and not all zero")
        _check_measure(float(total) * (weights.size / raw.size), problem, where)
    _check_time(sol.time, problem, where)
    if not isinstance(sol.quantities, dict):
        raise SolverError(f"{where}: Solution.quantities must be a dict of name to number")
    declared = problem.names("quantities")
    unknown = set(sol.quantities) - set(declared)
    if unknown:
        raise SolverError(f"{where}: returned quantities {sorted(unknown)} that the problem does not declare; "
                          f"declare them under [quantities] (known: {', '.join(declared) or 'none'})")
    for name, q in sol.quantities.items():
        if isinstance(q, bool) or not isinstance(q, (int, float, np.floating, np.integer)) or not np.isfinite(q):
            raise SolverError(f"{where}: quantity {name!r} must be a finite number, got {q!r}")
    return values, points, weights


#: Points may lie this far outside the domain (relative to its extent per direction): rounding of a mesh
#: generator, never a ghost layer (half a cell of a 1000-cell grid is 5e-4).
INSIDE_TOLERANCE = 1e-6
#: The weights may add up to the domain's measure times a factor within [1/2, 2]: a solver that reports
#: interior points only (boundary values are given) leaves out a boundary layer, which is less than half
#: the domain on any grid with at least 4 cells per direction in 2-D (3/4 squared); weights of another
#: scale (ones, 1e308) are not volumes and would overflow or hide a wrong norm.
MEASURE_FACTOR = 2.0


def _check_inside(raw_points, problem, where):
    """Refuse points outside the problem's box (beyond :data:`INSIDE_TOLERANCE` of its extent)."""
    for axis, p, lo, hi in zip("xyz", raw_points, problem.lower, problem.upper):
        slack = INSIDE_TOLERANCE * (hi - lo)
        low, high = float(p.min()), float(p.max())
        if low < lo - slack or high > hi + slack:
            raise SolverError(f"{where}: points reach {axis} = {low if low < lo - slack else high:.6g}, outside "
                              f"the domain {axis} = [{lo:g}, {hi:g}]; return the solution at points of the domain "
                              "only (no ghost or halo points) in the problem's coordinates")


def _check_measure(total, problem, where):
    """Refuse weights whose sum is not the domain's measure within a factor :data:`MEASURE_FACTOR`."""
    measure = float(np.prod([hi - lo for lo, hi in zip(problem.lower, problem.upper)]))
    if not (np.isfinite(total) and measure / MEASURE_FACTOR <= total <= measure * MEASURE_FACTOR):
        what = {1: "length", 2: "area", 3: "volume"}.get(problem.dim, "measure")
        raise SolverError(f"{where}: the weights add up to {total:.6g}, but the domain's {what} is {measure:.6g}; "
                          "a weight is the length, area or volume a point stands for (cell volumes, trapezoid "
                          "weights); return those, or weights=None for equal weights")


def _check_time(time, problem, where):
    """Refuse a time that is not a finite number inside the problem's time interval."""
    if time is None or not problem.transient:
        return
    t0, t1 = problem.t_range
    try:
        t = float(time)
    except (TypeError, ValueError):
        raise SolverError(f"{where}: Solution.time must be a number, got {time!r}") from None
    slack = 1e-9 * max(abs(t1 - t0), abs(t1), 1.0)
    if not np.isfinite(t) or not t0 - slack <= t <= t1 + slack:
        raise SolverError(f"{where}: Solution.time = {time!r} is outside the time interval t = [{t0:g}, {t1:g}]; "
                          "return the time the values belong to (the grid's t_end after the last step)")
