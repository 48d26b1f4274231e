"""Pointwise Richardson extrapolation and GCI of a profile or field on three grids.

:func:`gci_profile` interpolates the coarse and medium solutions to the fine
grid's points and applies the procedure of Celik et al. (2008) point by
point, as :func:`~mmsverify.analysis.gci.gci` does for one number; :func:`plot_profile`
draws the result with error bars. Both are importable from
:mod:`mmsverify.analysis.gci` as well.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import FS3, apparent_order, as_levels, grid_sizes
from mmsverify.analysis.text import fmt_num, fmt_pct, fmt_table
from mmsverify.errors import AnalysisError

__all__ = ["gci_profile", "ProfileGCI", "plot_profile"]


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
    interpolation : str
        ``"cubic"`` or ``"linear"``: how the coarse and medium values reached
        the fine points (``"linear"`` also when cubic was asked for but is
        not available: fewer than four points on a line, or 3-D points).
    interpolation_effect : float or None
        Median over the points of ``(|c2 - l2| + |c3 - l3|) / (|eps21| + |eps32|)``,
        the change between the cubic (``c``) and linear (``l``) interpolants
        relative to the grid differences: an estimate of the linear
        interpolation error in units of the differences it would spoil. None
        when no cubic interpolant exists.
    warnings : tuple of str
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
    interpolation: str = "linear"
    interpolation_effect: object = None
    warnings: tuple = ()

    def count(self, status):
        """Number of points with the given status."""
        return int(np.sum(self.status == status))

    def __str__(self):
        n = len(self.status)
        inside = n - self.count("outside")
        rows = [(s, str(self.count(s)), fmt_pct(self.count(s) / inside if inside else None))
                for s in ("monotone", "oscillatory", "divergent", "equal")]
        rows.append(("outside coarser grids", str(self.count("outside")), ""))
        mono = self.p_local[np.isfinite(self.p_local)]
        g = self.gci[np.isfinite(self.gci)]
        lines = [f"GCI along a profile (Celik et al. 2008): {n} fine-grid points, r21 = {self.r21:.4g}, "
                 f"r32 = {self.r32:.4g}, Fs = {self.safety_factor:g}, {self.interpolation} interpolation"
                 + ("" if self.interpolation_effect is None else
                    f" (cubic vs linear: {self.interpolation_effect:.2g} of the grid differences)"),
                 fmt_table(("points", "count", "share"), rows),
                 f"average apparent order (monotone points): {fmt_num(self.p_average, '.4g')}"
                 + (f"   local range {mono.min():.3g} .. {mono.max():.3g}" if mono.size else ""),
                 f"error bars from the {self.order} order at {g.size} points"
                 + (f"; GCI_fine21 median {fmt_pct(float(np.median(g)))}, max {fmt_pct(float(g.max()))}" if g.size else "")]
        if self.share_oscillatory > 0:
            lines.append(f"warning: {fmt_pct(self.share_oscillatory)} of the points converge in an oscillatory way"
                         + ("; they have no error bar" if self.order == "local" else
                            "; their bars rest on the average order only"))
        lines += ["warning: " + w for w in self.warnings]
        return "\n".join(lines)


_INTERPOLATIONS = ("cubic", "linear")
_EFFECT_WARN = 0.1  # common practice: an interpolation error above ~10 % of the grid differences spoils the order


def _interpolate(src_pts, src_val, dst_pts, label):
    """Interpolate one grid's values to the fine points (NaN outside its span).

    Returns ``(cubic, linear)``: ``cubic`` is a not-a-knot cubic spline on a
    line (four or more points; fourth-order accurate for smooth data) or
    Clough-Tocher on a triangulation in 2-D, None where scipy has none
    (fewer than four points on a line, 3-D points).
    """
    from scipy.interpolate import CubicSpline, griddata, interp1d

    if src_pts.shape[1] == 1:
        x = src_pts[:, 0]
        order = np.argsort(x, kind="stable")
        x, v = x[order], src_val[order]
        if np.any(np.diff(x) == 0):
            raise AnalysisError(f"the {label} grid has repeated points; give each point once")
        lin = interp1d(x, v, kind="linear", bounds_error=False, fill_value=np.nan, assume_sorted=True)(dst_pts[:, 0])
        cub = CubicSpline(x, v, bc_type="not-a-knot", extrapolate=False)(dst_pts[:, 0]) if len(x) >= 4 else None
        return cub, lin
    try:
        lin = griddata(src_pts, src_val, dst_pts, method="linear")
        cub = griddata(src_pts, src_val, dst_pts, method="cubic") if src_pts.shape[1] == 2 else None
    except Exception as exc:  # scipy raises QhullError for degenerate point sets
        raise AnalysisError(f"cannot triangulate the {label} grid's points for interpolation ({exc}); "
                            "give points that span the domain in every dimension") from None
    return cub, lin


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
        q, _ = apparent_order(r21, r32, eps21[i], eps32[i])
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


def gci_profile(points, values, h=None, cells=None, dim=None, volume=None, safety_factor=FS3, order="local",
                interpolation="cubic"):
    """Pointwise GCI of a profile (1-D line) or field (N-D scattered points) on three grids.

    Parameters
    ----------
    points : sequence of three array_like
        Each grid's points, coarse to fine; shape ``(n_i,)`` along a line or ``(n_i, d)``.
    values : sequence of three array_like
        The quantity at those points, coarse to fine.
    h, cells, dim, volume
        Grid sizes (or cell counts with ``dim``) of the three grids, as in :func:`~mmsverify.analysis.gci.gci`.
    safety_factor : float, optional
        1.25 by default (three grids).
    order : {"local", "average"}
        Order behind the error bars: each point's own apparent order, or the
        average apparent order over monotone points.
    interpolation : {"cubic", "linear"}
        How coarse and medium values reach the fine points. Cubic (the
        default) is a not-a-knot spline on a line and Clough-Tocher in 2-D;
        linear is exact only for linear data and its error, ``H^2 f''/8``,
        is of the size of a second-order scheme's grid differences. Use
        linear for profiles with jumps, where a spline overshoots.

    Returns
    -------
    ProfileGCI

    Notes
    -----
    Coarse and medium values are interpolated to the fine points
    (``scipy.interpolate.CubicSpline`` on a line, ``griddata`` otherwise);
    fine points outside a coarser grid get status ``"outside"``. The linear
    interpolant is always formed too: its distance from the cubic one
    estimates the linear interpolation error, reported as
    ``interpolation_effect`` with a warning where linear interpolation is
    used and that error reaches a tenth of the grid differences.

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
    if interpolation not in _INTERPOLATIONS:
        raise AnalysisError(f"interpolation must be 'cubic' or 'linear', got {interpolation!r}")
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
    hs = grid_sizes(h, cells, dim, volume, 3)
    hs, _ = as_levels(hs, [0.0, 0.0, 0.0], "points, values", need=3)
    counts = [p.shape[0] for p in pts]
    if counts[0] > counts[1] > counts[2]:
        raise AnalysisError(f"the grids have {counts[0]}, {counts[1]} and {counts[2]} points from first to last while "
                            "the sizes run coarse to fine: the point sets seem listed fine to coarse; pass points, "
                            "values and sizes all coarse to fine")
    r32, r21 = float(hs[0] / hs[1]), float(hs[1] / hs[2])
    fine = pts[2]
    phi1 = vals[2]
    cub3, lin3 = _interpolate(pts[0], vals[0], fine, "coarse")
    cub2, lin2 = _interpolate(pts[1], vals[1], fine, "medium")
    have_cubic = cub2 is not None and cub3 is not None
    used = "cubic" if interpolation == "cubic" and have_cubic else "linear"
    phi3, phi2 = (cub3, cub2) if used == "cubic" else (lin3, lin2)
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
    effect = _interpolation_effect(cub2, lin2, cub3, lin3, eps21, eps32, ~outside & ~equal) if have_cubic else None
    warnings = []
    if used == "linear" and effect is not None and effect > _EFFECT_WARN:
        warnings.append(f"the linear interpolation error is about {effect:.2g} of the grid differences (median "
                        "over the points), enough to distort the orders and bars: use interpolation='cubic' or "
                        "sample the grids at coinciding points")
    elif used == "linear" and fine.shape[1] == 3:
        warnings.append("3-D points are interpolated linearly (no cubic scattered interpolation): its error, of "
                        "second order, may swamp a second-order scheme's grid differences; sample the grids at "
                        "coinciding points or along lines where possible")
    shape_pts = fine[:, 0] if fine.shape[1] == 1 else fine
    return ProfileGCI(shape_pts, phi1, phi2, phi3, status, p_local, p_avg, phi_ext, g, bar, order, r21, r32,
                      float(safety_factor), share, used, effect, tuple(warnings))


def _interpolation_effect(c2, l2, c3, l3, eps21, eps32, mask):
    """Median cubic-vs-linear change relative to the grid differences (None where no point counts)."""
    with np.errstate(all="ignore"):
        ratio = (np.abs(c2 - l2) + np.abs(c3 - l3)) / (np.abs(eps21) + np.abs(eps32))
    ratio = ratio[mask & np.isfinite(ratio)]
    return float(np.median(ratio)) if ratio.size else None


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
    ax.set_title(title or f"{label}: p_ave = {fmt_num(result.p_average, '.3g')}, "
                          f"oscillatory {fmt_pct(result.share_oscillatory)}")
    ax.legend(fontsize="small")
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
    return str(path)
