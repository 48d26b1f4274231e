"""Gradient error norms (H1 seminorm, H1 norm, energy norm) and per-norm formal orders.

A solver may return the gradient of a field beside its values
(``Solution.gradients = {"u": (ux, uy)}``, one array per space dimension,
on the same points as the values). The exact gradient comes from the
manufactured field by differentiation (:meth:`Manufactured.gradient`).
With weights ``w`` and ``V = sum(w)``, like the norms of
:mod:`mmsverify.norms`:

* ``H1semi = sqrt(sum(w |grad e|**2) / V)``, the H1 seminorm;
* ``H1 = sqrt(L2**2 + H1semi**2)``, the full H1 norm;
* ``energy = sqrt(sum(w k |grad e|**2) / V)`` with the operator's
  coefficient ``k`` (diffusion, Poisson), evaluated with the exact fields.

The gradient norms converge at their own order, e.g. L2 at p+1 and H1 at p
for Lagrange elements of degree p (Brenner & Scott, Theorem 4.4.20 and
Section 0.8). A formal order per norm is an order rule
(:mod:`mmsverify.problem.rules`): ``"H1semi" = {space = 1}`` under
``[order.by]``, ``rules=`` in Python, or the solver's attribute
``norm_orders`` (a norm name to an order for every field, or a field name
to such a dict), which :func:`norm_rules` turns into rules. A gradient norm
is judged only where a rule gives it an order; otherwise it is measured and
tabled.
"""

import numpy as np

from mmsverify.errors import SolverError
from mmsverify.execute.norms import NORMS

__all__ = ["GRADIENT_NORMS", "ALL_NORMS", "check_gradients", "gradient_errors", "norm_rules",
           "gradient_norms_ruled"]

#: Norms measured when a solver returns gradients.
GRADIENT_NORMS = ("H1semi", "H1", "energy")
ALL_NORMS = NORMS + GRADIENT_NORMS


def check_gradients(gradients, problem, values, shape, where):
    """The solver's gradients as float arrays of the values' shape; raise :class:`SolverError` when wrong."""
    if gradients is None:
        return {}
    if not isinstance(gradients, dict):
        raise SolverError(f"{where}: Solution.gradients must be a dict of field name to a tuple of "
                          f"{problem.dim} arrays (one per dimension), got {type(gradients).__name__}")
    out = {}
    for name, g in gradients.items():
        if name not in values:
            raise SolverError(f"{where}: gradient of field {name!r} returned without its values; return the "
                              f"values too (fields with values: {', '.join(values)})")
        if not isinstance(g, (tuple, list)) or len(g) != problem.dim:
            raise SolverError(f"{where}: the gradient of {name!r} must hold {problem.dim} arrays, one per "
                              f"dimension (d{name}/dx, ...), got {type(g).__name__}")
        parts = []
        for axis, part in zip("xyz", g):
            a = np.asarray(part)
            if a.dtype.kind not in "iuf":
                raise SolverError(f"{where}: the gradient of {name!r} along {axis} holds {a.dtype} values, not "
                                  "real numbers")
            a = a.astype(float, copy=False)
            if a.shape != shape:
                try:
                    a = np.broadcast_to(a, shape)
                except ValueError:
                    raise SolverError(f"{where}: the gradient of {name!r} along {axis} has shape {a.shape}, "
                                      f"the values have shape {shape}; return one gradient per point") from None
            if not np.isfinite(a).all():
                raise SolverError(f"{where}: the gradient of {name!r} along {axis} has NaN/Inf entries")
            parts.append(a)
        out[name] = tuple(parts)
    return out


def gradient_errors(mms, name, gradient, points, weights, l2, t=None):
    """The gradient norms of one field (see the module text); ``l2`` is its L2 value error."""
    square = None
    for axis, g in enumerate(gradient):
        e = mms.gradient(name, *points, t=t, axis=axis)
        own = e.flags.owndata and e.flags.writeable and e.shape == g.shape and not any(
            np.may_share_memory(e, a) for a in (g, *points))
        e = np.subtract(g, e, out=e if own else None)
        e = np.multiply(e, e, out=e)
        square = e if square is None else np.add(square, e, out=square)
    w = np.broadcast_to(np.asarray(weights, dtype=float), square.shape)
    total = float(w.sum())
    semi = float(np.sqrt(_weighted_sum(w, square) / total))
    if "k" in mms.problem.names("parameters"):
        k = np.broadcast_to(mms.parameter("k", *points, t=t), square.shape)
        energy = float(np.sqrt(_weighted_sum(w, k, square) / total))
    else:
        energy = semi
    return {"H1semi": semi, "H1": float(np.hypot(l2, semi)), "energy": energy}


def _weighted_sum(*arrays):
    """``sum(a * b * ...)`` over arrays of one shape without a full-size temporary."""
    axes = "abcdefghijklmnop"[:arrays[0].ndim]
    return np.einsum(",".join([axes] * len(arrays)) + "->", *arrays)


def norm_rules(solver, problem, who):
    """A solver's ``norm_orders`` as order rules (selector -> settings, see :mod:`mmsverify.problem.rules`).

    Accepted forms: ``{"L2": 3, "H1semi": 2}`` (every field: selectors
    ``"L2"``, ``"H1semi"``) or ``{"u": {"L2": 3, "H1semi": 2}}`` (one field:
    ``"u L2"``, ``"u H1semi"``). Empty when the solver states none. The
    problem's ``[order.by]`` and the caller's rules override them.

    >>> class P1:
    ...     norm_orders = {"L2": 2, "H1semi": 1}
    >>> from mmsverify.problem.derive import problem_from_text
    >>> p = problem_from_text('[domain]\\nx = [0, 1]\\n[fields]\\nu = "x**3"')
    >>> norm_rules(P1(), p, "P1")
    {'L2': {'space': 2.0}, 'H1semi': {'space': 1.0}}
    """
    try:
        stated = getattr(solver, "norm_orders", None)
    except Exception:       # a property that cannot answer for this solver
        return {}
    if stated is None:
        return {}
    fix = ("state norm_orders as a dict of norm to order, e.g. {'L2': 3, 'H1semi': 2}, or of field to such "
           f"a dict; norms are {', '.join(ALL_NORMS)}")
    if not isinstance(stated, dict):
        raise SolverError(f"solver {who}: norm_orders must be a dict, got {type(stated).__name__}; {fix}")
    per_field = stated if stated and all(isinstance(v, dict) for v in stated.values()) else {None: stated}
    out = {}
    for f, orders in per_field.items():
        if f is not None and f not in problem.field_names:
            continue        # a field of another problem this solver also solves
        if not isinstance(orders, dict):
            raise SolverError(f"solver {who}: norm_orders of field {f!r} must be a dict; {fix}")
        for n, p in orders.items():
            if n not in ALL_NORMS:
                raise SolverError(f"solver {who}: norm_orders names unknown norm {n!r}; {fix}")
            if isinstance(p, bool) or not isinstance(p, (int, float)) or not p > 0:
                raise SolverError(f"solver {who}: norm_orders[{n!r}] must be a positive number, got {p!r}")
            out[n if f is None else f"{f} {n}"] = {"space": float(p)}
    return out


def gradient_norms_ruled(rules, field, axis="space"):
    """The gradient norms of ``field`` that a rule gives a formal order on ``axis``: the ones judged."""
    table = dict(rules)
    return tuple(n for n in GRADIENT_NORMS
                 if any(getattr(table.get(sel), axis, None) is not None for sel in (f"{field} {n}", n)))
