"""Planning the next grid: the size and run time needed to reach a target error.

:func:`plan` fits the errors (or the Richardson extrapolation of a quantity)
and the measured run times of the levels run so far, and predicts the grid
that meets the target, saying when the data are too weak for a firm
prediction. Importable from :mod:`mmsverify.analysis.estimate` as well.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import FS3, as_levels, grid_sizes
from mmsverify.analysis.text import fmt_num, fmt_kv, fmt_pct
from mmsverify.analysis.convergence import far_from_formal, asymptotic_check
from mmsverify.errors import AnalysisError
from mmsverify.analysis.gci import gci
from mmsverify.analysis.order import fit_order

__all__ = ["plan", "Plan"]

_MIN_ORDER_R2 = 0.99  # common practice: a log-log error fit this straight is taken as a power law
_MIN_TIME_R2 = 0.9  # run times are noisier; below this the cost model is too weak to extrapolate
_MAX_EXTRAPOLATION = 4.0  # predictions beyond a factor 4 in h from the finest level are flagged


@dataclass(frozen=True)
class Plan:
    """Predicted grid and run time for a target error.

    Attributes
    ----------
    target : float
    measure : str
        ``"error"`` (absolute error) or ``"gci"`` (relative GCI, a fraction).
    order, constant : float or None
        Model ``error(h) = constant * h**order``.
    h_needed : float or None
    cells_needed : float or None
        Needs ``cells`` or ``dim``.
    time_needed : float or None
        Predicted run time, same unit as ``times``.
    time_exponent : float or None
        ``b`` of ``time = a N**b`` (or ``time = a h**-b`` without cell counts).
    time_model : str
        ``"cells"`` or ``"h"``: what the run times were fitted against.
    refinement : float or None
        ``h_finest / h_needed``.
    already_met : bool
        The finest level already meets the target.
    reliable : bool
        False when the data are too weak to predict; ``reasons`` says why.
    reasons : tuple of str
    advice : str
    """

    target: float
    measure: str
    order: object
    constant: object
    h_needed: object
    cells_needed: object
    time_needed: object
    time_exponent: object
    time_model: str
    refinement: object
    already_met: bool
    reliable: bool
    reasons: tuple
    advice: str

    def __str__(self):
        tgt = fmt_pct(self.target) if self.measure == "gci" else f"{self.target:.3g}"
        rows = [("target", f"{tgt} ({self.measure})"),
                (f"{self.measure} model", "n/a" if self.order is None else f"{self.constant:.4g} h^{self.order:.3g}"),
                ("h needed", fmt_num(self.h_needed, ".4g")),
                ("refinement from finest level", "n/a" if self.refinement is None else f"{self.refinement:.3g}x in h"),
                ("cells needed", fmt_num(self.cells_needed, ".4g")),
                (f"run time model (vs {self.time_model})",
                 "n/a" if self.time_exponent is None else f"exponent {self.time_exponent:.3g}"),
                ("predicted run time", fmt_num(self.time_needed, ".3g")),
                ("prediction reliable", "yes" if self.reliable else "NO")]
        text = fmt_kv(rows) + f"\nadvice: {self.advice}"
        return text + "".join(f"\nreason: {r}" for r in self.reasons)


def _loglog(x, y):
    """Least-squares line through (ln x, ln y): slope, intercept, r^2."""
    lx, ly = np.log(x), np.log(y)
    slope, icept = np.polyfit(lx, ly, 1)
    res = ly - (icept + slope * lx)
    tot = float(np.sum((ly - ly.mean()) ** 2))
    r2 = 1.0 - float(np.sum(res ** 2)) / tot if tot > 0 else 0.0
    return float(slope), float(icept), r2


def plan(h, values, times, target, *, kind="error", measure="error", cells=None, dim=None, volume=None,
         formal_order=None, safety_factor=FS3, time_unit="time units"):
    """Predict the grid size and run time needed to reach a target error.

    Parameters
    ----------
    h : array_like or None
        Grid sizes, coarse to fine (None when ``cells`` with ``dim`` are
        given; with both, ``h`` models the error and ``cells`` the run time).
    values : array_like
        Error norms (``kind="error"``, e.g. from a manufactured solution) or
        values of a quantity (``kind="solution"``).
    times : array_like
        Measured run time of each level (seconds, or any unit).
    time_unit : str, optional
        How the advice names the unit of ``times`` (default ``"time units"``).
    target : float
        Target absolute error (``measure="error"``) or relative GCI as a
        fraction (``measure="gci"``, only with ``kind="solution"``).
    kind : {"error", "solution"}
    measure : {"error", "gci"}
    cells, dim, volume
        Cell counts (with ``dim``) instead of ``h``; ``dim`` alone lets cell
        counts be predicted as ``volume / h**dim``.
    formal_order : float, optional
        Flags an observed order far from it; assumed with two solution levels.
    safety_factor : float, optional
        Fs of the predicted GCI (1.25).

    Returns
    -------
    Plan
        ``reliable`` is False, with reasons, when fewer than three levels
        were run, the error or time fit is poor, the levels are not in the
        asymptotic range, or the prediction extrapolates far.

    Notes
    -----
    Errors: ``e = C h^p`` fitted in log-log to the levels kept by
    :func:`~mmsverify.analysis.convergence.asymptotic_check`. Solutions: ``p`` and
    ``phi_ext`` from the finest three levels (Celik et al. 2008), so
    ``error(h) = |phi1 - phi_ext| (h/h1)^p`` and ``GCI(h) = Fs error(h)/|phi_ext|``.
    Run times: ``time = a N^b`` fitted to the finest three levels (coarse
    runs are dominated by start-up costs).

    Examples
    --------
    >>> h = [0.1, 0.05, 0.025]
    >>> pl = plan(h, [4e-3, 1e-3, 2.5e-4], [1.0, 4.0, 16.0], 4e-5, dim=2)
    >>> round(pl.h_needed, 9), round(pl.cells_needed), round(pl.time_needed, 6), pl.reliable
    (0.01, 10000, 100.0, True)
    """
    if kind not in ("error", "solution"):
        raise AnalysisError(f"kind must be 'error' or 'solution', got {kind!r}")
    if measure not in ("error", "gci"):
        raise AnalysisError(f"measure must be 'error' or 'gci', got {measure!r}")
    if measure == "gci" and kind == "error":
        raise AnalysisError("a GCI target needs values of the quantity (kind='solution'), not error norms")
    if not (isinstance(target, (int, float)) and math.isfinite(target) and target > 0):
        raise AnalysisError(f"target must be a positive number, got {target!r}")
    v = np.asarray(values, dtype=float)
    sizes = h if (h is not None and cells is not None) else grid_sizes(h, cells, dim, volume, len(v))
    hs, v = as_levels(sizes, v, "values", need=2)
    t = np.asarray(times, dtype=float)
    if t.shape != v.shape or not np.all(np.isfinite(t)) or np.any(t <= 0):
        raise AnalysisError(f"times must be positive, one per level ({len(v)}), got {np.atleast_1d(t).tolist()}")
    n = len(v)
    reasons = []
    if n < 3:
        reasons.append(f"only {n} levels: the order cannot be checked; run a third level")
    order = const = None
    if kind == "error":
        if np.any(v <= 0):
            raise AnalysisError("error norms must be positive for a log-log fit; drop levels with zero error")
        keep = n
        if n >= 3:
            chk = asymptotic_check(hs, v, formal_order)
            if chk.drop_levels:
                keep = chk.drop_levels[0]
                reasons.append(chk.message)
            elif chk.settled is False:
                reasons.append("the observed orders have not settled (not in the asymptotic range)")
        if keep >= 2:
            fit = fit_order(hs[:keep], v[:keep])
            order, const = fit.p, fit.C
            if keep >= 3 and fit.r_squared < _MIN_ORDER_R2:
                reasons.append(f"the errors follow a power law poorly (r^2 = {fit.r_squared:.3g})")
    else:
        if n == 2 and formal_order is None:
            raise AnalysisError("two levels of a quantity need formal_order to predict anything; run a third level")
        g = gci(v[-3:], h=hs[-3:], formal_order=formal_order, safety_factor=safety_factor)
        if g.valid and g.status != "oscillatory":   # the caution of an oscillatory GCI forbids a prediction
            order = g.p
            const = abs(v[-1] - g.phi_ext21) / hs[-1] ** order
        else:
            reasons.append(f"no valid Richardson extrapolation ({g.status}); no error model")
        if measure == "gci" and order is not None:
            if g.phi_ext21 == 0:
                raise AnalysisError("the extrapolated value is zero: a relative GCI target is undefined; use "
                                    "measure='error'")
            const = safety_factor * const / abs(g.phi_ext21)
    if far_from_formal(order, formal_order):
        reasons.append(f"observed order {order:.3g} is far from the formal order {formal_order:g}")
    # run-time model
    tail = slice(max(0, n - 3), n)
    if cells is not None:
        N = np.asarray(cells, dtype=float)
        if N.shape != v.shape or not np.all(N > 0):
            raise AnalysisError(f"cells must be positive, one per level ({n}), got {np.atleast_1d(N).tolist()}")
        model = "cells"
    elif dim is not None:
        N = (1.0 if volume is None else volume) / hs ** dim
        model = "cells"
    else:
        N, model = 1.0 / hs, "h"
    b, lna, r2t = _loglog(N[tail], t[tail])
    if n >= 3 and r2t < _MIN_TIME_R2:
        reasons.append(f"run times follow a power law poorly (r^2 = {r2t:.3g} on the finest levels)")
    if b <= 0:
        reasons.append(f"run times do not grow with the grid (exponent {b:.3g}); time them on larger grids")
    h_need = cells_need = time_need = refine = None
    met = False
    if order is None or order <= 0 or const == 0:
        advice = "the data are too weak to predict a grid: " + ("; ".join(reasons) or "no error model")
        return Plan(float(target), measure, order, const, None, None, None, b, model, None, False, False,
                    tuple(reasons), advice)
    h_need = float((target / const) ** (1.0 / order))
    refine = float(hs[-1] / h_need)
    if refine <= 1.0:
        met = True
    if refine > _MAX_EXTRAPOLATION:
        reasons.append(f"the prediction extrapolates {refine:.3g}x beyond the finest level in h; confirm with an "
                       "intermediate level")
    if model == "cells":
        dd = dim
        if dd is None:  # cells given without dim: infer the exponent from h and cells
            dd = -_loglog(hs, N)[0]
        cells_need = float(N[-1] * (hs[-1] / h_need) ** dd)
        time_need = float(math.exp(lna) * cells_need ** b)
    else:
        time_need = float(math.exp(lna) * (1.0 / h_need) ** b)
    reliable = not reasons
    if met:
        advice = (f"the finest level (h = {hs[-1]:.4g}) already meets the target; the model says h = {h_need:.4g} "
                  "would suffice")
    else:
        advice = (f"run a level with h = {h_need:.4g}" + (f" (about {cells_need:.3g} cells)" if cells_need else "")
                  + f", expected to take about {time_need:.3g} {time_unit}")
        if not reliable:
            advice = "rough guess only: " + advice + "; the data are too weak for a firm prediction (see reasons)"
    return Plan(float(target), measure, order, const, h_need, cells_need, time_need, b, model, refine, met, reliable,
                tuple(reasons), advice)
