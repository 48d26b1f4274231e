"""The solver interface, its checks and the registry of bundled solvers.

A solver is any callable ``solve(case) -> Solution``:

1. ``case.grid`` (a :class:`~mmsverify.grids.Grid`) gives the box, the
   cells per direction and, for transient problems, the time interval and
   the number of steps.
2. ``case.mms`` (a :class:`~mmsverify.derive.Manufactured`) gives source
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

from .errors import SolverError

__all__ = ["Case", "Solution", "resolve_solver", "check_solution", "BUNDLED_SOLVERS", "solver_name"]


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
    quantities : dict of str to float
        Functionals the solver computed (boundary fluxes, integrals, point
        values), compared with the problem's ``[quantities]``.
    """

    values: dict
    points: tuple
    weights: object = None
    time: float = None
    info: dict = field(default_factory=dict)
    quantities: dict = field(default_factory=dict)


# Bundled solvers: name -> "module:attribute". Names, not objects, so that
# listing them imports nothing heavy.
BUNDLED_SOLVERS = MappingProxyType({
    "poisson2d": "solvers_demo.fd.poisson:solve",
    "poisson2d-neumann1": "solvers_demo.fd.poisson:solve_first_order_neumann",
    "fd-diffusion": "solvers_demo.bundled:fd_diffusion",
    "fd-diffusion-neumann1": "solvers_demo.bundled:fd_diffusion_neumann1",
    "fd-diffusion-neumann3pt": "solvers_demo.bundled:fd_diffusion_neumann3pt",
    "fd-heat-euler": "solvers_demo.bundled:fd_heat_euler",
    "fd-heat-cn": "solvers_demo.bundled:fd_heat_cn",
    "fd-burgers": "solvers_demo.bundled:fd_burgers",
    "fd-advection-upwind": "solvers_demo.bundled:fd_advection_upwind",
    "fd-advection-central": "solvers_demo.bundled:fd_advection_central",
    "fd-advection-upwind2": "solvers_demo.bundled:fd_advection_upwind2",
    "fv-diffusion": "solvers_demo.bundled:fv_diffusion",
    "fv-diffusion-stretched": "solvers_demo.bundled:fv_diffusion_stretched",
    "fv-diffusion-skewed": "solvers_demo.bundled:fv_diffusion_skewed",
    "fv-diffusion-perturbed": "solvers_demo.bundled:fv_diffusion_perturbed",
    "fv-two-point": "solvers_demo.bundled:fv_two_point",
    "fv-advection-upwind": "solvers_demo.bundled:fv_advection_upwind",
    "fv-advection-unlimited": "solvers_demo.bundled:fv_advection_unlimited",
    "fv-advection-limited": "solvers_demo.bundled:fv_advection_limited",
    "ns-staggered": "solvers_demo.bundled:ns_staggered",
    "ns-staggered-u": "solvers_demo.bundled:ns_staggered_u",
    "ns-staggered-v": "solvers_demo.bundled:ns_staggered_v",
})


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
    target = BUNDLED_SOLVERS.get(spec, spec)
    if ":" not in target:
        raise SolverError(f"unknown solver {spec!r}; give 'module:function' or one of: "
                          f"{', '.join(BUNDLED_SOLVERS)}")
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


def check_solution(sol, problem, where):
    """Validate a solver's return value; raise :class:`SolverError` saying what is wrong.

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
