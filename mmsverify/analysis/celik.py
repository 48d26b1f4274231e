"""Groundwork shared by the grid-refinement analyses (Celik et al. 2008).

Every analysis takes levels coarse to fine with strictly decreasing sizes
(:func:`as_levels`); sizes may come as cell counts, turned into a
representative size by Celik et al. (2008), Eq. (1) (:func:`representative_h`,
:func:`grid_sizes`); three levels give the apparent order of Eqs. (3a)-(3c)
(:func:`apparent_order`); and the GCI takes the safety factors of Roache
(1998). :func:`representative_h` is public as ``mmsverify.analysis.gci.representative_h``.
"""

import math

import numpy as np

from mmsverify.errors import AnalysisError

__all__ = ["representative_h", "as_levels", "grid_sizes", "apparent_order", "FS2", "FS3"]

FS3, FS2 = 1.25, 3.0  # Roache (1998) safety factors for >= 3 grids and for 2 grids


def as_levels(h, y, name="e", need=2):
    """Validate ``h`` (strictly decreasing, positive) and ``y`` of equal length."""
    try:
        h = np.asarray(h, dtype=float)
        y = np.asarray(y, dtype=float)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"h and {name} must be sequences of numbers: {exc}") from None
    if h.ndim != 1 or h.shape != y.shape:
        raise AnalysisError(f"h and {name} must be 1-D of equal length, got shapes {h.shape} and {y.shape}")
    if len(h) < need:
        raise AnalysisError(f"this analysis needs at least {need} levels, got {len(h)}: run more grid levels")
    if not (np.all(np.isfinite(h)) and np.all(np.isfinite(y))):
        raise AnalysisError(f"h and {name} must be finite numbers (got h={h.tolist()}, {name}={y.tolist()})")
    if np.any(h <= 0):
        raise AnalysisError(f"grid sizes must be positive, got h={h.tolist()}")
    if len(h) > 1 and np.all(np.diff(h) > 0):
        raise AnalysisError(
            f"grid sizes must strictly decrease from coarse to fine, but they grow from first to last "
            f"(h={h.tolist()}): the levels are listed fine to coarse; reverse {name} and the sizes together")
    bad = np.nonzero(np.diff(h) >= 0)[0]
    if bad.size:
        k = int(bad[0])
        raise AnalysisError(
            f"grid sizes must strictly decrease from coarse to fine, but level {k + 1} (h={h[k + 1]:g}) is not finer "
            f"than level {k} (h={h[k]:g}); list the levels coarse to fine and drop repeated grids")
    return h, y


def representative_h(cells, dim, volume=None):
    """Representative cell size ``h = (V/N)**(1/d)`` (Celik et al. 2008, Eq. 1).

    Parameters
    ----------
    cells : array_like
        Number of cells (or nodes) of each grid.
    dim : int
        Number of space dimensions, 1 to 3.
    volume : float or array_like, optional
        Domain size (length, area or volume); 1 when not given, which gives
        ``h = (1/N)**(1/d)``. Ratios do not depend on it.

    Returns
    -------
    ndarray

    Examples
    --------
    >>> representative_h([4500, 18000], dim=2).round(6)
    array([0.014907, 0.007454])
    """
    try:
        N = np.asarray(cells, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"cells must be numbers, got {cells!r}") from None
    if dim not in (1, 2, 3):
        raise AnalysisError(f"dim must be 1, 2 or 3 (space dimensions of the grids), got {dim!r}")
    if N.ndim != 1 or not np.all(np.isfinite(N)) or np.any(N <= 0):
        raise AnalysisError(f"cell counts must be positive numbers, got {np.atleast_1d(N).tolist()}")
    V = 1.0 if volume is None else np.asarray(volume, dtype=float)
    if np.any(~np.isfinite(V)) or np.any(V <= 0):
        raise AnalysisError(f"volume must be positive, got {volume!r}")
    return (V / N) ** (1.0 / dim)


def grid_sizes(h, cells, dim, volume, n):
    """One place that turns h or (cells, dim, volume) into grid sizes."""
    if h is not None and cells is not None:
        raise AnalysisError("give either h (grid sizes) or cells (with dim), not both")
    if h is None and cells is None:
        raise AnalysisError("give the grid sizes h, or the cell counts cells together with dim")
    if cells is not None:
        if dim is None:
            raise AnalysisError("cell counts need the number of dimensions: pass dim=1, 2 or 3")
        if len(np.atleast_1d(cells)) != n:
            raise AnalysisError(f"{len(np.atleast_1d(cells))} cell counts for {n} values: give one per level")
        return representative_h(cells, dim, volume)
    return h


def apparent_order(r21, r32, eps21, eps32, tol=1e-13, maxiter=1000):
    """Apparent order of Celik et al. (2008), Eqs. (3a)-(3c), by fixed-point iteration.

    ``p = |ln|eps32/eps21| + q(p)| / ln r21`` with
    ``q(p) = ln((r21**p - s) / (r32**p - s))`` and ``s = sign(eps32/eps21)``.
    Returns ``(p, iterations)`` or ``(None, reason)``; a root bracket search is
    the fallback when the iteration does not settle.
    """
    ratio = eps32 / eps21
    s = 1.0 if ratio > 0 else -1.0
    lr = math.log(abs(ratio))
    ln21 = math.log(r21)
    p = abs(lr) / ln21
    for it in range(1, maxiter + 1):
        num, den = r21 ** p - s, r32 ** p - s
        if num <= 0 or den <= 0:
            break
        p_new = abs(lr + math.log(num / den)) / ln21
        if abs(p_new - p) <= tol * max(1.0, p):
            return p_new, it
        p = p_new
    # fallback: root of F(p) = p ln r21 + ln((r32^p - s)/(r21^p - s)) - ln|eps32/eps21|
    from scipy.optimize import brentq

    def F(q):
        return q * ln21 + math.log((r32 ** q - s) / (r21 ** q - s)) - lr

    grid = np.geomspace(1e-6, 50.0, 400)
    with np.errstate(all="ignore"):
        vals = []
        for q in grid:
            try:
                vals.append(F(q))
            except (ValueError, ZeroDivisionError, OverflowError):
                vals.append(np.nan)
    vals = np.asarray(vals)
    for i in range(len(grid) - 1):
        if np.isfinite(vals[i]) and np.isfinite(vals[i + 1]) and vals[i] * vals[i + 1] <= 0:
            return brentq(F, grid[i], grid[i + 1], xtol=1e-14), -1
    return None, "the order equation of Celik et al. (2008) has no positive root for these values"
