"""Richardson extrapolation and the grid convergence index (GCI).

Follows Celik, Ghia, Roache, Freitas, Coleman and Raad, "Procedure for
Estimation and Reporting of Uncertainty Due to Discretization in CFD
Applications", J. Fluids Eng. 130(7), 078001 (2008), with the safety factors
of Roache (1998): 1.25 for three or more grids, 3 for two.

Levels are given coarse to fine, as everywhere in mmsverify; records use
Celik's numbering, 1 = finest, 3 = coarsest. Data that converge in an
oscillatory way or diverge never get a GCI: the record says why, and the
numbers the formulas would give are kept apart in ``formula``.
"""

import math
from dataclasses import dataclass

import numpy as np

from ._celik import _FS2, _FS3, _apparent_order, _as_levels, _sizes, representative_h
from ._fmt import _fmt, _pct, _table
from .errors import AnalysisError
from .order import classify_convergence

__all__ = [
    "representative_h",
    "gci",
    "GCIResult",
    "FormulaValues",
    "gci_profile",
    "ProfileGCI",
    "plot_profile",
    "MIN_RATIO",
]

#: Smallest refinement ratio Celik et al. (2008) recommend between grids.
MIN_RATIO = 1.3  # common practice (Celik et al. 2008 recommend r > 1.3)
_ASYMPTOTIC_BAND = 0.1  # common practice: asymptotic ratio within about 10 % of 1


@dataclass(frozen=True)
class FormulaValues:
    """What the formulas of Celik et al. (2008) give, whether or not the data meet
    their assumptions. For comparison with published tables; when
    ``GCIResult.valid`` is False these are not an uncertainty. None where a
    formula cannot be evaluated (no order, zero denominator)."""

    p: object = None
    phi_ext21: object = None
    phi_ext32: object = None
    e_ext21: object = None
    e_ext32: object = None
    gci_fine21: object = None
    gci_coarse21: object = None
    gci_fine32: object = None
    asymptotic_ratio: object = None

    def __str__(self):
        return _table(("formula value", "number"), [(k, _fmt(getattr(self, k), ".6g")) for k in self.__annotations__])


@dataclass(frozen=True)
class GCIResult:
    """Richardson extrapolation and GCI of the finest two or three grids.

    Attributes
    ----------
    h, phi : tuple of float
        Grids used, coarse to fine.
    r21, r32 : float or None
        Refinement ratios (r32 is None for two grids).
    eps21, eps32 : float or None
        ``phi2 - phi1`` and ``phi3 - phi2`` (Celik numbering, 1 = finest).
    e_a21, e_a32 : float or None
        Approximate relative errors ``|(phi1-phi2)/phi1|``, ``|(phi2-phi3)/phi2|``.
    status : str
        ``"monotone"`` (valid), ``"two-grid"`` (valid, assumed order),
        ``"oscillatory"``, ``"divergent"`` or ``"no-order"`` (not valid).
    valid : bool
        Whether the numbers below are an uncertainty estimate.
    p : float or None
        Apparent (or, for two grids, assumed) order.
    phi_ext21, phi_ext32, e_ext21, e_ext32 : float or None
        Extrapolated values and extrapolated relative errors.
    gci_fine21, gci_coarse21, gci_fine32 : float or None
        GCIs as fractions (0.022 means 2.2 %).
    u_fine21 : float or None
        Absolute uncertainty band of the fine value, ``Fs |eps21| / (r21^p - 1)``.
    asymptotic_ratio : float or None
        ``GCI_fine32 / (r21^p GCI_fine21)``; near 1 in the asymptotic range.
    safety_factor : float
    iterations : int or None
        Fixed-point iterations for ``p`` (-1: found by root bracketing).
    convergence : ConvergenceClass or None
    formula : FormulaValues
    warnings : tuple of str
    """

    h: tuple
    phi: tuple
    r21: float
    r32: object
    eps21: float
    eps32: object
    e_a21: object
    e_a32: object
    status: str
    valid: bool
    p: object
    phi_ext21: object
    phi_ext32: object
    e_ext21: object
    e_ext32: object
    gci_fine21: object
    gci_coarse21: object
    gci_fine32: object
    u_fine21: object
    asymptotic_ratio: object
    safety_factor: float
    iterations: object
    convergence: object
    formula: FormulaValues
    warnings: tuple

    def __str__(self):
        n = len(self.h)
        names = ["3 (coarse)", "2", "1 (fine)"][-n:] if n == 3 else ["2 (coarse)", "1 (fine)"]
        levels = _table(("grid", "h", "phi"), [(nm, f"{h:.6g}", f"{v:.8g}") for nm, h, v in zip(names, self.h, self.phi)])
        why = "" if self.valid else f"not given: {self.status} convergence" if self.status != "no-order" \
            else "not given: no apparent order"
        val = (lambda x, spec=".6g": _fmt(x, spec) if self.valid else why)
        pc = (lambda x: _pct(x) if self.valid else why)
        rows = [("r21, r32", f"{self.r21:.4g}, {_fmt(self.r32, '.4g')}"),
                ("convergence", self.status if self.convergence is None else
                 f"{self.convergence.kind} (R = {_fmt(self.convergence.ratios[-1], '.4g')})"),
                ("apparent order p" if self.status != "two-grid" else "assumed order p", val(self.p, ".4g")),
                ("phi_ext21", val(self.phi_ext21, ".8g")),
                ("e_a21", _pct(self.e_a21)),
                ("e_ext21", pc(self.e_ext21)),
                (f"GCI_fine21 (Fs = {self.safety_factor:g})", pc(self.gci_fine21)),
                ("uncertainty of phi1 (absolute)", val(self.u_fine21, ".3g"))]
        if n == 3:
            rows += [("GCI_coarse21", pc(self.gci_coarse21)), ("phi_ext32", val(self.phi_ext32, ".8g")),
                     ("e_a32", _pct(self.e_a32)), ("GCI_fine32", pc(self.gci_fine32)),
                     ("GCI32 / (r21^p GCI21)", val(self.asymptotic_ratio, ".4g"))]
        head = f"Richardson extrapolation and GCI (Celik et al. 2008), {n} grids: {'VALID' if self.valid else 'NOT VALID'}"
        text = head + "\n" + levels + "\n" + _table(("quantity", "value"), rows)
        if self.warnings:
            text += "\n" + "\n".join("warning: " + w for w in self.warnings)
        return text


def _rel(num, den):
    return None if den == 0 else abs(num / den)


def gci(values, h=None, cells=None, dim=None, volume=None, formal_order=None, safety_factor=None):
    """Richardson extrapolation and GCI (Celik et al. 2008) from two or three grids.

    Parameters
    ----------
    values : array_like
        The quantity on each grid, coarse to fine. With more than three
        levels, the finest three are used.
    h : array_like, optional
        Grid sizes, coarse to fine (strictly decreasing).
    cells : array_like, optional
        Cell counts instead of ``h`` (needs ``dim``); ``h = (V/N)^(1/d)``.
    dim : int, optional
        Number of space dimensions for ``cells``.
    volume : float, optional
        Domain size for ``cells`` (default 1).
    formal_order : float, optional
        Design order; required for two grids, where it is assumed.
    safety_factor : float, optional
        Overrides 1.25 (three grids) or 3 (two grids), Roache (1998).

    Returns
    -------
    GCIResult

    Raises
    ------
    AnalysisError
        Fewer than two grids, two grids without ``formal_order``, sizes not
        refined or not positive, or equal values on two grids.

    Examples
    --------
    >>> res = gci([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2)
    >>> res.valid, round(res.p, 2), round(res.phi_ext21, 4), round(100 * res.gci_fine21, 1)
    (True, 1.53, 6.1685, 2.2)
    """
    try:
        phi_all = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"values must be numbers, got {values!r}") from None
    if phi_all.ndim != 1 or len(phi_all) < 2:
        raise AnalysisError(f"a GCI needs values on at least two grids (three recommended), got {phi_all.size}")
    h_all = _sizes(h, cells, dim, volume, len(phi_all))
    h_all, phi_all = _as_levels(h_all, phi_all, "values", need=2)
    warnings = []
    if len(phi_all) > 3:
        warnings.append(f"{len(phi_all)} levels given; the GCI uses the finest three (see eca_hoekstra for all levels)")
    hh, ph = [float(x) for x in h_all[-3:]], [float(x) for x in phi_all[-3:]]
    n = len(ph)
    r21 = hh[-2] / hh[-1]
    phi1, phi2 = ph[-1], ph[-2]
    eps21 = phi2 - phi1
    if eps21 == 0:
        raise AnalysisError(
            f"the two finest grids give the same value ({phi1:g}): no order or error can be computed. The quantity "
            "is insensitive to the grid at this resolution or was written with too few digits; output more digits")
    e_a21 = _rel(phi1 - phi2, phi1)
    for r, name in [(r21, "r21")] + ([(hh[0] / hh[1], "r32")] if n == 3 else []):
        if r < MIN_RATIO:
            warnings.append(f"{name} = {r:.3g} is below {MIN_RATIO}, the minimum ratio Celik et al. (2008) recommend: "
                            "grid differences may be swamped by other errors")  # common practice
    if n == 2:
        if formal_order is None:
            raise AnalysisError("two grids need an assumed order: pass formal_order (the scheme's design order), "
                                "or better, run a third grid so the order can be measured")
        if formal_order <= 0:
            raise AnalysisError(f"formal_order must be positive, got {formal_order}")
        fs = _FS2 if safety_factor is None else float(safety_factor)
        p = float(formal_order)
        rp = r21 ** p
        phi_ext = (rp * phi1 - phi2) / (rp - 1)
        g = None if e_a21 is None else fs * e_a21 / (rp - 1)
        gc = None if g is None else g * rp
        e_ext = _rel(phi_ext - phi1, phi_ext)
        warnings.append(f"two grids: the order is assumed equal to the formal order {p:g} and Fs = {fs:g}; "
                        "run a third grid to measure it")
        formula = FormulaValues(p=p, phi_ext21=phi_ext, e_ext21=e_ext, gci_fine21=g, gci_coarse21=gc)
        return GCIResult(tuple(hh), tuple(ph), r21, None, eps21, None, e_a21, None, "two-grid", True, p, phi_ext,
                         None, e_ext, None, g, gc, None, fs * abs(eps21) / (rp - 1), None, fs, None, None, formula,
                         tuple(warnings))

    fs = _FS3 if safety_factor is None else float(safety_factor)
    phi3 = ph[0]
    r32 = hh[0] / hh[1]
    eps32 = phi3 - phi2
    if eps32 == 0:
        raise AnalysisError(
            f"the two coarsest of the three grids give the same value ({phi2:g}) while the finest differs: "
            "no order can be computed; check the coarse grid, output more digits, or add a grid")
    e_a32 = _rel(phi2 - phi3, phi2)
    conv = classify_convergence(ph, h=hh)
    p, it = _apparent_order(r21, r32, eps21, eps32)
    formula = FormulaValues()
    if p is not None and p > 0:
        rp21, rp32 = r21 ** p, r32 ** p
        ext21 = (rp21 * phi1 - phi2) / (rp21 - 1)
        ext32 = (rp32 * phi2 - phi3) / (rp32 - 1)
        g21 = None if e_a21 is None else fs * e_a21 / (rp21 - 1)
        g32 = None if e_a32 is None else fs * e_a32 / (rp32 - 1)
        formula = FormulaValues(p, ext21, ext32, _rel(ext21 - phi1, ext21), _rel(ext32 - phi2, ext32), g21,
                                None if g21 is None else g21 * rp21, g32,
                                None if (g21 is None or g32 is None or g21 == 0) else g32 / (rp21 * g21))
    if conv.kind == "monotone" and formula.p is not None:
        status = "monotone"
    elif conv.kind in ("oscillatory", "divergent"):
        status = conv.kind
    else:
        status = "no-order"
    valid = status == "monotone"
    if status == "oscillatory":
        warnings.append("oscillatory convergence (phi3-phi2 and phi2-phi1 differ in sign): no GCI is given. "
                        + conv.advice)
    elif status == "divergent":
        warnings.append(f"{conv.detail}: the differences grow with refinement; no GCI is given. " + conv.advice)
    elif status == "no-order":
        warnings.append(f"no apparent order could be found ({it if p is None else 'p <= 0'}); no GCI is given")
    f = formula if valid else FormulaValues()
    if valid:
        if f.asymptotic_ratio is not None and abs(f.asymptotic_ratio - 1) > _ASYMPTOTIC_BAND:
            warnings.append(f"GCI32/(r21^p GCI21) = {f.asymptotic_ratio:.3g}, not near 1: the grids may be outside "
                            "the asymptotic range")
        if e_a21 is None:
            warnings.append("phi1 is zero: relative errors and GCIs are undefined; use the absolute uncertainty")
    u = fs * abs(eps21) / (r21 ** f.p - 1) if valid else None
    return GCIResult(tuple(hh), tuple(ph), r21, r32, eps21, eps32, e_a21, e_a32, status, valid, f.p, f.phi_ext21,
                     f.phi_ext32, f.e_ext21, f.e_ext32, f.gci_fine21, f.gci_coarse21, f.gci_fine32, u,
                     f.asymptotic_ratio, fs, it if valid else None, conv, formula, tuple(warnings))


# --------------------------------------------------------------------------
# profiles and fields
# --------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class ProfileGCI:
    """Pointwise Richardson extrapolation and GCI of a profile or field.

    Coarse and medium solutions are interpolated to the fine grid's points.
    Arrays hold one entry per fine point; NaN marks "not available" there,
    and ``status`` says why.

    Attributes
    ----------
    points : ndarray
        Fine-grid points, shape ``(n,)`` for a line or ``(n, d)``.
    phi1, phi2, phi3 : ndarray
        Fine values and the medium and coarse values interpolated to them.
    status : ndarray of str
        ``"monotone"``, ``"oscillatory"``, ``"divergent"``, ``"equal"``
        (no change between grids) or ``"outside"`` (outside a coarser grid).
    p_local : ndarray
        Apparent order at monotone points (NaN elsewhere).
    p_average : float or None
        Mean apparent order over monotone points, the global order indicator
        that Celik et al. (2008) recommend reporting.
    phi_ext : ndarray
        Extrapolated values ``phi_ext21``.
    gci : ndarray
        ``GCI_fine21`` as a fraction.
    error_bar : ndarray
        Absolute uncertainty ``Fs |eps21| / (r21^p - 1)`` (0 at "equal" points).
    order : str
        ``"local"`` (bars from each point's own order; none at oscillatory
        points) or ``"average"`` (bars from ``p_average`` at monotone and
        oscillatory points).
    r21, r32, safety_factor : float
    share_oscillatory : float
        Fraction of the points inside all grids that converge in an oscillatory way.
    """

    points: np.ndarray
    phi1: np.ndarray
    phi2: np.ndarray
    phi3: np.ndarray
    status: np.ndarray
    p_local: np.ndarray
    p_average: object
    phi_ext: np.ndarray
    gci: np.ndarray
    error_bar: np.ndarray
    order: str
    r21: float
    r32: float
    safety_factor: float
    share_oscillatory: float

    def count(self, status):
        """Number of points with the given status."""
        return int(np.sum(self.status == status))

    def __str__(self):
        n = len(self.status)
        inside = n - self.count("outside")
        rows = [(s, str(self.count(s)), _pct(self.count(s) / inside if inside else None))
                for s in ("monotone", "oscillatory", "divergent", "equal")]
        rows.append(("outside coarser grids", str(self.count("outside")), ""))
        mono = self.p_local[np.isfinite(self.p_local)]
        g = self.gci[np.isfinite(self.gci)]
        lines = [f"GCI along a profile (Celik et al. 2008): {n} fine-grid points, r21 = {self.r21:.4g}, "
                 f"r32 = {self.r32:.4g}, Fs = {self.safety_factor:g}",
                 _table(("points", "count", "share"), rows),
                 f"average apparent order (monotone points): {_fmt(self.p_average, '.4g')}"
                 + (f"   local range {mono.min():.3g} .. {mono.max():.3g}" if mono.size else ""),
                 f"error bars from the {self.order} order at {g.size} points"
                 + (f"; GCI_fine21 median {_pct(float(np.median(g)))}, max {_pct(float(g.max()))}" if g.size else "")]
        if self.share_oscillatory > 0:
            lines.append(f"warning: {_pct(self.share_oscillatory)} of the points converge in an oscillatory way"
                         + ("; they have no error bar" if self.order == "local" else
                            "; their bars rest on the average order only"))
        return "\n".join(lines)


def _interpolate(src_pts, src_val, dst_pts, label):
    """Linear interpolation of one grid's values to the fine points (NaN outside)."""
    from scipy.interpolate import griddata, interp1d

    if src_pts.shape[1] == 1:
        x = src_pts[:, 0]
        order = np.argsort(x, kind="stable")
        x, v = x[order], src_val[order]
        if np.any(np.diff(x) == 0):
            raise AnalysisError(f"the {label} grid has repeated points; give each point once")
        f = interp1d(x, v, kind="linear", bounds_error=False, fill_value=np.nan, assume_sorted=True)
        return f(dst_pts[:, 0])
    try:
        return griddata(src_pts, src_val, dst_pts, method="linear")
    except Exception as exc:  # scipy raises QhullError for degenerate point sets
        raise AnalysisError(f"cannot triangulate the {label} grid's points for interpolation ({exc}); "
                            "give points that span the domain in every dimension") from None


def _pointwise_order(r21, r32, eps21, eps32):
    """Vectorized fixed-point iteration of Celik et al. (2008) for ``p``; NaN where it fails."""
    with np.errstate(all="ignore"):
        s = np.sign(eps32 / eps21)
        L = np.log(np.abs(eps32 / eps21))
        ln21 = math.log(r21)
        p = np.abs(L) / ln21
        for _ in range(200):
            p_new = np.abs(L + np.log((r21 ** p - s) / (r32 ** p - s))) / ln21
            done = np.abs(p_new - p) <= 1e-12 * np.maximum(1.0, p)
            p = p_new
            if np.all(done | ~np.isfinite(p)):
                break
        bad = ~(np.isfinite(p) & done)
    for i in np.nonzero(bad)[0]:
        q, _ = _apparent_order(r21, r32, eps21[i], eps32[i])
        p[i] = np.nan if q is None else q
    return p


def _as_points(pts, label):
    try:
        a = np.asarray(pts, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"the {label} grid's points must be numbers") from None
    if a.ndim == 1:
        a = a[:, None]
    if a.ndim != 2 or a.shape[0] < 2 or not np.all(np.isfinite(a)):
        raise AnalysisError(f"the {label} grid's points must be a finite array of shape (n,) or (n, d) with n >= 2, "
                            f"got shape {np.shape(pts)}")
    return a


def gci_profile(points, values, h=None, cells=None, dim=None, volume=None, safety_factor=_FS3, order="local"):
    """Pointwise GCI of a profile (1-D line) or field (N-D scattered points) on three grids.

    Parameters
    ----------
    points : sequence of three array_like
        Each grid's points, coarse to fine; shape ``(n_i,)`` along a line or ``(n_i, d)``.
    values : sequence of three array_like
        The quantity at those points, coarse to fine.
    h, cells, dim, volume
        Grid sizes (or cell counts with ``dim``) of the three grids, as in :func:`gci`.
    safety_factor : float, optional
        1.25 by default (three grids).
    order : {"local", "average"}
        Order behind the error bars: each point's own apparent order, or the
        average apparent order over monotone points.

    Returns
    -------
    ProfileGCI

    Notes
    -----
    Coarse and medium values are interpolated linearly to the fine points
    (``scipy.interpolate.interp1d`` on a line, ``griddata`` otherwise); fine
    points outside a coarser grid get status ``"outside"``.

    Examples
    --------
    >>> x = [np.linspace(0, 1, n) for n in (11, 21, 41)]
    >>> hs = [0.1, 0.05, 0.025]
    >>> v = [1 + 2 * xi + 0.5 * hi ** 2 for xi, hi in zip(x, hs)]
    >>> prof = gci_profile(x, v, h=hs)
    >>> prof.count("monotone"), round(prof.p_average, 6)
    (41, 2.0)
    """
    if order not in ("local", "average"):
        raise AnalysisError(f"order must be 'local' or 'average', got {order!r}")
    if len(points) != 3 or len(values) != 3:
        raise AnalysisError(f"a profile GCI needs exactly three grids (coarse, medium, fine), got "
                            f"{len(points)} point sets and {len(values)} value sets")
    labels = ("coarse", "medium", "fine")
    pts = [_as_points(p, lab) for p, lab in zip(points, labels)]
    vals = []
    for p, v, lab in zip(pts, values, labels):
        a = np.asarray(v, dtype=float).ravel()
        if a.shape[0] != p.shape[0] or not np.all(np.isfinite(a)):
            raise AnalysisError(f"the {lab} grid has {p.shape[0]} points but {a.shape[0]} values (or non-finite "
                                "values): give one finite value per point")
        vals.append(a)
    if len({p.shape[1] for p in pts}) != 1:
        raise AnalysisError("the three grids' points have different numbers of coordinates")
    hs = _sizes(h, cells, dim, volume, 3)
    hs, _ = _as_levels(hs, [0.0, 0.0, 0.0], "values", need=3)
    r32, r21 = float(hs[0] / hs[1]), float(hs[1] / hs[2])
    fine = pts[2]
    phi1 = vals[2]
    phi3 = _interpolate(pts[0], vals[0], fine, "coarse")
    phi2 = _interpolate(pts[1], vals[1], fine, "medium")
    eps21, eps32 = phi2 - phi1, phi3 - phi2
    scale = max(float(np.max(np.abs(phi1))), np.finfo(float).tiny)
    zero_tol = 64 * np.finfo(float).eps * scale
    outside = ~(np.isfinite(phi2) & np.isfinite(phi3))
    equal = ~outside & ((np.abs(eps21) <= zero_tol) | (np.abs(eps32) <= zero_tol))
    lim = math.log(r21) / math.log(r32)
    with np.errstate(all="ignore"):
        R = eps21 / eps32
    status = np.full(len(phi1), "divergent", dtype=object)
    status[(R > 0) & (R < lim)] = "monotone"
    status[(R < 0) & (R > -lim)] = "oscillatory"
    status[equal] = "equal"
    status[outside] = "outside"
    status = status.astype(str)
    active = np.isin(status, ("monotone", "oscillatory"))
    p_all = np.full(len(phi1), np.nan)
    if np.any(active):
        p_all[active] = _pointwise_order(r21, r32, eps21[active], eps32[active])
    mono = (status == "monotone") & np.isfinite(p_all) & (p_all > 0)
    p_local = np.where(mono, p_all, np.nan)
    p_avg = float(np.mean(p_local[mono])) if np.any(mono) else None
    if order == "local":
        p_use = p_local
    else:
        p_use = np.where(active, np.nan if p_avg is None else p_avg, np.nan)
    with np.errstate(all="ignore"):
        denom = r21 ** p_use - 1.0
        phi_ext = np.where(equal, phi1, phi1 + (phi1 - phi2) / denom)
        bar = np.where(equal, 0.0, safety_factor * np.abs(eps21) / denom)
        g = np.where(phi1 != 0, bar / np.abs(phi1), np.nan)
    inside = int(np.sum(~outside))
    share = float(np.sum(status == "oscillatory")) / inside if inside else 0.0
    shape_pts = fine[:, 0] if fine.shape[1] == 1 else fine
    return ProfileGCI(shape_pts, phi1, phi2, phi3, status, p_local, p_avg, phi_ext, g, bar, order, r21, r32,
                      float(safety_factor), share)


def plot_profile(result, path, *, label="phi", title=None):
    """Draw a profile with GCI error bars and save it to ``path``.

    Parameters
    ----------
    result : ProfileGCI
    path : str or path-like
        Output file; the format follows the suffix (``.png``, ``.pdf``, ``.svg``).
    label : str, optional
        Name of the quantity for the axis.
    title : str, optional

    Returns
    -------
    str
        The path written.

    Notes
    -----
    A 1-D profile is drawn against its coordinate; an N-D field against
    the point index. Oscillatory points are marked; they carry an error bar
    only with ``order="average"``.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    if not isinstance(result, ProfileGCI):
        raise AnalysisError(f"plot_profile needs the record returned by gci_profile, got {type(result).__name__}")
    line = result.points.ndim == 1
    x = result.points if line else np.arange(len(result.phi1))
    idx = np.argsort(x, kind="stable")
    fig, ax = plt.subplots(figsize=(7, 4.5))
    ax.plot(x[idx], result.phi3[idx], ":", color="0.6", label="coarse (interpolated)")
    ax.plot(x[idx], result.phi2[idx], "--", color="0.4", label="medium (interpolated)")
    ok = np.isfinite(result.error_bar)
    ax.errorbar(x[ok], result.phi1[ok], yerr=result.error_bar[ok], fmt="o", ms=3, capsize=2, color="C0",
                label=f"fine, GCI error bars ({result.order} order)")
    ax.plot(x[~ok], result.phi1[~ok], "o", ms=3, color="C0")
    ext = np.isfinite(result.phi_ext)
    ax.plot(x[ext], result.phi_ext[ext], "s", ms=2, color="C2", label="extrapolated")
    osc = result.status == "oscillatory"
    if np.any(osc):
        ax.plot(x[osc], result.phi1[osc], "x", color="C3", ms=7, label="oscillatory convergence")
    ax.set_xlabel("x" if line else "point index")
    ax.set_ylabel(label)
    ax.set_title(title or f"{label}: p_ave = {_fmt(result.p_average, '.3g')}, "
                          f"oscillatory {_pct(result.share_oscillatory)}")
    ax.legend(fontsize="small")
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
    return str(path)
