"""Observed order of accuracy and related estimates.

Each numerical idiom lives here once; tests, reports and demos call it.

Conventions: levels are listed coarse to fine (``h`` strictly decreasing).
Results are frozen dataclasses whose ``str()`` is a readable table; a number
that cannot be given is ``None`` (or NaN inside arrays, documented per field)
and ``str()`` prints ``n/a`` with the reason instead.
"""

import math
from dataclasses import dataclass

import numpy as np

from ._celik import _apparent_order, _as_levels
from ._fmt import _fmt, _pct, _table
from .errors import AnalysisError

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

_EPS = np.finfo(float).eps


# --------------------------------------------------------------------------
# orders from errors
# --------------------------------------------------------------------------

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
        return _table(("quantity", "value"), rows)


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
    h, e = _as_levels(h, e, "e", need=2)
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
        from scipy import stats

        se = math.sqrt(ss_res / (n - 2) / sxx)
        t = float(stats.t.ppf(0.5 + confidence / 2.0, n - 2))
        lo, hi, note = p - t * se, p + t * se, ""
    else:
        lo = hi = float("nan")
        note = "two levels give no interval; run a third level"
    return OrderFit(p, math.exp(lnC), lo, hi, confidence, r2, math.sqrt(ss_res / n), n, note)


# --------------------------------------------------------------------------
# least-squares uncertainty for scattered data (Eca & Hoekstra 2014)
# --------------------------------------------------------------------------

# Candidate expansions of Eca & Hoekstra (2014): name -> exponents of h.
# The power expansion (p free) is handled separately.
_FIXED_FITS = {"p = 1": (1.0,), "p = 2": (2.0,), "h + h^2": (1.0, 2.0)}


def _weighted_lsq(h, phi, w, exponents):
    """Weighted linear least squares of phi = phi0 + sum_j a_j h**exponents[j]."""
    A = np.column_stack([np.ones_like(h)] + [h ** a for a in exponents])
    sw = np.sqrt(w)
    coef, *_ = np.linalg.lstsq(A * sw[:, None], phi * sw, rcond=None)
    return coef, A @ coef


def _sigma(phi, fit, w, n_params):
    # from memory: standard deviation of the fit, Eca & Hoekstra (2014):
    # sigma = sqrt(sum_i n_g w_i (phi_i - fit_i)^2 / (n_g - n_params)), weights summing to one
    n = len(phi)
    return math.sqrt(float(np.sum(n * w * (phi - fit) ** 2)) / (n - n_params))


def _power_fit(h, phi, w, p_max):
    """Fit phi = phi0 + alpha h**p with p free in (0, p_max]; returns (p, coef, fit)."""
    from scipy.optimize import minimize_scalar

    def sse(p):
        _, fit = _weighted_lsq(h, phi, w, (p,))
        return float(np.sum(w * (phi - fit) ** 2))

    grid = np.geomspace(1e-2, p_max, 300)
    vals = np.array([sse(p) for p in grid])
    k = int(np.argmin(vals))
    lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)]
    if hi > lo:
        best = minimize_scalar(sse, bounds=(lo, hi), method="bounded", options={"xatol": 1e-12})
        p = float(best.x) if best.fun <= vals[k] else float(grid[k])
    else:
        p = float(grid[k])
    coef, fit = _weighted_lsq(h, phi, w, (p,))
    return p, coef, fit


@dataclass(frozen=True)
class LeastSquaresUncertainty:
    """Numerical uncertainty from least-squares fits over many levels (Eca & Hoekstra 2014).

    Attributes
    ----------
    h, phi : tuple of float
        Levels, coarse to fine.
    phi0 : float
        Extrapolated value (h -> 0) of the fit used.
    p : float or None
        Observed order from the fit with ``p`` free (None when the data are
        not monotone, so no order is observed).
    fit_used : str
        ``"power (p free)"``, ``"p = 1"``, ``"p = 2"`` or ``"h + h^2"``.
    weighted : bool
        Whether the chosen fit used weights ``(1/h_i) / sum(1/h_j)``.
    sigma : float
        Standard deviation of the chosen fit.
    data_range : float
        Data range parameter ``(max phi - min phi) / (n - 1)``.
    safety_factor : float
        1.25 for well-behaved data, 3 otherwise.
    error : tuple of float
        Estimated discretization error of each level, ``|fit(h_i) - phi0|``.
    uncertainty : tuple of float
        Uncertainty ``U_phi`` of each level (absolute).
    candidates : tuple of tuple
        ``(name, weighted, sigma, phi0)`` of every fit tried.
    behaviour : str
        Which branch of the procedure applied, in words.
    """

    h: tuple
    phi: tuple
    phi0: float
    p: object
    fit_used: str
    weighted: bool
    sigma: float
    data_range: float
    safety_factor: float
    error: tuple
    uncertainty: tuple
    candidates: tuple
    behaviour: str

    @property
    def uncertainty_fine(self):
        """Uncertainty of the finest level (absolute)."""
        return self.uncertainty[-1]

    @property
    def relative_uncertainty_fine(self):
        """Uncertainty of the finest level relative to its value, or None if that value is 0."""
        return None if self.phi[-1] == 0 else self.uncertainty[-1] / abs(self.phi[-1])

    def __str__(self):
        head = [
            "Least-squares uncertainty estimate (Eca & Hoekstra 2014)",
            f"  behaviour: {self.behaviour}",
            f"  fit used: {self.fit_used} ({'weighted' if self.weighted else 'unweighted'}), "
            f"sigma = {self.sigma:.4g}, data range = {self.data_range:.4g}, Fs = {self.safety_factor:g}",
            f"  observed order p = {_fmt(self.p, '.4g')}   extrapolated value phi0 = {self.phi0:.8g}",
        ]
        rows = [(f"{h:.6g}", f"{v:.8g}", f"{e:.3g}", f"{u:.3g}",
                 _pct(None if v == 0 else u / abs(v)))
                for h, v, e, u in zip(self.h, self.phi, self.error, self.uncertainty)]
        return "\n".join(head) + "\n" + _table(("h", "phi", "error", "U", "U/|phi|"), rows)


def eca_hoekstra(h, phi, p_max=8.0):
    """Uncertainty of scattered grid-refinement data by the least-squares procedure
    of Eca & Hoekstra (J. Comput. Phys. 262, 104-130, 2014).

    The data are fitted with ``phi = phi0 + alpha h**p`` (p free), each fit
    unweighted and with weights ``(1/h_i)/sum(1/h_j)``, keeping the one with
    the smaller standard deviation ``sigma``. Then

    * ``0.5 <= p < 2``: the p-free fit gives the error;
    * ``p >= 2``: the smaller-``sigma`` of ``phi0 + a h**2`` and ``phi0 + a1 h + a2 h**2``;
    * ``p < 0.5`` or data not monotone: the smallest-``sigma`` of ``phi0 + a h``,
      ``phi0 + a h**2`` and ``phi0 + a1 h + a2 h**2``.

    With the data range parameter ``D = (max phi - min phi)/(n - 1)``, the
    safety factor is 1.25 when ``0.5 <= p < 2.1`` and ``sigma < D``, else 3, and
    ``U_i = Fs*eps_i + sigma + |phi_i - fit_i|`` when ``sigma < D``, otherwise
    ``U_i = 3 sigma/D * (eps_i + sigma + |phi_i - fit_i|)``.

    Parameters
    ----------
    h : array_like
        Representative grid sizes, coarse to fine (at least four levels).
    phi : array_like
        Values of the quantity at those levels.
    p_max : float, optional
        Upper bound of the order searched by the p-free fit.

    Returns
    -------
    LeastSquaresUncertainty

    Examples
    --------
    >>> h = [1.0, 0.8, 0.6, 0.5, 0.4]
    >>> res = eca_hoekstra(h, [2.0 + 0.3 * x ** 1.5 for x in h])
    >>> round(res.p, 6), round(res.phi0, 9), res.safety_factor
    (1.5, 2.0, 1.25)
    """
    # The paper itself could not be read here. Cross-checked against an independent
    # open-source port of the procedure: the weights (1/h_i)/sum(1/h_j), the data range
    # parameter, the rule Fs = 1.25 iff 0.5 <= p < 2.1 and sigma < D, both U formulas,
    # and the p < 0.5 fallback to the smallest-sigma of p = 1, p = 2 and h + h^2.
    # from memory: the normalisation of sigma (n_g - n_params), the p >= 2 branch,
    # treating non-monotone data as anomalous, and requiring four or more levels.
    h, phi = _as_levels(h, phi, "phi", need=4)
    n = len(h)
    d = np.diff(phi)
    if np.all(d == 0):
        raise AnalysisError(
            f"all {n} values are equal ({phi[0]:g}): there is no discretization error to fit; "
            "write more significant digits, or report the value as grid-insensitive")
    weights = {False: np.full(n, 1.0 / n), True: (1.0 / h) / np.sum(1.0 / h)}

    def best_of(names):
        best = None
        for name in names:
            for wflag, w in weights.items():
                if name == "power (p free)":
                    p, coef, fit = _power_fit(h, phi, w, p_max)
                    sig = _sigma(phi, fit, w, 3)
                else:
                    p = None
                    coef, fit = _weighted_lsq(h, phi, w, _FIXED_FITS[name])
                    sig = _sigma(phi, fit, w, 1 + len(_FIXED_FITS[name]))
                cand = (name, wflag, sig, float(coef[0]), fit, p)
                tried.append(cand[:4])
                if best is None or sig < best[2]:
                    best = cand
        return best

    tried = []
    monotone = bool(np.all(d > 0) or np.all(d < 0))
    power = best_of(["power (p free)"])
    p_obs = power[5] if monotone else None
    if monotone and 0.5 <= p_obs < 2.0:
        chosen, behaviour = power, f"monotone, 0.5 <= p = {p_obs:.3g} < 2: p-free fit used"
    elif monotone and p_obs >= 2.0:
        chosen = best_of(["p = 2", "h + h^2"])
        behaviour = f"monotone, p = {p_obs:.3g} >= 2: best of the second-order fits used"
    elif monotone:
        chosen = best_of(["p = 1", "p = 2", "h + h^2"])
        behaviour = f"monotone, p = {p_obs:.3g} < 0.5: best of the first/second-order fits used"
    else:
        chosen = best_of(["p = 1", "p = 2", "h + h^2"])
        behaviour = "not monotone (anomalous): best of the first/second-order fits used, Fs = 3"
    name, wflag, sig, phi0, fit, _ = chosen
    drange = float(phi.max() - phi.min()) / (n - 1)
    good = sig < drange
    fs = 1.25 if (monotone and 0.5 <= p_obs < 2.1 and good) else 3.0
    err = np.abs(fit - phi0)
    if good:
        U = fs * err + sig + np.abs(phi - fit)
    else:
        U = 3.0 * sig / drange * (err + sig + np.abs(phi - fit))
        behaviour += "; sigma >= data range: uncertainty scaled by 3 sigma / data range"
    return LeastSquaresUncertainty(
        tuple(h.tolist()), tuple(phi.tolist()), phi0, p_obs, name, wflag, sig, drange, fs,
        tuple(err.tolist()), tuple(U.tolist()), tuple(tried), behaviour)


# --------------------------------------------------------------------------
# convergence type
# --------------------------------------------------------------------------

_ADVICE = {
    "monotone": (
        "Richardson extrapolation and the GCI apply. Check that the observed order is near the formal "
        "order and that the asymptotic ratio GCI32/(r21^p GCI21) is near 1."),
    "oscillatory": (
        "No GCI is valid for oscillatory convergence. Refine further until the sign pattern settles, "
        "report the spread of the values as a band, or fit four or more levels with eca_hoekstra()."),
    "divergent": (
        "The differences grow as the grid is refined: the grids are outside the asymptotic range or "
        "something is wrong (iterations not converged, inconsistent boundary data, a coding mistake). "
        "Tighten the iterative convergence and check the model, then refine further; no error estimate "
        "can be given."),
    "scattered": (
        "The levels follow no single pattern. Look for levels outside the asymptotic range or for noise "
        "(iteration error, round-off) with asymptotic_check(), or fit all levels with eca_hoekstra()."),
    "insensitive": (
        "The values do not change between the finest levels (to round-off): the quantity is insensitive "
        "to the grid here, or it was written with too few digits. Output more significant digits; if the "
        "values really agree, the discretization error is below round-off and no GCI is needed."),
}


@dataclass(frozen=True)
class ConvergenceClass:
    """Convergence type of a sequence of levels.

    Attributes
    ----------
    kind : str
        ``"monotone"``, ``"oscillatory"``, ``"divergent"``, ``"scattered"`` or ``"insensitive"``.
    detail : str
        A finer description, e.g. ``"oscillatory divergence"``.
    ratios : tuple
        ``R_k = (phi[k+2]-phi[k+1]) / (phi[k+1]-phi[k])`` for each triplet of
        consecutive levels (finer change over coarser change); None for 0/0.
    limits : tuple of float
        The value of ``R`` above which a triplet counts as divergent: 1 for a
        constant ratio, ``ln(h[k+1]/h[k+2]) / ln(h[k]/h[k+1])`` in general (order -> 0).
    triplets : tuple of str
        Type of each triplet.
    advice : str
        What to do.
    """

    kind: str
    detail: str
    ratios: tuple
    limits: tuple
    triplets: tuple
    advice: str

    def __str__(self):
        rows = [(f"{k}-{k + 2}", _fmt(r, ".4g"), f"{lim:.4g}", t)
                for k, (r, lim, t) in enumerate(zip(self.ratios, self.limits, self.triplets))]
        return (f"convergence: {self.kind} ({self.detail})\n"
                + _table(("levels", "R", "R limit", "type"), rows) + f"\nadvice: {self.advice}")


def classify_convergence(phi, h=None, tol=None):
    """Classify the convergence of three or more levels (coarse to fine).

    For each triplet of consecutive levels ``R = (phi3 - phi2)/(phi2 - phi1)``
    in coarse-to-fine numbering (the change on the finer pair over the change
    on the coarser pair): ``0 < R < L`` monotone convergence, ``-L < R < 0``
    oscillatory convergence, ``R >= L`` monotone divergence, ``R <= -L``
    oscillatory divergence. ``L = 1`` without ``h`` (constant ratio); with
    ``h`` it is ``ln(h2/h3)/ln(h1/h2)``, the value of ``R`` for an order
    tending to zero, so that non-constant ratios are judged fairly.
    A difference within ``tol`` of zero counts as zero.

    Parameters
    ----------
    phi : array_like
        Values, coarse to fine, at least three.
    h : array_like, optional
        Grid sizes, coarse to fine.
    tol : float, optional
        Absolute tolerance for a zero difference; default ``64 eps max|phi|``.

    Returns
    -------
    ConvergenceClass
        Overall ``kind``: the common type of all triplets; ``"divergent"``
        when all diverge; ``"insensitive"`` when the finest levels agree to
        ``tol`` and nothing diverges; ``"scattered"`` for a mixture.

    Examples
    --------
    >>> classify_convergence([5.863, 5.972, 6.063]).kind
    'monotone'
    >>> classify_convergence([6.0909, 5.9624, 6.0042]).kind
    'oscillatory'
    >>> classify_convergence([1.0, 1.1, 1.3]).detail
    'monotone divergence'
    """
    phi = np.asarray(phi, dtype=float)
    if phi.ndim != 1 or len(phi) < 3:
        raise AnalysisError(f"classifying convergence needs values on at least three levels, got {phi.size}; "
                            "run a third grid")
    if not np.all(np.isfinite(phi)):
        raise AnalysisError(f"values must be finite numbers, got {phi.tolist()}")
    if h is not None:
        h, _ = _as_levels(h, phi, "phi", need=3)
        lh = np.log(h[:-1] / h[1:])
        limits = lh[1:] / lh[:-1]
    else:
        limits = np.ones(len(phi) - 2)
    if tol is None:
        tol = 64 * _EPS * max(float(np.max(np.abs(phi))), np.finfo(float).tiny)
    d = np.diff(phi)
    zero = np.abs(d) <= tol
    ratios, types = [], []
    for k in range(len(d) - 1):
        lim = float(limits[k])
        if zero[k] and zero[k + 1]:
            ratios.append(None)
            types.append("flat")
        elif zero[k + 1]:
            ratios.append(0.0)
            types.append("converged")
        elif zero[k]:
            ratios.append(math.inf)
            types.append("monotone divergence")
        else:
            R = float(d[k + 1] / d[k])
            ratios.append(R)
            if 0 < R < lim:
                types.append("monotone")
            elif -lim < R < 0:
                types.append("oscillatory")
            elif R >= lim:
                types.append("monotone divergence")
            else:
                types.append("oscillatory divergence")
    kinds = set(types)
    diverging = {"monotone divergence", "oscillatory divergence"}
    if np.all(zero):
        kind, detail = "insensitive", "all values equal to round-off"
    elif kinds <= {"monotone", "converged", "flat"} and types[-1] in ("converged", "flat"):
        kind, detail = "insensitive", "the finest levels agree to round-off"
    elif len(kinds) == 1 and types[0] in ("monotone", "oscillatory"):
        kind, detail = types[0], f"{types[0]} convergence"
    elif kinds <= diverging:
        kind, detail = "divergent", " and ".join(sorted(kinds))
    else:
        kind, detail = "scattered", "mixed: " + ", ".join(types)
    return ConvergenceClass(kind, detail, tuple(ratios), tuple(float(x) for x in limits), tuple(types),
                            _ADVICE[kind])


# --------------------------------------------------------------------------
# asymptotic range and error floors
# --------------------------------------------------------------------------

_ROUNDOFF_FACTOR = 1e3  # common practice: within ~1000 eps of the solution size counts as round-off
_HEALTHY, _STALLED = 0.5, 0.2  # fractions of the reference order: falling / stopped falling


@dataclass(frozen=True)
class AsymptoticCheck:
    """Whether observed orders have settled, and whether errors hit a floor.

    Attributes
    ----------
    kind : str
        ``"error"`` (values are error norms) or ``"solution"`` (values of a quantity).
    h : tuple of float
        Grid sizes, coarse to fine.
    orders : tuple
        Pairwise orders (errors) or triplet apparent orders (solutions); None where undefined.
    spread : float or None
        Max minus min of the finest (up to three) defined orders.
    settled : bool or None
        Spread within ``tol`` (relative to ``max(1, reference order)``); None if fewer than two orders.
    formal_order : float or None
        The design order, if given.
    near_formal : bool or None
        Finest order within ``tol`` (relative) of the formal order.
    floor : str or None
        ``"round-off"``, ``"iteration"`` (a floor well above round-off) or None.
    floor_value : float or None
        Size of the error (or level-to-level change) at the floor.
    drop_levels : tuple of int
        0-based indices of the levels to drop before estimating orders.
    tolerance_hint : float or None
        Iteration tolerance that would take the floor below the discretization error.
    message : str
        The finding and what to do, in words.
    """

    kind: str
    h: tuple
    orders: tuple
    spread: object
    settled: object
    formal_order: object
    near_formal: object
    floor: object
    floor_value: object
    drop_levels: tuple
    tolerance_hint: object
    message: str

    def __str__(self):
        label = "pair" if self.kind == "error" else "triplet"
        rows = [(f"{self.h[k]:.4g} -> {self.h[k + (1 if self.kind == 'error' else 2)]:.4g}", _fmt(p, ".4g"))
                for k, p in enumerate(self.orders)]
        lines = [f"asymptotic check ({self.kind} values, {label} orders)",
                 _table(("levels (h)", "order"), rows),
                 f"spread of finest orders: {_fmt(self.spread, '.3g')}   settled: {_yesno(self.settled)}"
                 + (f"   near formal order {self.formal_order:g}: {_yesno(self.near_formal)}"
                    if self.formal_order is not None else ""),
                 f"floor: {self.floor or 'none detected'}"
                 + (f" at about {self.floor_value:.3g}" if self.floor_value is not None else ""),
                 f"drop levels (0-based): {list(self.drop_levels) if self.drop_levels else 'none'}",
                 self.message]
        return "\n".join(lines)


def _yesno(b):
    return "n/a" if b is None else ("yes" if b else "no")


def asymptotic_check(h, e_or_phi, formal_order=None, *, kind="error", scale=None, tol=0.1):
    """Check that orders have settled and detect a round-off or iteration floor.

    Parameters
    ----------
    h : array_like
        Grid sizes, coarse to fine.
    e_or_phi : array_like
        Error norms (``kind="error"``, three or more levels) or values of a
        quantity (``kind="solution"``, four or more levels).
    formal_order : float, optional
        Design order; the reference for "settled" and "falling" when given.
    kind : {"error", "solution"}
        What ``e_or_phi`` holds.
    scale : float, optional
        Size of the solution (e.g. max |u|) for the round-off test of error
        norms; for solutions it defaults to ``max |phi|``, for errors to 1.
    tol : float, optional
        Relative tolerance on the spread of orders and the distance to the formal order.

    Returns
    -------
    AsymptoticCheck

    Notes
    -----
    A floor is reported when the error (or level-to-level change) falls at
    an order of at least half the reference order on coarse levels and then
    at less than a fifth of it on every finer level (the ratio of successive
    errors near 1). It is called round-off when its size is within about
    1000 machine epsilons of ``scale``, otherwise an iteration (or other)
    floor, with a hint for the solver tolerance.

    Examples
    --------
    >>> h = [0.1, 0.05, 0.025, 0.0125, 0.00625]
    >>> chk = asymptotic_check(h, [4e-3, 1e-3, 2.6e-4, 2.5e-4, 2.5e-4], formal_order=2)
    >>> chk.floor, chk.drop_levels
    ('iteration', (3, 4))
    >>> asymptotic_check(h, [4e-3, 1e-3, 2.5e-4, 6.25e-5, 1.5625e-5], formal_order=2).settled
    True
    """
    if kind not in ("error", "solution"):
        raise AnalysisError(f"kind must be 'error' or 'solution', got {kind!r}")
    need = 3 if kind == "error" else 4
    h, v = _as_levels(h, e_or_phi, "e_or_phi", need=need)
    n = len(h)
    if kind == "error":
        if np.any(v < 0):
            raise AnalysisError(f"error norms must be non-negative, got {v.tolist()}; pass norms, not signed errors")
        orders = [None if not np.isfinite(p) else float(p) for p in observed_orders(h, v)]
        proxy, first_level = v, 0
        S = 1.0 if scale is None else float(scale)
    else:
        d = np.diff(v)
        orders = []
        for k in range(n - 2):
            lim = math.log(h[k + 1] / h[k + 2]) / math.log(h[k] / h[k + 1])
            ok = d[k] != 0 and d[k + 1] != 0 and 0 < d[k + 1] / d[k] < lim  # monotone convergence only
            p = _apparent_order(h[k + 1] / h[k + 2], h[k] / h[k + 1], -d[k + 1], -d[k])[0] if ok else None
            orders.append(p)
        proxy, first_level = np.abs(d), 1
        S = float(np.max(np.abs(v))) if scale is None else float(scale)
    # stage orders of the proxy sequence (proxy j sits at level j + first_level)
    lvl = np.arange(len(proxy)) + first_level
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.log(proxy[:-1] / proxy[1:]) / np.log(h[lvl[:-1]] / h[lvl[1:]])
    # floor detection
    roundoff = _ROUNDOFF_FACTOR * _EPS * S
    qs = np.where(np.isnan(q), -np.inf, q)  # 0/0 counts as stalled
    coarse_q = q[:max(1, len(q) - 1)]
    coarse_q = coarse_q[np.isfinite(coarse_q)]
    ref = formal_order if formal_order is not None else (float(np.median(coarse_q)) if coarse_q.size else 0.0)
    floor = floor_value = hint = None
    drop = ()
    msgs = []
    if ref > 0:
        stalled = qs < _STALLED * ref
        healthy = qs >= _HEALTHY * ref
        j0 = len(q)
        while j0 > 0 and stalled[j0 - 1]:
            j0 -= 1
        if j0 < len(q) and np.any(healthy[:j0]):
            first_bad = int(lvl[j0 + 1])
            drop = tuple(range(first_bad, n))
            floor_value = float(np.median(proxy[j0 + 1:]))
            what = "errors" if kind == "error" else "level-to-level changes"
            hs = ", ".join(f"{h[i]:g}" for i in drop)
            if floor_value <= roundoff:
                floor = "round-off"
                msgs.append(f"{what} stop falling at about {floor_value:.3g}, within round-off of the solution "
                            f"size {S:.3g}: drop the levels with h = {hs}; finer grids cannot help in double precision.")
            else:
                floor = "iteration"
                good_order = float(np.max(q[:j0][np.isfinite(q[:j0])])) if formal_order is None else formal_order
                expected = float(proxy[j0] * (h[lvl[-1]] / h[lvl[j0]]) ** good_order)
                hint = expected / 10.0
                msgs.append(f"{what} stop falling at about {floor_value:.3g}, far above round-off: most likely "
                            f"the iterative (solver) tolerance. Tighten it below about {hint:.1g} (a tenth of the "
                            f"{'error' if kind == 'error' else 'change'} expected on the finest level), or drop the "
                            f"levels with h = {hs}.")
    if floor is None and proxy[-1] <= roundoff:
        msgs.append(f"the finest {'error' if kind == 'error' else 'change'} ({proxy[-1]:.3g}) is at round-off "
                    f"relative to {S:.3g}; its order is noise: drop the level with h = {h[-1]:g}.")
        drop = (n - 1,)
        floor, floor_value = "round-off", float(proxy[-1])
    # settling, judged on the levels that are kept
    span = 1 if kind == "error" else 2
    first_dropped = drop[0] if drop else n
    defined = [p for k, p in enumerate(orders) if p is not None and k + span < first_dropped]
    fin = defined[-3:]
    spread = float(max(fin) - min(fin)) if len(fin) >= 2 else None
    ref_order = formal_order if formal_order is not None else (float(np.median(fin)) if fin else None)
    settled = None if spread is None else spread <= tol * max(1.0, abs(ref_order))
    near = None
    if formal_order is not None and defined:
        near = abs(defined[-1] - formal_order) <= tol * max(1.0, abs(formal_order))
    kept = "" if not drop else " (after dropping the floor levels)"
    if settled is None:
        msgs.append("too few defined orders to judge whether they have settled; add a level.")
    elif settled:
        msgs.append(f"the finest orders{kept} agree within {spread:.3g}: in the asymptotic range.")
    else:
        msgs.append(f"the finest orders{kept} still spread by {spread:.3g}: not yet in the asymptotic range; refine "
                    "further or drop the coarsest level.")
    if near is False:
        msgs.append(f"the finest order {defined[-1]:.3g} is not within {tol:g} (relative) of the formal order "
                    f"{formal_order:g}.")
    return AsymptoticCheck(kind, tuple(h.tolist()), tuple(orders), spread, settled, formal_order, near, floor,
                           floor_value, drop, hint, " ".join(msgs))
