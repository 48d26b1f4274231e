"""Boundary data beyond the sides of a box: arbitrary points with outward normals, Robin, periodic.

A curved boundary (a disc, a cylinder in a channel) has no side name. At
any boundary points ``(x, y)`` with outward unit normals ``(nx, ny)`` a
solver asks for

* the value: ``mms.exact(name, x, y)``;
* the outward normal flux ``F(u) . n`` (``k grad u . n`` for diffusion,
  ``grad u . n`` for a field without a flux): ``mms.normal_flux_at(name,
  (x, y), (nx, ny))``;
* Robin data ``g = F(u) . n + alpha u`` for a boundary condition
  ``F(u) . n + alpha u = g``: ``mms.robin_data(name, (x, y), (nx, ny),
  alpha)``.

On a box, ``"robin"`` is a boundary kind with its coefficient in the
problem file, and ``"periodic"`` pairs opposite sides::

    [boundaries]
    x_max = "robin"
    robin = 2.5               # alpha of every Robin side, or {x_max = 2.5}
    y_min = "periodic"        # needs y_max periodic too, and a field periodic in y
    y_max = "periodic"

A convective (Newton cooling) condition ``-k du/dn = h_c (u - u_ext)`` is
the Robin form with ``alpha = h_c`` and ``g = h_c u_ext``: alpha is positive
for a well-posed problem, which the file check enforces.
"""

import math

import numpy as np

__all__ = ["normal_flux_at", "robin_data", "robin_coefficients", "periodic_problems"]


def _normals(points, normals, dim, who):
    from mmsverify.errors import ProblemError
    if len(points) != dim or len(normals) != dim:
        raise ProblemError(f"{who}: give {dim} coordinate arrays and {dim} normal components, got "
                           f"{len(points)} and {len(normals)}")
    n = [np.asarray(c, dtype=float) for c in normals]
    length = np.sqrt(sum(c * c for c in n))
    if not np.allclose(length, 1.0, rtol=1e-6, atol=1e-9):
        raise ProblemError(f"{who}: the normals must be unit vectors (lengths from {length.min():.3g} to "
                           f"{length.max():.3g}); divide each by its length")
    return n


def normal_flux_at(mms, name, points, normals, t=None):
    """Outward normal flux ``F(u) . n`` of a field at boundary points with unit normals ``n``.

    Fields whose operator defines no flux use the gradient (``grad u . n``).

    Examples
    --------
    >>> from mmsverify.problem.derive import derive
    >>> from mmsverify.problem.derive import problem_from_text
    >>> m = derive(problem_from_text('[domain]\\nx = [-1, 1]\\ny = [-1, 1]\\n[fields]\\nu = "x**2 + y**2"'))
    >>> s = np.sqrt(0.5)
    >>> round(float(normal_flux_at(m, "u", (s, s), (s, s))), 12)    # d/dr of r**2 at r = 1
    2.0
    """
    p = mms.problem
    n = _normals(points, normals, p.dim, f"{p.name}: normal flux of {name!r}")
    parts = mms.flux(name, *points, t=t) if name in mms.fluxes else mms.gradient(name, *points, t=t)
    total = None
    for c, nc in zip(parts, n):
        term = np.multiply(c, nc)
        total = term if total is None else total + term
    return total


def robin_data(mms, name, points, normals, alpha, t=None):
    """Robin data ``g = F(u) . n + alpha u`` at boundary points (see the module text)."""
    return normal_flux_at(mms, name, points, normals, t) + alpha * mms.exact(name, *points, t=t)


def robin_coefficients(kinds, given, fail):
    """Side -> alpha for every side with a Robin kind, from ``robin = ...`` in ``[boundaries]``.

    ``kinds`` maps (field, side) to the kind; ``fail(key, message)`` raises
    the problem file's error. Also checks that periodic sides come in pairs.
    """
    robin_sides = sorted({s for (_, s), k in kinds.items() if k == "robin"})
    for (f, s), k in kinds.items():
        if k == "periodic":
            other = s[:2] + ("max" if s.endswith("min") else "min")
            if kinds.get((f, other)) != "periodic":
                fail(s, f"field {f} is periodic on {s} but not on {other}; periodic sides come in pairs")
    if given is None:
        if robin_sides:
            fail(robin_sides[0], "a Robin side needs its coefficient: add robin = ALPHA (or {side = ALPHA}) "
                                 "under [boundaries]")
        return {}
    per_side = given if isinstance(given, dict) else {s: given for s in robin_sides}
    out = {}
    for s, a in per_side.items():
        if s not in robin_sides:
            fail("robin", f"side {s!r} has no Robin kind; Robin sides are {', '.join(robin_sides) or 'none'}")
        if isinstance(a, bool) or not isinstance(a, (int, float)) or not math.isfinite(a) or not a > 0:
            fail("robin", f"the Robin coefficient of {s} must be a positive number (convective coefficient "
                          f"alpha in F(u).n + alpha u = g), got {a!r:.60}")
        out[s] = float(a)
    missing = [s for s in robin_sides if s not in out]
    if missing:
        fail("robin", f"no Robin coefficient for side(s) {', '.join(missing)}")
    return out


def periodic_problems(mms, samples=7):
    """Messages for fields declared periodic whose values or normal derivatives differ across the pair.

    Checked at ``samples`` points per direction along the pair of sides
    (and the first time of a transient problem).
    """
    problem = mms.problem
    pairs = sorted({(f, s[0]) for (f, s), k in problem.boundaries.items() if k == "periodic"})
    if not pairs:
        return []
    t = problem.t_range[0] if problem.t is not None else None
    out = []
    for f, axis_name in pairs:
        a = "xyz".index(axis_name)
        grids = [np.linspace(lo, hi, samples) for lo, hi in zip(problem.lower, problem.upper)]
        lo, hi = list(grids), list(grids)
        lo[a], hi[a] = np.array([problem.lower[a]]), np.array([problem.upper[a]])
        lo, hi = np.meshgrid(*lo, indexing="ij"), np.meshgrid(*hi, indexing="ij")
        scale = max(1.0, float(np.max(np.abs(mms.exact(f, *lo, t=t)))))
        for what, fn in (("values", lambda c: mms.exact(f, *c, t=t)),
                         ("normal derivatives", lambda c: mms.gradient(f, *c, t=t, axis=a))):
            gap = float(np.max(np.abs(fn(lo) - fn(hi))))
            if gap > 1e-9 * scale:
                out.append(f"field {f} is declared periodic in {axis_name}, but its {what} on {axis_name}_min and "
                           f"{axis_name}_max differ by up to {gap:.3g}; choose a field periodic over the box")
                break
    return out
