"""Observed order of accuracy from the errors of a sequence of levels.

:func:`observed_orders` gives the order of each pair of levels and
:func:`fit_order` fits ``error = C h**p`` over all of them.

The other order estimates have modules of their own and are importable from
here as well: :func:`~mmsverify.analysis.convergence.classify_convergence` and
:func:`~mmsverify.analysis.convergence.asymptotic_check` (convergence type, asymptotic
range, error floors) and :func:`~mmsverify.analysis.lsq.eca_hoekstra` (least-squares
uncertainty of scattered data).

Conventions: levels are listed coarse to fine (``h`` strictly decreasing).
Results are frozen dataclasses whose ``str()`` is a readable table; a number
that cannot be given is ``None`` (or NaN inside arrays, documented per field)
and ``str()`` prints ``n/a`` with the reason instead.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import as_levels
from mmsverify.analysis.text import fmt_table
from mmsverify.analysis.convergence import AsymptoticCheck, ConvergenceClass, asymptotic_check, classify_convergence
from mmsverify.errors import AnalysisError
from mmsverify.analysis.errormodel import t_quantile
from mmsverify.analysis.lsq import LeastSquaresUncertainty, eca_hoekstra

__all__ = [
    "observed_orders",
    "fit_order",
    "OrderFit",
    "eca_hoekstra",
    "LeastSquaresUncertainty",
    "classify_convergence",
    "ConvergenceClass",
    "asymptotic_check",
    "AsymptoticCheck",
]


def observed_orders(h, e):
    """Observed order for each consecutive pair of levels.

    Parameters
    ----------
    h : array_like
        Representative grid sizes, coarse to fine (any ratio).
    e : array_like
        Error measures (positive) at the same levels.

    Returns
    -------
    ndarray
        ``p[i] = ln(e[i]/e[i+1]) / ln(h[i]/h[i+1])``, length ``len(h) - 1``;
        NaN where an error is zero (exact result) so the caller can say so.

    Examples
    --------
    >>> observed_orders([0.1, 0.05, 0.025], [4e-3, 1e-3, 2.5e-4])
    array([2., 2.])
    """
    h = np.asarray(h, dtype=float)
    e = np.asarray(e, dtype=float)
    if h.shape != e.shape or h.ndim != 1:
        raise AnalysisError(f"h and e must be 1-D of equal length, got {h.shape} and {e.shape}")
    if len(h) < 2:
        raise AnalysisError("an observed order needs at least two levels")
    if np.any(h <= 0) or np.any(np.diff(h) >= 0):
        raise AnalysisError(f"grid sizes must be positive and strictly decreasing (coarse to fine), got {h.tolist()}")
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.log(e[:-1] / e[1:]) / np.log(h[:-1] / h[1:])
    p[~np.isfinite(p)] = np.nan
    return p


@dataclass(frozen=True)
class OrderFit:
    """Least-squares fit ``error = C h**p`` in log-log coordinates.

    Attributes
    ----------
    p, C : float
        Fitted order and constant.
    p_low, p_high : float
        Confidence interval of ``p`` (Student t); NaN with two levels (see ``note``).
    confidence : float
        Level of that interval, e.g. 0.95.
    r_squared : float
        Coefficient of determination of the log-log line.
    residual_rms : float
        Root-mean-square residual of ``ln e`` about the line.
    levels : int
        Number of levels fitted.
    note : str
        Why an interval is missing, or empty.
    """

    p: float
    C: float
    p_low: float
    p_high: float
    confidence: float
    r_squared: float
    residual_rms: float
    levels: int
    note: str = ""

    def __str__(self):
        if math.isnan(self.p_low):
            interval = f"n/a ({self.note})"
        else:
            interval = f"{self.p_low:.4g} .. {self.p_high:.4g}"
        rows = [
            ("fitted order p", f"{self.p:.4g}"),
            (f"{100 * self.confidence:g}% interval of p", interval),
            ("constant C (error = C h^p)", f"{self.C:.4g}"),
            ("r^2 of log-log line", f"{self.r_squared:.6f}"),
            ("rms residual of ln(error)", f"{self.residual_rms:.3g}"),
            ("levels", str(self.levels)),
        ]
        return fmt_table(("quantity", "value"), rows)


def fit_order(h, e, confidence=0.95):
    """Fit ``e = C h**p`` by least squares on ``ln e = ln C + p ln h``.

    Parameters
    ----------
    h : array_like
        Representative grid sizes, coarse to fine, positive, strictly decreasing.
    e : array_like
        Positive error measures at the same levels.
    confidence : float, optional
        Level of the Student-t interval of ``p`` (needs three or more levels).

    Returns
    -------
    OrderFit

    Raises
    ------
    AnalysisError
        Fewer than two levels, sizes not refined, or a non-positive error.

    Examples
    --------
    >>> fit = fit_order([0.1, 0.05, 0.025, 0.0125], [4e-3, 1e-3, 2.5e-4, 6.25e-5])
    >>> round(fit.p, 12), round(fit.C, 12)
    (2.0, 0.4)
    >>> round(fit.p_low, 9), round(fit.p_high, 9)
    (2.0, 2.0)
    """
    h, e = as_levels(h, e, "e", need=2)
    if not 0.0 < confidence < 1.0:
        raise AnalysisError(f"confidence must lie between 0 and 1 (e.g. 0.95), got {confidence}")
    bad = np.nonzero(e <= 0)[0]
    if bad.size:
        k = int(bad[0])
        raise AnalysisError(
            f"error at level {k} (h={h[k]:g}) is {e[k]:g}; a log-log fit needs positive errors: "
            "drop levels whose error is exactly zero (exact result) and pass norms, not signed errors")
    x, y = np.log(h), np.log(e)
    n = len(h)
    xm, ym = x.mean(), y.mean()
    sxx = float(np.sum((x - xm) ** 2))
    p = float(np.sum((x - xm) * (y - ym)) / sxx)
    lnC = ym - p * xm
    res = y - (lnC + p * x)
    ss_res = float(np.sum(res ** 2))
    ss_tot = float(np.sum((y - ym) ** 2))
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else (1.0 if ss_res == 0 else 0.0)
    if n >= 3:
        se = math.sqrt(ss_res / (n - 2) / sxx)
        t = t_quantile(0.5 + confidence / 2.0, n - 2)
        lo, hi, note = p - t * se, p + t * se, ""
    else:
        lo = hi = float("nan")
        note = "two levels give no interval; run a third level"
    return OrderFit(p, math.exp(lnC), lo, hi, confidence, r2, math.sqrt(ss_res / n), n, note)
