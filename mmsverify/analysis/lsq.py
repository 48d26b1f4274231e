"""Numerical uncertainty of scattered grid-refinement data by least squares.

:func:`eca_hoekstra` fits all levels at once with the procedure of Eca and
Hoekstra (J. Comput. Phys. 262, 104-130, 2014), for data that the
three-grid GCI cannot handle: noisy, oscillating, or more than three levels.
Levels are listed coarse to fine (``h`` strictly decreasing).
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import as_levels
from mmsverify.analysis.text import fmt_num, fmt_pct, fmt_table
from mmsverify.errors import AnalysisError

__all__ = ["eca_hoekstra", "LeastSquaresUncertainty"]


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
            f"  observed order p = {fmt_num(self.p, '.4g')}   extrapolated value phi0 = {self.phi0:.8g}",
        ]
        rows = [(f"{h:.6g}", f"{v:.8g}", f"{e:.3g}", f"{u:.3g}",
                 fmt_pct(None if v == 0 else u / abs(v)))
                for h, v, e, u in zip(self.h, self.phi, self.error, self.uncertainty)]
        return "\n".join(head) + "\n" + fmt_table(("h", "phi", "error", "U", "U/|phi|"), rows)


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
    h, phi = as_levels(h, phi, "phi", need=4)
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
