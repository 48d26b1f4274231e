"""Error models fitted over all levels of a study, for the verdict.

Two models of the error ``e`` against the size ``h`` (grid size or time step):

* :func:`power_fit`: ``e = C h**p``, a weighted least-squares line of
  ``ln e`` on ``ln h`` with a Student-t interval of ``p``. The weights
  ``(1/h_i) / sum(1/h_j)`` favour the finer levels, as in the least-squares
  error models of Eca and Hoekstra (J. Comput. Phys. 262, 104-130, 2014).
* :func:`bend_fit`: ``e = C h**p + D h**(p+q)`` for a fixed ``q``, the
  leading term plus the next one. It tells levels outside the asymptotic
  range (where the second term still matters; Roy, J. Comput. Phys. 205,
  131-156, 2005) from a wrong leading order. ``p`` is found by a scan, with a
  profile (F-test) interval.

:func:`find_floor` finds a tail of levels on which the error stopped falling.

Levels are listed coarse to fine. Errors must be positive.
"""

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["PowerFit", "BendFit", "power_fit", "bend_fit", "fixed_fit", "floor_fit", "find_floor", "CONFIDENCE",
           "t_quantile", "f_quantile"]

#: Confidence level of every interval of the observed order.
CONFIDENCE = 0.95  # common practice


def t_quantile(p, df):
    """Quantile ``p`` of Student's t distribution with ``df`` degrees of freedom (as ``scipy.stats.t.ppf``,
    from ``scipy.special``, which loads in a fraction of the time)."""
    from scipy import special
    return float(special.stdtrit(df, p))


def f_quantile(p, dfn, dfd):
    """Quantile ``p`` of the F distribution with ``dfn`` and ``dfd`` degrees of freedom (as ``scipy.stats.f.ppf``)."""
    from scipy import special
    return float(special.fdtri(dfn, dfd, p))


@dataclass(frozen=True)
class PowerFit:
    """``e = C h**p`` over the levels: ``p`` with interval ``low .. high`` (NaN with two levels),
    and the weighted rms residual of ``ln e``."""

    p: float
    low: float
    high: float
    rms: float
    n: int


@dataclass(frozen=True)
class BendFit:
    """``e = C h**p + D h**(p+q)``: ``p`` with its profile interval, the relative rms residual,
    and the local order ``d ln e / d ln h`` of the fitted model at each level."""

    p: float
    low: float
    high: float
    rms: float
    q: float
    local: tuple


def _weights(h):
    w = 1.0 / np.asarray(h, dtype=float)
    return w * (len(w) / w.sum())       # mean 1, so the residual variance keeps its usual scale


def power_fit(h, e, confidence=CONFIDENCE):
    """Weighted least-squares order over all levels.

    Examples
    --------
    >>> f = power_fit([0.1, 0.05, 0.025], [1e-2, 2.5e-3, 6.25e-4])
    >>> round(f.p, 9), round(f.low, 9), round(f.high, 9)
    (2.0, 2.0, 2.0)
    """
    x, y = np.log(np.asarray(h, float)), np.log(np.asarray(e, float))
    n, w = len(x), _weights(h)
    xm, ym = np.average(x, weights=w), np.average(y, weights=w)
    sxx = float(np.sum(w * (x - xm) ** 2))
    p = float(np.sum(w * (x - xm) * (y - ym)) / sxx)
    r = y - (ym + p * (x - xm))
    ss = float(np.sum(w * r ** 2))
    if n > 2:
        half = t_quantile(0.5 + confidence / 2, n - 2) * math.sqrt(ss / (n - 2) / sxx)
        low, high = p - half, p + half
    else:
        low = high = math.nan
    return PowerFit(p, low, high, math.sqrt(ss / n), n)


def _scan(h, e, p_max, second):
    """Best ``p`` of ``e = C h**p + D g(h, p)`` (``second(h, p)`` gives ``g``) by a scan, with C and D
    solved at each ``p``; returns the scanned orders, residual sums, C and D."""
    n, w = len(h), _weights(h)
    ps = np.arange(0.01, p_max, 0.001)
    a = h[None, :] ** ps[:, None] / e[None, :]          # (P, n): columns of the linear problem
    b = second(h[None, :], ps[:, None]) / e[None, :]
    sw = w[None, :]
    aa, ab, bb = (sw * a * a).sum(1), (sw * a * b).sum(1), (sw * b * b).sum(1)
    a1, b1 = (sw * a).sum(1), (sw * b).sum(1)
    det = aa * bb - ab * ab
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        C = (a1 * bb - b1 * ab) / det
        D = (aa * b1 - ab * a1) / det
        ss = (sw * (C[:, None] * a + D[:, None] * b - 1.0) ** 2).sum(1)
    ss[~np.isfinite(ss)] = np.inf
    return ps, ss, C, D


def fixed_fit(h, e, p, q):
    """Relative rms residual of ``e = C h**p + D h**(p+q)`` with ``p`` given: how well the levels follow
    a known leading order and the next term of its series."""
    h, e = np.asarray(h, float), np.asarray(e, float)
    w = _weights(h)
    A = np.column_stack([h ** p / e, h ** (p + q) / e]) * np.sqrt(w)[:, None]
    coef, *_ = np.linalg.lstsq(A, np.sqrt(w), rcond=None)
    return math.sqrt(float(np.sum((A @ coef - np.sqrt(w)) ** 2)) / len(h))


def floor_fit(h, e, p_max):
    """``e = C h**p + F`` over four or more levels: ``(p, F, rms)``, the relative rms residual.

    ``F`` is an error that does not shrink with ``h`` (a frozen resolution, iteration error).
    """
    h, e = np.asarray(h, float), np.asarray(e, float)
    ps, ss, C, F = _scan(h, e, p_max, lambda hh, p: np.ones_like(hh * p))
    k = int(np.argmin(ss))
    return float(ps[k]), float(F[k]), math.sqrt(ss[k] / len(h))


def bend_fit(h, e, q, p_max, confidence=CONFIDENCE):
    """Leading order with the next term ``h**(p+q)``, over four or more levels.

    ``C`` and ``D`` are linear for a fixed ``p``, so ``p`` is scanned (step
    0.001 from 0.01 to ``p_max``) and at each ``p`` the weighted relative
    residuals ``(C h**p + D h**(p+q)) / e - 1`` are minimised. The interval
    holds every ``p`` whose residual sum is within the F-test bound of the
    best one.
    """
    h, e = np.asarray(h, float), np.asarray(e, float)
    n = len(h)
    ps, ss, C, D = _scan(h, e, p_max, lambda hh, p: hh ** (p + q))
    k = int(np.argmin(ss))
    bound = ss[k] * (1.0 + f_quantile(confidence, 1, n - 3) / (n - 3))
    inside = ps[ss <= max(bound, ss[k])]
    term = D[k] * h ** q
    local = ps[k] + q * term / (C[k] + term)
    return BendFit(float(ps[k]), float(inside.min()), float(inside.max()), math.sqrt(ss[k] / n), float(q),
                   tuple(float(v) for v in local))


#: A pair of levels "falls" when its order is at least this fraction of the formal order, and has
#: "stopped falling" below _STALLED of it.  # common practice
_FALLING, _STALLED = 0.5, 0.2


def find_floor(h, e, formal):
    """``(j, F)``: the last level ``j`` before a floor and the floor's size, or None.

    A floor is a tail of levels over which the error no longer falls (its
    pair orders stay below a fifth of the formal order) after the error
    fell at at least half the formal order on coarser levels; or, with four
    or more levels, a fit ``e = C h**p + F`` that explains the levels
    (three times smaller rms residual than the power law, and smaller
    than a fit with the next term) with ``F`` at
    least a fifth of the finest error, provided the finest pair falls slower
    than the formal order. Levels before the floor are those whose error is
    more than four times ``F`` (at least the finest one is not).
    """
    h, e = np.asarray(h, float), np.asarray(e, float)
    q = np.log(e[:-1] / e[1:]) / np.log(h[:-1] / h[1:])
    j = len(q)
    while j > 0 and q[j - 1] < _STALLED * formal:
        j -= 1
    if j < len(q) and np.any(q[:j] >= _FALLING * formal):
        return j, float(np.median(e[j + 1:]))
    # a floor slows the finest pair below the formal order; a tail still falling at the formal order or faster
    # is approaching its asymptotic range (a next term fading), not levelling off
    if len(h) >= 4 and q[-1] < formal:
        p, F, rms = floor_fit(h, e, max(8.0, 3.0 * formal))
        # the floor must explain the levels better than the power law and than a next term of the series
        bend = min(bend_fit(h, e, q, max(8.0, 3.0 * formal)).rms for q in (1.0, 2.0))
        if F >= 0.2 * e[-1] and rms * 3 < power_fit(h, e).rms and rms < bend and p >= _FALLING * formal:
            before = np.nonzero(e > 4 * F)[0]
            return (min(int(before[-1]), len(h) - 2) if before.size else -1), F
    return None
